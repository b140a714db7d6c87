"""Frequency plans: spacing, SI-prefixed input, files, and the meter-range check."""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.errors import InputError
from acquire.plan import (
    FrequencyPlan,
    check_range,
    linear_plan,
    list_plan,
    log_plan,
    make_plan,
    plan_from_file,
)


def test_log_plan_has_equal_ratios_and_exact_ends():
    plan = log_plan("100Hz", "10MHz", 201)
    f = plan.frequencies
    assert len(plan) == 201
    assert f[0] == 100.0 and f[-1] == 10e6
    # Five decades in 200 steps: each step is the 40th root of ten (definition of log spacing).
    ratio = f[1:] / f[:-1]
    assert np.allclose(ratio, 10 ** (1 / 40), rtol=1e-12)
    # numpy's own geometric spacing as an outside reference.
    assert np.allclose(f, np.geomspace(100, 1e7, 201), rtol=1e-12)
    assert f[40] == pytest.approx(1e3, rel=1e-12)


def test_linear_plan_has_equal_steps():
    plan = linear_plan("1k", "2kHz", 11)
    assert np.allclose(np.diff(plan.frequencies), 100.0)
    assert plan.spacing == "linear"
    assert plan.describe() == "11 points, linear, 1.000 kHz to 2.000 kHz"


def test_list_plan_accepts_prefixes_and_units():
    plan = list_plan("1k, 10kHz 2.5MHz")
    assert plan.frequencies.tolist() == [1e3, 1e4, 2.5e6]
    assert list_plan([100, "1k"]).frequencies.tolist() == [100.0, 1000.0]
    assert list_plan("1k").describe() == "1 point at 1.000 kHz"


def test_plan_is_read_only():
    plan = log_plan(10, 1000, 3)
    with pytest.raises(ValueError):
        plan.frequencies[0] = 5


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("1k, 500", "strictly increasing"),
        ("1k, 1k", "strictly increasing"),
        ("0, 1k", "above 0 Hz"),
        ("-5, 1k", "above 0 Hz"),
        ("1k, 10kH", "Hz"),
        ("1k, 4.7uH", "Hz"),
        ("", "empty"),
    ],
)
def test_bad_lists_are_refused_with_a_reason(text, fragment):
    with pytest.raises(InputError, match=fragment):
        list_plan(text)


def test_bad_spans_are_refused():
    with pytest.raises(InputError, match="must be above the start"):
        log_plan("1MHz", "1kHz", 11)
    with pytest.raises(InputError, match="at least 2 points"):
        log_plan("1k", "1M", 1)
    with pytest.raises(InputError, match="whole number"):
        log_plan("1k", "1M", "many")
    with pytest.raises(InputError, match="above 0 Hz"):
        linear_plan(0, 100, 5)


def test_plan_from_file_with_comments(tmp_path):
    path = tmp_path / "plan.txt"
    path.write_text("# bench plan\n100Hz\n1k, 10k  # audio\n\n100kHz 1MHz\n", encoding="utf-8")
    plan = plan_from_file(path)
    assert plan.frequencies.tolist() == [100.0, 1e3, 1e4, 1e5, 1e6]


def test_plan_from_file_errors_name_the_file(tmp_path):
    with pytest.raises(InputError, match="does not exist"):
        plan_from_file(tmp_path / "missing.txt")
    empty = tmp_path / "empty.txt"
    empty.write_text("# nothing\n", encoding="utf-8")
    with pytest.raises(InputError, match="no frequencies"):
        plan_from_file(empty)
    bad = tmp_path / "bad.txt"
    bad.write_text("1k\nten\n", encoding="utf-8")
    with pytest.raises(InputError, match="bad.txt"):
        plan_from_file(bad)


def test_make_plan_picks_exactly_one_source(tmp_path):
    assert len(make_plan(start="1k", stop="1M", points=31)) == 31
    assert make_plan(start="1k", stop="1M", points=4, spacing="linear").spacing == "linear"
    assert len(make_plan(values="1k,2k")) == 2
    with pytest.raises(InputError, match="not several"):
        make_plan(start="1k", stop="1M", values="1k")
    with pytest.raises(InputError, match="--start"):
        make_plan()
    with pytest.raises(InputError, match="spacing"):
        make_plan(start="1k", stop="1M", spacing="octave")


def test_check_range_refuses_before_anything_is_sent():
    plan = log_plan("5Hz", "1MHz", 11)
    with pytest.raises(InputError, match=r"5\.000 Hz to 1\.000 MHz.*10\.00 Hz to 30\.00 MHz"):
        check_range(plan, (10.0, 30e6))
    check_range(log_plan("10Hz", "30MHz", 11), (10.0, 30e6))
    with pytest.raises(InputError, match="narrow"):
        check_range(list_plan("1k, 31MHz"), (10.0, 30e6))


def test_chunks_cover_the_plan_in_order():
    plan = log_plan(1, 1e3, 10)
    blocks = list(plan.chunks(4))
    assert [b.size for b in blocks] == [4, 4, 2]
    assert np.array_equal(np.concatenate(blocks), plan.frequencies)


def test_frequency_plan_rejects_non_finite():
    with pytest.raises(InputError, match="finite"):
        FrequencyPlan(np.array([1.0, math.inf]))
