"""Production checks under DC bias: the plan's keys and refusals, the saturation current as a
judged value, and the station on the simulated ferrite choke, with the bias at zero whenever
the operator could touch the part.

Check values: the simulated choke's curve L(I) = L0 / (1 + (I/I_s)^p) with I_s = 5 A, p = 8 and
its drop current I_d = I_s (d/(1 − d))^(1/p) (drivers/simulator/saturation.py; computed from that
curve, our own); the rectangular distribution's standard uncertainty a/√3 (JCGM 100:2008, GUM,
4.3.7); stored energy ½·L·I² (from memory: the energy of a linear inductor's field); acceptance
against a minimum (ILAC-G8:09/2019, 4.2).
"""

from __future__ import annotations

import dataclasses
import math
import time
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from acquire.production.judgement import judge_unit
from acquire.production.measure import measure_unit
from acquire.production.outbox import Outbox, RecordKeeper
from acquire.production.plan import Limit
from acquire.production.plan_file import PlanError, example_plan_path, load_plan, parse_plan
from acquire.production.plan_text import describe_plan
from acquire.production.saturation_check import saturation_value
from acquire.production.station import Station, StationContext
from acquire.store import open_store
from drivers.meter import ImpedanceMeter
from drivers.simulator import running

I_S, P = 5.0, 8.0  # sim_profiles/ferrite-power-choke.toml


def factor(current: float) -> float:
    """L(I)/L0 of the simulated ferrite choke (drivers/simulator/saturation.py)."""
    return 1.0 / (1.0 + (current / I_S) ** P)


def drop_current(d: float) -> float:
    """I_d = I_s (d/(1 − d))^(1/p): 4.204 A at 20 % (computed; the profile's comment agrees)."""
    return I_S * (d / (1.0 - d)) ** (1.0 / P)


BASE = """
[plan]
name = "choke"
[decision]
rule = "simple"
{bias}
[[step]]
frequency = "100kHz"
[[step.check]]
quantity = "Ls"
nominal = "100uH"
tolerance = "10%"
{more}
"""


def plan_text(bias: str = '[bias]\nmax_bias = "6A"', more: str = "") -> str:
    return BASE.format(bias=bias, more=more)


BIASED = """
[[step]]
frequency = "100kHz"
bias = "{amps}"
[[step.check]]
quantity = "Ls"
minimum = "85uH"
"""

SATURATION = """
[[saturation]]
frequency = "100kHz"
drop = "{drop}"
points = {points}
{limit}
"""


# -- the plan --------------------------------------------------------------------------------


def test_the_choke_example_has_keys_with_their_bias_and_the_coil_example_keeps_its_own():
    choke = load_plan(example_plan_path("choke"))
    assert [c.key for c in choke.checks] == ["Ls@100000", "Ls@100000@3A", "Isat20%@100000"]
    assert choke.bias.maximum == 6.0 and choke.bias_levels[-1] == 6.0
    assert choke.needs_bias
    coil = load_plan(example_plan_path())
    assert not coil.needs_bias
    assert all("@" not in c.key or c.key.count("@") == 1 for c in coil.checks)
    assert "Ls@1000" in {c.key for c in coil.checks}


def test_the_description_shows_the_bias_the_saturation_check_and_the_safety_note():
    text = "\n".join(describe_plan(load_plan(example_plan_path("choke"))))
    assert "under 3 A bias" in text
    assert "Isat20% at 100.0 kHz: ≥ 3.500 A" in text
    assert "captured at zero bias" in text
    assert "½·L·I²" in text and "licensed practice" in text
    assert "known only once a unit is measured" in text


