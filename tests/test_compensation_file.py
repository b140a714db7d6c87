"""Saving and loading reference sets: exact round trip, refusal of damaged or unknown files.

Sources: JSON as specified by RFC 8259 (no NaN or Infinity literals, hence the strings for
non-finite values); SHA-256 as specified by FIPS 180-4, computed here with Python's hashlib;
ISO 8601 times via Python's datetime. Exactness is checked bit for bit on the float64 values.
"""

from __future__ import annotations

import hashlib
import json
import math
from datetime import UTC, datetime, timedelta, timezone

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from acquire.compensation import FORMAT, FORMAT_VERSION, ReferenceSet
from acquire.errors import CompensationError

GRID = np.logspace(2, 6, 9)


def sample(**kw) -> ReferenceSet:
    w = 2 * np.pi * GRID
    short = 0.1 / 3 + 1j * w * 7e-8
    base = {
        "open": short + 1 / (1j * w * 3.3e-12),
        "short": short,
        "load": 100.0 / 3 + short,
        "load_true": 100.0 / 3,
        "captured_at": datetime(
            2024, 5, 2, 11, 30, 15, 123456, tzinfo=timezone(timedelta(hours=2))
        ),
        "fixture": "test clips, bench 3",
        "meter": "simulated meter 1.0",
        "temperature": 23.4,
        "notes": "après nettoyage ∑ — unicode kept",
        "open_u": np.abs(short) * 1e-3 / 3,
        "short_u": np.full(GRID.shape, 1e-5 / 7),
        "repeats": 3,
        "grid_spacing": "log",
    }
    base.update(kw)
    return ReferenceSet(GRID, **base)


def bits(a: np.ndarray) -> np.ndarray:
    return np.ascontiguousarray(a).view(np.uint64)


def same(a: ReferenceSet, b: ReferenceSet) -> None:
    assert np.array_equal(bits(a.frequency), bits(b.frequency))
    for name in ("open", "short", "load", "load_true"):
        x, y = getattr(a, name), getattr(b, name)
        assert (x is None) == (y is None), name
        if x is not None:
            # NaN is stored as the text "nan": payload bits are not kept, NaN-ness and sign of
            # every other value are.
            for part in ("real", "imag"):
                px, py = getattr(x, part), getattr(y, part)
                both_nan = np.isnan(px) & np.isnan(py)
                assert np.array_equal(bits(px)[~both_nan], bits(py)[~both_nan]), name
                assert np.array_equal(np.isnan(px), np.isnan(py)), name
    for name in ("open_u", "short_u", "load_u"):
        x, y = getattr(a, name), getattr(b, name)
        assert (x is None) == (y is None), name
        if x is not None:
            assert np.array_equal(bits(x), bits(y)), name
    names = ("captured_at", "fixture", "meter", "temperature", "notes", "repeats", "grid_spacing")
    for name in names:
        assert getattr(a, name) == getattr(b, name), name


def test_file_round_trip_is_exact(tmp_path):
    refs = sample()
    path = tmp_path / "bench3.refs.json"
    refs.save(path)
    back = ReferenceSet.read(path)
    same(refs, back)
    assert back.captured_at.tzinfo == UTC
    assert back.captured_at == refs.captured_at
    assert back.method == "open-short-load"
    assert [p.name for p in tmp_path.iterdir()] == ["bench3.refs.json"]  # no temporary left


def test_file_is_self_describing_strict_json(tmp_path):
    path = tmp_path / "r.json"
    sample().save(path)
    d = json.loads(path.read_text(encoding="utf-8"))
    assert d["format"] == FORMAT and d["format_version"] == FORMAT_VERSION
    assert "hertz" in d["about"] and "ohm" in d["about"]
    assert set(d["impedance_ohm"]) == {"open", "short", "load", "load_true"}
    # RFC 8259: no NaN/Infinity literals anywhere, even with non-finite readings.
    s = sample(short=np.full(GRID.shape, complex(math.inf, math.nan)))
    s.save(path)
    json.loads(path.read_text(encoding="utf-8"), parse_constant=pytest.fail)


def test_dict_round_trip_and_json_safety():
    refs = sample(captured_at=None, temperature=None, load=None, load_true=None)
    d = refs.to_dict()
    text = json.dumps(d, allow_nan=False)
    same(refs, ReferenceSet.from_dict(json.loads(text)))


finite_or_not = st.floats(allow_nan=True, allow_infinity=True, width=64)


