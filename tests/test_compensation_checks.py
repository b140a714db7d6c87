"""Judging reference sets and DUTs measured with them.

Sources: the fixture is a lumped series R-L residual with a shunt G-C stray, or a lossless
line (standard circuit theory and two-port chain parameters, from memory). A passive one-port
has Re(Z) >= 0 and a reciprocal two-port AD - BC = 1 (network theory, e.g. Pozar, Microwave
Engineering, from memory). The 10x accuracy rule for DUTs (|Zdut| > 10|Zs|, |Zo| > 10|Zdut|) is
common practice, no published source. The 5 % likeness, 1 degree phase margin, 100x judging
ratio and 10 % / 50 % load limits are this project's own choices, documented in
acquire.compensation.checks; the tests below check that the rules do what that module says.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from acquire.compensation import Finding, ReferenceSet
from acquire.errors import CompensationError
from acquire.open_fixture import open_fixture

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


def noisy(z, rel, seed):
    rng = np.random.default_rng(seed)
    return z + rel * np.abs(z) * (rng.standard_normal(z.shape) + 1j * rng.standard_normal(z.shape))


def test_fixture_left_open_during_the_short():
    # The "short" then reads the open again (plus noise): one error, saying what was seen.
    found = good(short=noisy(OPEN, 1e-3, 1), load=None, load_true=None).check()
    assert [(x.standard, x.severity) for x in found] == [("short", "error")]
    text = only(found, "short").message
    assert "reads the same as the open at 51 of 51" in text
    assert "the short reads 303." in text and "MΩ" in text  # what both read: an empty fixture


def test_fixture_left_shorted_during_the_open():
    found = good(open=noisy(SHORT, 1e-3, 2), load=None, load_true=None).check()
    assert [(x.standard, x.severity) for x in found] == [("short", "error")]
    assert "mΩ" in only(found, "short").message  # both read as the short: milliohms


def test_open_and_short_swapped_is_a_warning_only():
    # An impedance inverter (a quarter-wave line) swaps what open and short read, so a passive
    # fixture can do this without any mistake: only the accuracy rule speaks.
    found = good(open=SHORT.copy(), short=OPEN.copy(), load=None, load_true=None).check()
    assert [(x.standard, x.severity) for x in found] == [("open", "warning")]
    assert "51 of 51" in found[0].message


def test_open_above_the_leads_resonance_reads_inductive_and_is_kept():
    # Long leads, 2 uH and 20 pF: above ~25 MHz the open reads inductive (X > 0) and small.
    # The old phase rule called that "a shorted fixture"; it is a passive fixture's own reading.
    grid = np.logspace(6, np.log10(6e7), 31)
    w = 2 * np.pi * grid
    short = 0.05 + 1j * w * 2e-6
    open_ = short + 1 / (1e-8 + 1j * w * 20e-12)
    assert np.any((open_.imag > 0) & (np.abs(open_) < 100))
    found = ReferenceSet(grid, open=open_, short=short).check()
    assert [x.severity for x in found] == ["warning"], found


def test_negative_resistance_is_not_passive():
    # Re(Z) >= 0 for any passive one-port; a conjugated or negated reading breaks it.
    found = good(short=-SHORT.conjugate(), load=None, load_true=None).check()
    text = only(found, "short").message
    assert "negative resistance at 48 of 51" in text and "no passive fixture" in text
    assert "20.00 mΩ at 179.9° at 100.0 Hz" in text  # computed: -0.02 + j*2*pi*100*30e-9
    # A phase error below 1 degree on a nearly pure reactance is tolerated ...
    tilted = OPEN * np.exp(-1j * np.radians(0.5))
    assert good(open=tilted, load=None, load_true=None).check() == []
    # ... one above it, at a few points, is a warning.
    tilted = OPEN.copy()
    tilted[-3:] *= np.exp(-1j * np.radians(2.0))
    finding = only(good(open=tilted, load=None, load_true=None).check(), "open", "warning")
    assert "at 3 of 51" in finding.message


def test_scatter_widens_the_passivity_margin():
    # R = -0.5 ohm on a 10 ohm short reading: beyond sin(1 deg)*10 = 0.17 ohm, so refused when
    # read once, but within 5 u when the repeats scattered by u = 0.2 ohm.
    grid = GRID[:3]
    short = np.full(3, -0.5 + 10j)
    assert only(ReferenceSet(grid, short=short).check(), "short")
    u = np.full(3, 0.2)
    assert ReferenceSet(grid, short=short, short_u=u, repeats=3).check() == []


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
    text = only(wrong, "load").message
    assert "not a load of the value given" in text and "1.000 kΩ at 0.0° against 100.0 Ω" in text
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


def test_nothing_in_for_the_load_is_refused_as_reading_the_open():
    found = good(load=noisy(OPEN, 1e-3, 3)).check()
    assert "reads the same as the open at 51 of 51" in only(found, "load").message


def test_load_is_judged_only_where_the_fixture_is_small():
    # A lossless 50 ohm, 1 m line (velocity factor 0.66) before the leads: two-port chain
    # parameters, from memory. The open-short model misses the line, badly near the top; the
    # three-standard correction does not. Computed: open-short corrected load = Zx/D**2.
    grid = np.logspace(3, np.log10(3e7), 61)
    w = 2 * np.pi * grid
    bl = w * 1.0 / (0.66 * 299_792_458.0)
    line = np.array([[np.cos(bl), 50j * np.sin(bl)], [1j * np.sin(bl) / 50, np.cos(bl)]])
    z_leads, y_leads = 0.02 + 1j * w * 0.3e-6, 1e-9 + 1j * w * 8e-12

    def reading(zx):
        zx = zx + 0 * w
        with np.errstate(divide="ignore", invalid="ignore"):
            zin = np.where(np.isinf(zx), 1 / y_leads, 1 / (y_leads + 1 / zx)) + z_leads
        a, b, c, d = line[0, 0], line[0, 1], line[1, 0], line[1, 1]
        return (a * zin + b) / (c * zin + d)

    refs = ReferenceSet(
        grid, open=reading(np.inf), short=reading(0.0), load=reading(100.0), load_true=100.0
    )
    found = refs.check()
    assert not [x for x in found if x.severity == "error"], found
    assert "cannot be judged" in only(found, "load", "warning").message
    # The same fixture with a 1 kohm part for the 100 ohm load: refused where it can judge.
    wrong = dataclasses.replace(refs, load=reading(1000.0)).check()
    assert "not a load of the value given" in only(wrong, "load").message


def test_dut_that_reads_as_the_open_is_named():
    dut = noisy(OPEN, 2e-3, 4)
    assert "look like an open fixture" in open_fixture(GRID, dut, good())
    # The open's own scatter decides: a DUT 8 % from the open is a part when the open was
    # steady, and reads as the open when the open itself scattered by 3 % per reading.
    dut = OPEN * 1.08
    assert open_fixture(GRID, dut, good()) == ""
    scattered = good(open_u=0.03 * np.abs(OPEN) / np.sqrt(2), repeats=3)
    assert open_fixture(GRID, dut, scattered) != ""
    # A coil is not the open.
    assert not [x for x in good().check(dut=0.5 + 1j * W * 10e-6) if x.standard == "dut"]


@pytest.mark.parametrize("spacing", ["log", ""])
def test_log_grid_with_missing_points_fails(spacing):
    grid = np.delete(np.logspace(2, 7, 51), [20, 21])
    finding = only(ReferenceSet(grid, short=SHORT[2:], grid_spacing=spacing).check(), "frequency")
    assert "2 point(s) missing" in finding.message and finding.frequency == grid[19]


def test_linear_grid_with_a_missing_point_fails_and_a_list_never_does():
    grid = np.delete(np.linspace(1e3, 1e5, 21), 7)
    short = np.full(grid.shape, 0.02 + 0j)
    assert "linear-spaced" in only(ReferenceSet(grid, short=short, grid_spacing="linear")
                                   .check(), "frequency").message  # fmt: skip
    assert ReferenceSet(grid, short=short, grid_spacing="list").check() == []
    # An irregular hand-made list whose spacing was not recorded is not judged either.
    hand = np.array([1e3, 2e3, 3e3, 1e4, 2e4, 1e5, 1.2e5, 5e5, 1e6, 2e6])
    assert ReferenceSet(hand, short=np.full(10, 0.02 + 0j)).check() == []