@pytest.mark.parametrize(
    ("bias", "more", "where", "says"),
    [
        ('[bias]\nmax_bias = "6A"', BIASED.format(amps="7A"), "step[2].bias",
         "above the plan's max_bias"),
        ("", BIASED.format(amps="3A"), "step[2].bias", "add max_bias"),
        ("", SATURATION.format(drop="20%", points=13, limit='minimum = "2.5A"'),
         "saturation[1]", "add max_bias"),
        ('[bias]\nmax_bias = "6A"', SATURATION.format(drop="120%", points=13,
         limit='minimum = "2.5A"'), "saturation[1].drop", "not between 0 % and 100 %"),
        ('[bias]\nmax_bias = "6A"', SATURATION.format(drop="0%", points=13,
         limit='minimum = "2.5A"'), "saturation[1].drop", "not between 0 % and 100 %"),
        ('[bias]\nmax_bias = "6A"', SATURATION.format(drop="twenty", points=13,
         limit='minimum = "2.5A"'), "saturation[1].drop", "percentage"),
        ('[bias]\nmax_bias = "6A"', SATURATION.format(drop="20%", points=13,
         limit='minimum = "7A"'), "saturation[1].minimum", "above the plan's max_bias"),
        ('[bias]\nmax_bias = "6A"', SATURATION.format(drop="20%", points=2,
         limit='minimum = "2A"'), "saturation[1].points", "cannot bracket"),
        ('[bias]\nmax_bias = "6A"', SATURATION.format(drop="20%", points=13, limit=""),
         "saturation[1]", "no limit"),
        ('[bias]\nmax_bias = "-1A"', "", "bias.max_bias", "negative"),
    ],
)  # fmt: skip
def test_malformed_bias_plans_are_refused_with_one_line(bias, more, where, says):
    with pytest.raises(PlanError) as caught:
        parse_plan(plan_text(bias, more), "p.toml")
    message = str(caught.value)
    assert message.startswith(f"p.toml: {where}: "), message
    assert says in message and "\n" not in message


def test_a_zero_bias_is_no_bias_and_checks_twice_the_same():
    with pytest.raises(PlanError, match="checked twice"):
        parse_plan(plan_text(more=BIASED.format(amps="0A").replace("minimum", "maximum")))


def test_sweep_levels_and_biased_checks_share_their_levels():
    plan = parse_plan(
        plan_text(
            more=BIASED.format(amps="3A")
            + SATURATION.format(drop="20%", points=13, limit='minimum = "3.5A"')
        )
    )
    assert plan.sweep(plan.checks[-1])[:3] == (0.0, 0.5, 1.0)
    assert len(plan.bias_levels) == 12  # 0.5 A to 6 A; the 3 A check is one of them
    assert list(plan.frequencies_at(3.0)) == [1e5]


# -- the saturation current as a judged value ------------------------------------------------


def test_a_worked_saturation_current_and_its_uncertainty():
    """L = 100, 90, 70 µH at 0, 1, 2 A, a 20 % drop: level 80 µH, crossing at
    1 + (90 − 80)/(90 − 70) = 1.5 A (computed). With exact readings only the bracket counts: the
    crossing lies in [1, 2] A, half-width a = 0.5 A, u = a/√3 (GUM 4.3.7), U = 2u = 0.5774 A."""
    i = np.array([0.0, 1.0, 2.0])
    ls = np.array([100e-6, 90e-6, 70e-6])
    value, big_u, found = saturation_value(i, ls, np.zeros(3), 0.2, Limit(1.0, None))
    assert value == pytest.approx(1.5)
    assert big_u == pytest.approx(2 * 0.5 / math.sqrt(3))
    # readings with U(L) = 1 µH each: slope |dI/dL| = 1 A / 20 µH; u_L = 0.5 µH, the level's
    # (1 − 0.2)·0.5 µH = 0.4 µH: u1 = 0.05 A/µH · √(0.5² + 0.4²) µH (computed)
    value, big_u2, _ = saturation_value(i, ls, np.full(3, 1e-6), 0.2, Limit(1.0, None))
    u1 = 1.0 / 20e-6 * math.hypot(0.5e-6, 0.4e-6)
    assert big_u2 == pytest.approx(2 * math.hypot(u1, 0.5 / math.sqrt(3)))


