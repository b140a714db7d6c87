"""`acquire verify` end to end on the simulated meter: a drifting check standard (our own invented
profile) is charted, the chart catches the drift, the station stops, an engineer acknowledges it
and the next unit records the acknowledgement. The run rules are the Western Electric ones
(1956); the baseline of 20 results is common practice, no published source."""

from __future__ import annotations

import socket
from typing import Any

import pytest
from bench_support import PutsEachStandardIn

from acquire.capture import capture_references
from acquire.cli import main
from acquire.plan import log_plan
from acquire.production.check_guard import CHECK_HINT, CheckGuard
from acquire.production.outbox import Outbox, RecordKeeper
from acquire.production.plan_file import example_plan_path, load_plan
from acquire.production.station import Station, StationContext
from acquire.store import open_store
from drivers.meter import ImpedanceMeter
from drivers.simulator.drift import drifted
from drivers.simulator.profiles import load_dut

#: Our invented standard: the demo coil's size, drifting up by 0.01 % of L a simulated day.
PROFILE = 'kind = "coil"\ninductance = 344e-6\ndc_resistance = 4.95\ndrift_per_day = 1e-4\n'


class Screen:
    def __init__(self) -> None:
        self.shown: list[Any] = []

    def show(self, status: Any) -> None:
        self.shown.append(status)

    def ring(self) -> None:
        pass

    def ask(self, prompt: str) -> str | None:
        return None


@pytest.fixture(scope="module")
def bench(module_simulator, tmp_path_factory) -> dict[str, Any]:
    folder = tmp_path_factory.mktemp("check")
    profile = folder / "check-coil.toml"
    profile.write_text(PROFILE, encoding="utf-8")
    plan_file = folder / "plan.toml"
    extra = '\n[check_standard]\nname = "CS-1"\nmax_age = "12h"\n'
    plan_file.write_text(example_plan_path().read_text(encoding="utf-8") + extra, "utf-8")
    sim = module_simulator(dut=profile, fixture="bench-leads", noise=True, seed=3)
    url = f"sqlite:///{folder / 'store.db'}"
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "1MHz", 41), PutsEachStandardIn(sim),
            load_true=sim.load_true, fixture="bench-leads", meter_name=str(identity), repeats=2,
        )  # fmt: skip
    sim.insert(profile)
    with open_store(url) as store:
        ref_id = store.save_reference_set(refs, name="check test")
    return {"sim": sim, "url": url, "plan": str(plan_file), "folder": folder, "refs": refs,
            "ref_id": ref_id, "identity": identity}  # fmt: skip


def _scpi(sim: Any, text: str) -> str:
    host, port = sim.resource.split("::")[1:3]
    with socket.create_connection((host, int(port)), timeout=5) as s:
        s.sendall(text.encode() + b"\n")
        if "?" not in text:
            return ""
        return s.makefile().readline().strip()


def _verify(bench, *more: str) -> int:
    sim, where = bench["sim"].resource, bench["url"]
    return main(["verify", "--standard", "CS-1", "--plan", bench["plan"], "--resource", sim,
                 "--store", where, "--station", "st-1", *more])  # fmt: skip


