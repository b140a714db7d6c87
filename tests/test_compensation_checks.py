"""Judging reference sets and DUTs measured with them.

Sources: the fixture is a lumped series R-L residual with a shunt G-C stray (standard circuit
theory, from memory). The 10x accuracy rule for DUTs (|Zdut| > 10|Zs|, |Zo| > 10|Zdut|) is
common practice, no published source. The 10 ohm / 45 degree boundary between a short and an
open fixture and the 10 % / 50 % load limits are this project's own choices, documented in
acquire.compensation.checks; the tests below check that the rules do what that module says.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.compensation import Finding, ReferenceSet
from acquire.errors import CompensationError

GRID = np.logspace(2, 7, 51)
W = 2 * np.pi * GRID
SHORT = 0.02 + 1j * W * 30e-9
OPEN = SHORT + 1 / (1e-9 + 1j * W * 5e-12)
Z_LOAD = 100.0


def seen(zx):
    return SHORT + 1 / (1 / (OPEN - SHORT) + 1 / zx)


def good(**changes) -> ReferenceSet:
    kw = {"open": OPEN, "short": SHORT, "load": seen(Z_LOAD), "load_true": Z_LOAD}
    kw.update(changes)
    return ReferenceSet(GRID, **kw)


def only(findings: list[Finding], standard: str, severity: str = "error") -> Finding:
    hits = [x for x in findings if x.standard == standard and x.severity == severity]
    assert len(hits) == 1, findings
    return hits[0]


def test_a_sound_fixture_has_no_findings():
    assert good().check() == []
    assert good(load=None, load_true=None).check() == []


def test_fixture_left_open_during_the_short():
    # The "short" then reads like the open (capacitive, kilo-ohms): two errors, one per rule.
    found = good(short=OPEN.copy(), load=None, load_true=None).check()
    assert {(x.standard, x.severity) for x in found} == {("open", "error"), ("short", "error")}
    assert "close the fixture" in only(found, "short").message
    assert "51 of 51" in only(found, "open").message


def test_fixture_left_shorted_during_the_open():
    found = good(open=SHORT.copy(), load=None, load_true=None).check()
    messages = " ".join(x.message for x in found if x.standard == "open")
    assert "looks like a shorted fixture" in messages and "less than 10x" in messages
    assert all(x.severity == "error" for x in found)


def test_open_and_short_swapped():
    found = good(open=SHORT.copy(), short=OPEN.copy(), load=None, load_true=None).check()
    assert {x.standard for x in found} == {"open", "short"}
    assert any("swapped" in x.message for x in found)


def test_fixture_near_its_own_resonance_is_flagged_where_it_happens():
    # Long leads: 2 uH and 50 pF meet near 16 MHz, so open and short come within 10x above ~5 MHz.
    w = 2 * np.pi * GRID
    short = 0.05 + 1j * w * 2e-6
    open_ = short + 1 / (1j * w * 50e-12)
    # At a minority of the grid this is the fixture's own limit (a warning), not a mistake.
    found = ReferenceSet(GRID, open=open_, short=short).check()
    assert not [x for x in found if x.severity == "error"], found
    finding = only(found, "open", "warning")
    ratio = np.abs(open_) / np.abs(short)
    bad = GRID[ratio < 10]
    assert 0 < bad.size < GRID.size / 2
    assert f"at {bad.size} of 51 frequencies" in finding.message
    assert "the fixture itself limits accuracy" in finding.message
    assert finding.frequency == GRID[np.argmin(ratio)]


@pytest.mark.parametrize(("value", "word"), [(math.nan, "invalid"), (math.inf, "overrange")])
@pytest.mark.parametrize("standard", ["open", "short", "load"])
def test_non_finite_readings(value, word, standard):
    z = getattr(good(), standard).copy()
    z[7] = complex(value, value)
    found = good(**{standard: z}).check()
    finding = only(found, standard)
    assert word in finding.message and "1 of 51" in finding.message
    assert finding.frequency == GRID[7]
    assert len(found) == 1  # reported once, not again by the rules that compare standards


def test_grid_that_is_not_strictly_increasing():
    grid = GRID.copy()
    grid[20] = grid[19]
    finding = only(ReferenceSet(grid, short=SHORT).check(), "frequency")
    assert "strictly increasing" in finding.message and finding.frequency == grid[20]
    grid[20] = -1.0
    assert "above 0 Hz" in only(ReferenceSet(grid, short=SHORT).check(), "frequency").message


def test_empty_set_and_load_bookkeeping():
    assert only(ReferenceSet(GRID).check(), "set").severity == "error"
    found = good(load_true=None).check()
    assert "load_true" in only(found, "load").message
    found = good(load=None).check()
    assert only(found, "load_true", "warning")
    found = good(load_true=0.0).check()
    assert "non-zero" in only(found, "load_true").message


def test_wrong_load_standard_is_an_error_and_a_drifted_one_a_warning():
    wrong = good(load=seen(1000.0)).check()  # a 1 kohm part in place of the 100 ohm standard
    assert "wrong standard" in only(wrong, "load").message
    drifted = good(load=seen(Z_LOAD * 1.2)).check()
    finding = only(drifted, "load", "warning")
    assert "20.0%" in finding.message
    assert good(load=seen(Z_LOAD * 1.05)).check() == []


def test_dut_close_to_the_short_residual():
    # Common practice, no published source: a DUT within 10x of the short loses accuracy.
    dut = 5 * np.abs(SHORT) + 0j
    finding = only(good().check(dut=dut), "short", "warning")
    assert "within 10x of the short residual" in finding.message
    assert "51 of 51" in finding.message
    # Just outside the rule: nothing.
    assert good().check(dut=10.5 * np.abs(SHORT) + 0j) == []


def test_dut_close_to_the_open():
    # Common practice, no published source: the open must be 10x above the DUT.
    dut = np.abs(OPEN) / 5 + 0j
    finding = only(good().check(dut=dut), "open", "warning")
    assert "within 10x of the DUT" in finding.message
    assert good().check(dut=np.abs(OPEN) / 10.5 + 0j) == []


def test_dut_rule_counts_only_the_frequencies_concerned():
    # A 10 uH coil: near the open only at the top of the band.
    dut = 0.5 + 1j * W * 10e-6
    finding = only(good().check(dut=dut), "open", "warning")
    near = GRID[np.abs(OPEN) < 10 * np.abs(dut)]
    assert f"at {near.size} of 51 frequencies" in finding.message
    assert 0 < near.size < GRID.size and near.min() > 1e5


def test_dut_at_its_own_frequencies():
    f = np.array([1.5e3, 2.5e5])
    w = 2 * np.pi * f
    short = 0.02 + 1j * w * 30e-9
    assert only(good().check(dut=5 * np.abs(short), f=f), "short", "warning")
    outside = good().check(dut=[1 + 1j], f=[1e9])
    assert "outside the reference grid" in only(outside, "dut").message
    with pytest.raises(CompensationError, match="one reading per frequency"):
        good().check(dut=[1, 2, 3], f=[1e3, 2e3])


def test_findings_print_as_one_line():
    finding = only(good(short=OPEN.copy()).check(), "short")
    text = str(finding)
    assert text.startswith("error: short: ") and "\n" not in text