def test_the_true_current_of_the_simulated_curve_lies_within_u_for_every_step():
    for points in (7, 13, 25, 49):
        i = np.linspace(0.0, 6.0, points)
        ls = 100e-6 * factor(i)
        for d in (0.1, 0.2, 0.3):
            value, U, _ = saturation_value(i, ls, np.zeros(points), d, Limit(0.0, None))
            assert abs(value - drop_current(d)) <= U / 2 * math.sqrt(3), (points, d)


def test_a_drop_not_reached_meets_a_minimum_and_fails_a_maximum():
    """Powder-like soft curve on 0..6 A where a 30 % drop lies above 6 A (I_s 10 A, p 2: 6.547 A,
    computed): judged as 6 A (a lower bound) against a minimum, infinite against a maximum."""
    i = np.linspace(0.0, 6.0, 13)
    ls = 47e-6 / (1.0 + (i / 10.0) ** 2)
    u = np.full(13, 0.1e-6)
    plan = parse_plan(
        plan_text(
            more=SATURATION.format(drop="30%", points=13, limit='minimum = "5A"')
            + SATURATION.format(drop="10%", points=13, limit='maximum = "6A"')
        )
    )
    low, high = plan.checks[1], plan.checks[2]
    assert low.drop is not None and high.drop is not None
    v_low, u_low, found = saturation_value(i, ls, u, 0.3, low.limit)
    assert not found.reached and found.text() == "above 6 A"
    assert (v_low, u_low) == (6.0, 0.0)
    v_high, u_high, _ = saturation_value(i, ls, u, 0.3, high.limit)
    assert math.isinf(v_high)
    guarded = dataclasses.replace(plan, decision=dataclasses.replace(plan.decision, guarded=True))
    judged = judge_unit(
        dataclasses.replace(guarded, checks=(low, high)),
        {low.key: (v_low, u_low), high.key: (v_high, u_high)},
    )
    assert [j.verdict for j in judged.judged] == ["pass", "fail"]
    assert "not reached" in judged.judged[1].describe()


def test_a_minimum_above_what_a_unit_reached_fails_it():
    i = np.linspace(0.0, 6.0, 25)
    ls = 100e-6 * factor(i)
    value, U, _ = saturation_value(i, ls, np.zeros(25), 0.2, Limit(4.5, None))
    plan = parse_plan(
        plan_text(more=SATURATION.format(drop="20%", points=25, limit='minimum = "4.5A"'))
    )
    check = plan.checks[1]
    judged = judge_unit(dataclasses.replace(plan, checks=(check,)), {check.key: (value, U)}).judged[
        0
    ]
    assert value < 4.5 and judged.verdict == "fail"


# -- the station on the simulated choke ------------------------------------------------------


class Screen:
    """Feeds serials; at every prompt asks the simulator what bias flows through the part."""

    def __init__(self, meter: Any, lines: list[str]) -> None:
        self.meter, self.lines = meter, list(lines)
        self.at_prompt: list[tuple[float, str]] = []
        self.shown: list[Any] = []

    def show(self, status: Any) -> None:
        self.shown.append(status)

    def ring(self) -> None:
        pass

    def ask(self, prompt: str) -> str | None:
        session = self.meter.session
        self.at_prompt.append(
            (float(session.query("BIAS:MEAS?")), session.query("BIAS:STAT?").strip())
        )
        return self.lines.pop(0) if self.lines else None


class FaultAfter:
    """The meter, but the simulator is told to report an error on the ``n``-th sweep."""

    def __init__(self, meter: Any, sim: Any, n: int) -> None:
        self._meter, self._sim, self._n, self.sweeps = meter, sim, n, 0

    def sweep(self, *args: Any, **kwargs: Any) -> Any:
        self.sweeps += 1
        if self.sweeps == self._n:
            self.flowing = float(self._meter.session.query("BIAS:MEAS?"))
            self._sim.inject("error", -222)
        return self._meter.sweep(*args, **kwargs)

    def __getattr__(self, name: str) -> Any:
        return getattr(self._meter, name)


def closed_log(sim: Any, entries: int) -> list[float]:
    for _ in range(300):
        if len(sim.bias_log) >= entries:
            break
        time.sleep(0.01)
    return sim.bias_log