@settings(max_examples=30, deadline=None)
@given(
    values=st.lists(st.tuples(finite_or_not, finite_or_not), min_size=1, max_size=20),
    notes=st.text(max_size=30),
)
def test_any_float_survives_the_file(tmp_path_factory, values, notes):
    n = len(values)
    grid = np.cumsum(np.full(n, 0.1)) + 1.0 / 3
    z = np.array([complex(a, b) for a, b in values])
    refs = ReferenceSet(grid, short=z, load_true=z[::-1], notes=notes)
    path = tmp_path_factory.mktemp("refs") / "any.json"
    refs.save(path)
    same(refs, ReferenceSet.read(path))


def _saved(tmp_path):
    path = tmp_path / "r.json"
    sample().save(path)
    return path


def _rewrite(path, change):
    """Apply ``change`` to the decoded file and write it back with a correct digest."""
    d = json.loads(path.read_text(encoding="utf-8"))
    d.pop("sha256")
    change(d)
    canonical = json.dumps(d, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    d["sha256"] = hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    path.write_text(json.dumps(d), encoding="utf-8")


def test_truncated_file_is_refused(tmp_path):
    path = _saved(tmp_path)
    path.write_text(path.read_text(encoding="utf-8")[:-200], encoding="utf-8")
    with pytest.raises(CompensationError, match="damaged"):
        ReferenceSet.read(path)


def test_changed_digit_is_refused_by_the_checksum(tmp_path):
    path = _saved(tmp_path)
    text = path.read_text(encoding="utf-8")
    marker = '"frequency_hz": [100.0'
    assert marker in text
    path.write_text(text.replace(marker, '"frequency_hz": [101.0'), encoding="utf-8")
    with pytest.raises(CompensationError, match="checksum"):
        ReferenceSet.read(path)


def test_newer_version_is_refused_with_advice(tmp_path):
    path = _saved(tmp_path)
    _rewrite(path, lambda d: d.update(format_version=FORMAT_VERSION + 1))
    with pytest.raises(CompensationError, match="newer than this tool reads.*update"):
        ReferenceSet.read(path)


@pytest.mark.parametrize("version", [0, -3, "1", 1.0, None, True])
def test_unknown_or_malformed_version_is_refused(tmp_path, version):
    path = _saved(tmp_path)
    _rewrite(path, lambda d: d.update(format_version=version))
    with pytest.raises(CompensationError, match="version"):
        ReferenceSet.read(path)


@pytest.mark.parametrize(
    "change",
    [
        lambda d: d["impedance_ohm"]["short"]["real"].pop(),
        lambda d: d["impedance_ohm"]["short"]["real"].__setitem__(0, "1.5"),
        lambda d: d["impedance_ohm"]["short"]["real"].__setitem__(0, True),
        lambda d: d["impedance_ohm"].update(bogus={"real": [], "imag": []}),
        lambda d: d.pop("notes"),
        lambda d: d.update(extra=1),
        lambda d: d.update(captured_at="yesterday"),
        lambda d: d.update(captured_at="2024-05-02T11:30:15"),
        lambda d: d.update(temperature_c="warm"),
        lambda d: d.update(frequency_hz={"a": 1}),
        lambda d: d.update(repeats=0),
        lambda d: d.update(repeats=2.0),
        lambda d: d.update(grid_spacing="spiral"),
        lambda d: d["uncertainty_ohm"]["open"].pop(),
        lambda d: d["uncertainty_ohm"].update(load_true=[0.0] * GRID.size),
        lambda d: d.pop("uncertainty_ohm"),
    ],
)
def test_malformed_fields_are_refused(tmp_path, change):
    path = _saved(tmp_path)
    _rewrite(path, change)
    with pytest.raises(CompensationError, match="damaged"):
        ReferenceSet.read(path)


@pytest.mark.parametrize(
    "content",
    [b"", b"\xff\xfe\x00garbage", b"[1, 2, 3]", b'{"format": "something else"}', b"NaN"],
)
def test_files_that_are_not_reference_sets(tmp_path, content):
    path = tmp_path / "other.json"
    path.write_bytes(content)
    with pytest.raises(CompensationError):
        ReferenceSet.read(path)


def test_bare_nan_literal_is_refused(tmp_path):
    path = _saved(tmp_path)
    text = path.read_text(encoding="utf-8").replace('"temperature_c": 23.4', '"temperature_c": NaN')
    path.write_text(text, encoding="utf-8")
    with pytest.raises(CompensationError, match="damaged"):
        ReferenceSet.read(path)


def test_missing_file_and_unwritable_place(tmp_path):
    with pytest.raises(CompensationError, match="no reference-set file"):
        ReferenceSet.read(tmp_path / "absent.json")
    with pytest.raises(CompensationError, match="cannot write"):
        sample().save(tmp_path / "no such dir" / "r.json")


def test_from_dict_refuses_foreign_objects():
    with pytest.raises(CompensationError, match="not a reference set"):
        ReferenceSet.from_dict({"frequency": [1.0]})
    with pytest.raises(CompensationError, match="not a reference set"):
        ReferenceSet.from_dict([1, 2])  # type: ignore[arg-type]


def test_construction_rules():
    refs = sample()
    assert refs.load_true.shape == GRID.shape  # a scalar true value is broadcast
    with pytest.raises(ValueError):
        refs.short[0] = 0  # arrays are read-only
    assert refs.frequency is not GRID
    assert refs != sample()  # equality is identity (eq=False)
    with pytest.raises(CompensationError, match="one value per grid frequency"):
        ReferenceSet(GRID, short=np.ones(3))
    with pytest.raises(CompensationError, match="time zone"):
        ReferenceSet(GRID, captured_at=datetime(2024, 1, 1))
    with pytest.raises(CompensationError, match="non-empty"):
        ReferenceSet([])
    with pytest.raises(CompensationError, match="numbers"):
        ReferenceSet(GRID, open=["a"] * GRID.size)
    with pytest.raises(CompensationError, match="unknown standard"):
        refs.with_standard("through", np.ones(GRID.size))


def test_with_standard_builds_up_a_set():
    refs = ReferenceSet(GRID, fixture="clips")
    assert refs.method == "none" and refs.standards == ()
    refs = refs.with_standard("short", sample().short)
    refs = refs.with_standard("open", sample().open)
    assert refs.method == "open-short" and refs.standards == ("open", "short")
    assert refs.fixture == "clips" and refs.points == GRID.size
    assert refs.with_standard("short", None).method == "open"


def test_version_1_file_is_still_read(tmp_path):
    # A version 1 file, written by hand as that version laid it out (RFC 8259 JSON, digest by
    # FIPS 180-4 SHA-256 over the canonical form, computed here with hashlib): its standards
    # were read once and its grid spacing was not recorded.
    refs = sample(open_u=None, short_u=None, repeats=1, grid_spacing="")
    d = {
        "format": FORMAT,
        "format_version": 1,
        "about": "version 1",
        "captured_at": refs.captured_at.isoformat(),
        "fixture": refs.fixture,
        "meter": refs.meter,
        "temperature_c": refs.temperature,
        "notes": refs.notes,
        "frequency_hz": GRID.tolist(),
        "impedance_ohm": {
            name: {"real": z.real.tolist(), "imag": z.imag.tolist()}
            for name in ("open", "short", "load", "load_true")
            if (z := getattr(refs, name)) is not None
        },
    }
    canonical = json.dumps(d, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    d["sha256"] = hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    path = tmp_path / "v1.json"
    path.write_text(json.dumps(d), encoding="utf-8")
    back = ReferenceSet.read(path)
    same(refs, back)
    assert back.repeats == 1 and back.open_u is None and back.grid_spacing == ""
    # A version 1 file with version 2 fields is damaged, not silently half-read.
    _rewrite(path, lambda x: x.update(repeats=3))
    with pytest.raises(CompensationError, match="damaged"):
        ReferenceSet.read(path)


def test_uncertainties_round_trip_bit_for_bit_and_checksum_holds(tmp_path):
    rng = np.random.default_rng(5)
    u = rng.random(GRID.size) * 1e-3
    u[3] = math.nan  # a standard read as NaN has no uncertainty either
    refs = sample(load_u=u, repeats=4)
    path = tmp_path / "u.json"
    refs.save(path)
    d = json.loads(path.read_text(encoding="utf-8"))
    assert d["format_version"] == 2 and d["repeats"] == 4
    assert set(d["uncertainty_ohm"]) == {"open", "short", "load"}
    digest = d.pop("sha256")
    canonical = json.dumps(d, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert hashlib.sha256(canonical.encode("utf-8")).hexdigest() == digest
    back = ReferenceSet.read(path)
    same(refs, back)
    same(refs, ReferenceSet.from_dict(json.loads(json.dumps(refs.to_dict()))))


def test_uncertainty_fields_are_checked_at_construction():
    with pytest.raises(CompensationError, match="non-negative"):
        sample(open_u=-np.ones(GRID.size))
    with pytest.raises(CompensationError, match="non-negative"):
        sample(open_u=np.ones(3))
    with pytest.raises(CompensationError, match="load reading is not"):
        sample(load=None, load_u=np.ones(GRID.size))
    with pytest.raises(CompensationError, match="repeats"):
        sample(repeats=0)
    with pytest.raises(CompensationError, match="grid_spacing"):
        sample(grid_spacing="geometric")
    refs = sample().with_standard("open", sample().open, np.ones(GRID.size))
    assert np.array_equal(refs.open_u, np.ones(GRID.size))
    assert sample().with_standard("open", sample().open).open_u is None