def test_drift_is_caught_the_station_stops_and_the_acknowledgement_is_recorded(bench, capsys):
    sim = bench["sim"]
    _scpi(sim, "SIM:DRIFT:DAYS 0")
    for n in range(1, 21):
        assert _verify(bench) == 0, n
        out = capsys.readouterr().out
        if n == 7:
            assert "limits being established: 7 of 20 results" in out
    assert "limits from the first 20 results" in out
    caught = None
    for day in range(1, 31):
        _scpi(sim, f"SIM:DRIFT:DAYS {day}")
        if _verify(bench) == 1:
            with open_store(bench["url"]) as store:
                broken = store.check_summary("CS-1").broken
            if any(quantity.startswith("Ls@") for quantity, _ in broken):
                caught = day  # the drift of L itself, not a chance alarm on another quantity
                break
    out = capsys.readouterr().out
    assert caught is not None, "a drift of 0.01 % a day went uncaught for 30 days"
    assert "STOPPED" in out and "broke a run rule" in out
    picture = bench["folder"] / "chart.png"
    assert main(["verify", "chart", "--standard", "CS-1", "--store", bench["url"],
                 "--picture", str(picture), "--quantity", "Ls@10000"]) == 0  # fmt: skip
    assert picture.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    capsys.readouterr()

    plan = load_plan(bench["plan"])
    with open_store(bench["url"]) as store, Outbox(bench["folder"] / "outbox.db") as outbox:
        guard = CheckGuard(lambda: store.check_summary("CS-1"), plan.check_standard.max_age)
        ctx = StationContext(plan=plan, lot="LOT-C", operator="ana", station="st-1",
                             meter_name=str(bench["identity"]), temperature=20.0,
                             override="references checked by hand")  # fmt: skip
        store.record_lot("LOT-C")
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
            station = Station(
                meter, ctx, RecordKeeper(store, outbox), Screen(),
                (bench["ref_id"], bench["refs"]), lambda: (bench["ref_id"], bench["refs"]),
                history=lambda s: [u.outcome for u in store.unit_attempts(s)], check=guard,
            )  # fmt: skip
            assert "broke a run rule" in station.blocked and CHECK_HINT in station.blocked
            assert station.test("EXAMPLE-0001") is None  # the override does not lift it
            assert store.unit_attempts("EXAMPLE-0001") == []
            assert main(["verify", "acknowledge", "--standard", "CS-1", "--reason",
                         "drift seen, standard sent for calibration", "--by", "eve",
                         "--store", bench["url"]]) == 0  # fmt: skip
            ack = store.check_summary("CS-1").acknowledgement
            assert ack is not None and ack.made_by == "eve"
            station.reload_references()  # the operator presses Enter
            assert station.blocked == ""
            shown = station.test("EXAMPLE-0002")
            assert shown is not None and shown.recorded
    with open_store(bench["url"]) as store:
        unit = store.unit_attempts("EXAMPLE-0002")[-1]
        assert unit.check_acknowledgement_id == ack.id
    assert "acknowledgement" in capsys.readouterr().out


def test_drift_days_command_and_the_drifted_inductance(bench, tmp_path):
    """L(d) = L0 (1 + rate d): 344 µH · (1 + 1e-4 · 10) = 344.344 µH (computed)."""
    sim = bench["sim"]
    _scpi(sim, "SIM:DRIFT:DAYS 2.5")
    assert float(_scpi(sim, "SIM:DRIFT:DAYS?")) == 2.5
    assert _scpi(sim, "SIM:DRIFT:DAYS 5000;:SYST:ERR?").startswith("-222")
    _scpi(sim, "SIM:DRIFT:DAYS 0")
    profile = tmp_path / "c.toml"
    profile.write_text(PROFILE, encoding="utf-8")
    dut = load_dut(profile)
    assert drifted(dut, 10.0).inductance == pytest.approx(344.344e-6, rel=1e-12)
    assert drifted(dut, 0.0) is dut
    assert drifted(load_dut("demo-coil"), 10.0) is not None  # no key: no drift
    assert drifted(load_dut("demo-coil"), 10.0).inductance == load_dut("demo-coil").inductance


def test_hostile_standard_names_are_printed_as_text(bench, capsys):
    name = "[bold red]CS[/bold red] :x: 'two'"
    assert main(["verify", "acknowledge", "--standard", name, "--reason", "first day",
                 "--by", "[i]eve[/i]", "--store", bench["url"]]) == 0  # fmt: skip
    out = capsys.readouterr().out
    assert repr(name) in out and "'[i]eve[/i]'" in out
    assert main(["verify", "list", "--store", bench["url"]]) == 0
    assert repr(name) in capsys.readouterr().out
    assert main(["verify", "acknowledge", "--standard", "CS\x1b[31m", "--reason", "x",
                 "--store", bench["url"]]) == 2  # fmt: skip
    assert "printable name" in capsys.readouterr().err