class Keeping:
    """The record keeper, keeping a copy of each record it was given (the store reads back no
    bias yet: its column comes with the store's own change)."""

    def __init__(self, keeper: Any) -> None:
        self.keeper, self.records = keeper, {}

    def save(self, record: Any) -> bool:
        self.records[record.serial] = record
        return self.keeper.save(record)

    @property
    def waiting(self) -> int:
        return self.keeper.waiting


def station_for(meter: Any, store: Any, folder: Path, screen: Any, **context: Any) -> Station:
    plan = context.pop("plan", None) or load_plan(example_plan_path("choke"))
    plan = dataclasses.replace(plan, bias=dataclasses.replace(plan.bias, dwell=0.0))
    ctx = StationContext(
        plan=plan, lot="L1", operator="ana", station="st-b",
        plan_id=store.record_plan(plan.text, plan.title), override="raw readings in a test",
        **context,
    )  # fmt: skip
    store.record_lot("L1")
    keeper = Keeping(RecordKeeper(store, Outbox(folder / "outbox.db")))
    return Station(
        meter, ctx, keeper, screen, (None, None), lambda: (None, None),
        history=lambda s: [u.outcome for u in store.unit_attempts(s)],
    )  # fmt: skip


def test_the_station_measures_under_bias_and_never_prompts_with_a_bias_on(tmp_path):
    with (
        running(dut="ferrite-power-choke", fixture="direct", noise=False, measure_time=0) as sim,
        open_store(f"sqlite:///{tmp_path / 's.db'}") as store,
    ):
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
            screen = Screen(meter, ["CHOKE-0001", "CHOKE-0002"])
            station = station_for(meter, store, tmp_path, screen)
            final = station.run(interactive=False)
            assert final.tested == 2
            assert screen.at_prompt == [(0.0, "0")] * 3
            assert float(meter.session.query("BIAS:MEAS?")) == 0.0
            for serial in ("CHOKE-0001", "CHOKE-0002"):
                unit = station.keeper.records[serial]
                assert store.unit_attempts(serial)[-1].outcome == unit.outcome
                by = {(m.parameter, m.bias_current): m for m in unit.measurements}
                l0, l3 = by[("Ls", None)], by[("Ls", 3.0)]
                # Ls at 3 A = L0/(1 + (3/5)^8), the unit's own L0, within the stated accuracy
                expected = l0.value * factor(3.0)
                assert abs(l3.value - expected) <= l3.uncertainty + factor(3.0) * l0.uncertainty
                assert l3.value < l0.value
                isat = by[("Isat20%", None)]
                assert abs(isat.value - drop_current(0.2)) <= isat.uncertainty
                assert isat.unit == "A" and isat.tolerance_low == 3.5
                assert isat.low == pytest.approx(3.5 + isat.uncertainty)  # ILAC-G8 4.2.2, w = U
                assert isat.verdict == "pass"
                assert unit.outcome == ("pass" if l0.verdict == l3.verdict == "pass" else "fail")
            first = station.keeper.records["CHOKE-0001"]
            l0 = next(m.value for m in first.measurements if m.parameter == "Ls" and
                      m.bias_current is None)  # fmt: skip
            energy = 0.5 * l0 * 6.0**2
            assert "measured" in final.energy
            assert f"{energy * 1e3:.3f} mJ" in final.energy
        assert closed_log(sim, 1)[-1] == 0.0


def test_a_meter_fault_under_bias_leaves_the_bias_at_zero_and_the_unit_in_error(tmp_path):
    with (
        running(dut="ferrite-power-choke", fixture="direct", noise=False, measure_time=0) as sim,
        open_store(f"sqlite:///{tmp_path / 's.db'}") as store,
    ):
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as real:
            meter = FaultAfter(real, sim, n=8)  # the 8th sweep: at the 7th bias level, 1.75 A
            screen = Screen(real, ["CHOKE-0003"])
            station = station_for(meter, store, tmp_path, screen)
            final = station.run(interactive=False)
            assert final.outcomes == {"error": 1}
            assert screen.at_prompt == [(0.0, "0")] * 2
            unit = store.unit_attempts("CHOKE-0003")[-1]
            assert meter.flowing == pytest.approx(1.75)
            assert "under a bias of 1.75 A" in unit.notes
        assert closed_log(sim, 1)[-1] == 0.0


def test_ctrl_c_under_bias_ramps_down_before_the_session_ends(tmp_path):
    with (
        running(dut="ferrite-power-choke", fixture="direct", noise=False, measure_time=0) as sim,
        open_store(f"sqlite:///{tmp_path / 's.db'}") as store,
    ):
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as real:

            def measure(meter: Any, *args: Any, **kwargs: Any) -> Any:
                class Stopping(FaultAfter):
                    def sweep(self, *a: Any, **k: Any) -> Any:
                        self.sweeps += 1
                        if self.sweeps == 5:
                            assert float(real.session.query("BIAS:MEAS?")) > 0
                            raise KeyboardInterrupt
                        return real.sweep(*a, **k)

                return measure_unit(Stopping(meter, sim, 0), *args, **kwargs)

            screen = Screen(real, ["CHOKE-0004"])
            station = station_for(real, store, tmp_path, screen)
            station._measure = measure
            final = station.run(interactive=False)
            assert "session ended" in final.message
            assert float(real.session.query("BIAS:MEAS?")) == 0.0
            assert real.session.query("BIAS:STAT?").strip() == "0"
        assert closed_log(sim, 1)[-1] == 0.0


# -- confirmation of the stored energy ---------------------------------------------------------


class Supply:
    limit = 8.0

    def __init__(self) -> None:
        self.ramps: list[float] = []

    def ramp_to(self, amps: float, step: float, dwell: float = 0.0) -> float:
        self.ramps.append(amps)
        return amps


class Asking:
    def __init__(self, answers: list[str]) -> None:
        self.answers, self.prompts = list(answers), []

    def show(self, status: Any) -> None:
        pass

    def ring(self) -> None:
        pass

    def ask(self, prompt: str) -> str | None:
        self.prompts.append(prompt)
        return self.answers.pop(0) if self.answers else None


def big_choke_station(tmp_path: Path, screen: Any, **context: Any) -> Station:
    """A 10 mH ± 10 % choke to 6 A: ½ · 11 mH · (6 A)² = 0.198 J planned, above 0.1 J."""
    text = plan_text(more=BIASED.format(amps="3A")).replace("100uH", "10mH")
    plan = parse_plan(text.replace('minimum = "85uH"', 'minimum = "8mH"'))
    ctx = StationContext(plan=plan, lot="L", operator="o", station="s", override="test",
                         supply=Supply(), **context)  # fmt: skip
    never = Station(
        object(), ctx, keeper=type("K", (), {"waiting": 0})(), screen=screen,
        references=(None, None), reload_references=lambda: (None, None), history=lambda s: [],
        measure=lambda *a, **k: pytest.fail("measured without confirmation"),
    )  # fmt: skip
    return never


def test_above_the_threshold_the_operator_must_confirm(tmp_path):
    screen = Asking(["no"])
    station = big_choke_station(tmp_path, screen)
    assert station.bias.energy == pytest.approx(0.5 * 11e-3 * 36)  # ½·L·I², computed
    final = station.run(interactive=True)
    assert "Type yes" in screen.prompts[0] and "198.0 mJ" in screen.prompts[0]
    assert "not confirmed" in final.message and final.tested == 0
    assert station.context.supply.ramps == [0.0, 0.0]  # before the question, and at the end


def test_piped_serials_need_unattended_and_unattended_asks_nothing(tmp_path):
    station = big_choke_station(tmp_path, Asking(["X-1"]))
    final = station.run(interactive=False)
    assert "--unattended" in final.message and final.tested == 0
    screen = Asking([])
    station = big_choke_station(tmp_path, screen, unattended=True)
    assert not station.bias.needs_confirmation()
    station.run(interactive=False)
    assert screen.prompts == ["serial"]
