"""How the tool stands up to faults, bad input, kills and outages: one table of counts and goals.

    python benchmarks/reliability.py            # about 3 minutes on 2 cores
    python benchmarks/reliability.py --quick    # about 1 minute

A reduced run of the reliability checks, with the goal beside each figure:

- the simulated meter's faults (drop, stall, garble, truncate, count, error, overrange) armed at
  seeded moments of an identification, a list sweep (``run_sweep``) and a station unit
  (``Station.test``); each result is compared with the same operation run without the fault
  (the simulator's noise is off, so a clean run repeats exactly). A result equal to the clean
  one is correct; an error the project raises (or an interrupted sweep, a unit recorded as an
  error, an overrange shown as infinite) is an error reported; a different value taken as good
  is a wrong value accepted; an operation still running after ``HANG_S`` seconds is a hang;
- bad inputs: seeded random text through the unit parsers, ``parse_time``, the SCPI and reading
  parsers and ``parse_plan`` (mutated example plans); each must end in a value or the project's
  own error;
- ``acquire station`` killed with SIGKILL at seeded moments of a lot (SQLite; PostgreSQL; and
  PostgreSQL with its connection cut), then checked (integrity, whole units, no doubles, the
  outbox holds exactly the units the store lacks, every unit the station showed is kept) and
  restarted on the same lot and outbox; the last run ends normally and must count every unit;
- a store outage (the TCP relay of tests/test_production_outbox.py cutting PostgreSQL) during
  a sweep and during a lot.

PostgreSQL parts run when the server of tests/store_support.py answers, else are listed as
skipped. Nothing here is asserted: the numbers are printed for a person to read.
"""

from __future__ import annotations

import argparse
import contextlib
import dataclasses
import functools
import io
import os
import random
import re
import signal
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time
from collections import Counter
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from rich.console import Console

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from bench_support import PutsEachStandardIn  # noqa: E402 - the tests' stand-in operator

from acquire.capture import capture_references  # noqa: E402
from acquire.errors import AcquireError  # noqa: E402
from acquire.plan import log_plan  # noqa: E402
from acquire.production.measure import apply_settings  # noqa: E402
from acquire.production.outbox import Outbox, RecordKeeper  # noqa: E402
from acquire.production.plan_file import example_plan_path, parse_plan  # noqa: E402
from acquire.production.screen import StationScreen  # noqa: E402
from acquire.production.station import Station, StationContext  # noqa: E402
from acquire.store import open_store  # noqa: E402
from acquire.sweep import run_sweep  # noqa: E402
from acquire.sweep_state import SweepState  # noqa: E402
from drivers.dialect_file import load_dialect  # noqa: E402
from drivers.errors import InstrumentError  # noqa: E402
from drivers.meter import ImpedanceMeter  # noqa: E402
from drivers.simulator import running  # noqa: E402

#: Seconds after which an operation under a fault counts as a hang.
HANG_S = 30.0
#: Relative difference from the clean run beyond which a value is a different value.
RTOL = 1e-9
ENV = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONUNBUFFERED="1")
KINDS = ("drop", "stall", "garble", "truncate", "count", "error", "overrange")
ERROR_CODES = (-222, -350, -113, -410, 1)
OVERRANGE_HZ = 10e3  # a frequency of the example plan and of the sweep below


@dataclass
class Tally:
    injected: int = 0
    correct: int = 0
    reported: int = 0
    hangs: int = 0
    wrong: int = 0
    lost: int = 0
    bad_inputs: int = 0
    unexpected: int = 0
    kills: int = 0
    kills_survived: int = 0
    outage_s: float = 0.0
    outage_survived_s: float = 0.0
    notes: list[str] = field(default_factory=list)
    by_kind: Counter = field(default_factory=Counter)
    skipped: list[str] = field(default_factory=list)

    def note(self, text: str) -> None:
        if len(self.notes) < 40:
            self.notes.append(text)


def example_plan_text() -> str:
    """The shipped example plan, with serials that may be tested again (a retest of the same
    unit in the fixture gives the clean run a faulted unit is compared with)."""
    text = example_plan_path().read_text()
    return text.replace('seen_before = "refuse"', 'seen_before = "retest"')


def capture(sim: Any, fixture: str) -> Any:
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "1MHz", 41), PutsEachStandardIn(sim), load_true=sim.load_true,
            fixture=fixture, meter_name=str(identity), repeats=1,
        )  # fmt: skip
    sim.insert("demo-coil")
    return refs


def watched(action: Callable[[], Any], thread: bool = True) -> tuple[str, Any]:
    """Run ``action`` on a thread: ("value", v), ("error", exc) for the project's own errors,
    ("unexpected", exc) for any other exception, or ("hang", None) after HANG_S seconds.

    With ``thread`` False it runs here (the station's store stays on the thread that opened
    it) and a run longer than HANG_S counts as a hang once it ends."""
    box: list[tuple[str, Any]] = []
    if not thread:
        began = time.monotonic()
        outcome = _direct(action)
        return ("hang", None) if time.monotonic() - began > HANG_S else outcome

    def run() -> None:
        try:
            box.append(("value", action()))
        except (AcquireError, InstrumentError) as exc:
            box.append(("error", exc))
        except Exception as exc:  # noqa: BLE001 - counted, not hidden
            box.append(("unexpected", exc))

    worker = threading.Thread(target=run, daemon=True)
    worker.start()
    worker.join(HANG_S)
    return box[0] if box else ("hang", None)


def _direct(action: Callable[[], Any]) -> tuple[str, Any]:
    try:
        return ("value", action())
    except (AcquireError, InstrumentError) as exc:
        return ("error", exc)
    except Exception as exc:  # noqa: BLE001 - counted, not hidden
        return ("unexpected", exc)


# -- the fault matrix ----------------------------------------------------------------------------


def _specs(kind: str, positions: tuple[int, ...]) -> list[tuple[tuple, dict]]:
    if kind == "error":
        return [((code,), {}) for code in ERROR_CODES[: len(positions)]]
    if kind == "overrange":
        return [((), {"frequency": OVERRANGE_HZ})]
    return [((n,), {}) for n in positions]


def _fired(sim: Any, spec: Any, kind: str, target: str) -> bool:
    if kind == "overrange":
        return target != "identify"
    return spec not in sim.faults


def _same(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Elementwise: equal within RTOL (infinities and NaNs equal to themselves)."""
    a, b = np.asarray(a), np.asarray(b)
    both_nan = np.isnan(a) & np.isnan(b)
    with np.errstate(invalid="ignore"):
        close = np.isclose(a, b, rtol=RTOL, atol=0.0) | (a == b)
    return close | both_nan


def fault_matrix(t: Tally, positions: tuple[int, ...]) -> None:
    plan_text = example_plan_text()
    plan = parse_plan(plan_text, "example plan")
    sweep_plan = log_plan("1kHz", "1MHz", 31)
    with (
        tempfile.TemporaryDirectory() as folder,
        running(dut="demo-coil", fixture="bench-leads", seed=5, measure_time=0, noise=False) as sim,
    ):
        refs = capture(sim, plan.fixture)
        # The simulator answers at once: the dialect's allowance per point is cut so a stalled
        # reply costs about a second, not the minute a real meter's 31 points may take.
        dialect = dataclasses.replace(load_dialect("simulated"), per_point_timeout=0.02)
        open_meter = lambda: ImpedanceMeter.open(  # noqa: E731
            sim.resource, dialect=dialect, timeout=0.5, retries=2, retry_wait=0.05
        )
        with open_meter() as meter:
            clean_id = str(meter.identify())
            clean_sweep = run_sweep(meter, sweep_plan, uncertainty=None, block=None)
        with open_store(f"sqlite:///{Path(folder) / 'matrix.db'}") as store:
            ref_id = store.save_reference_set(refs, name="matrix refs")
            plan_id = store.record_plan(plan.text, plan.title)
            serial = iter(range(1000, 10000))
            for kind in KINDS:
                for args, kw in _specs(kind, positions):
                    for target in ("identify", "sweep", "unit"):
                        if kind == "overrange" and target == "identify":
                            continue
                        sim.clear_faults()
                        sim.insert("demo-coil")
                        meter = open_meter()
                        got: tuple[str, Any] = ("value", None)
                        try:
                            if target == "unit":
                                station = _station(meter, plan, plan_id, ref_id, refs, store,
                                                   Path(folder))  # fmt: skip
                                s = f"EXAMPLE-{next(serial)}"
                                clean = station.test(s)
                                spec = sim.inject(kind, *args, **kw)
                                got = watched(lambda: station.test(s), thread=False)  # noqa: B023
                                fired = _fired(sim, spec, kind, target)
                                verdict = _judge_unit(store, s, clean, got)
                            else:
                                spec = sim.inject(kind, *args, **kw)
                                if target == "identify":
                                    got = watched(meter.identify)
                                    verdict = _judge_identify(clean_id, got)
                                else:
                                    got = watched(
                                        functools.partial(
                                            run_sweep,
                                            meter,
                                            sweep_plan,
                                            uncertainty=None,
                                            block=None,
                                        )
                                    )
                                    verdict = _judge_sweep(clean_sweep, got)
                                fired = _fired(sim, spec, kind, target)
                        finally:
                            if got[0] != "hang":
                                meter.close()
                        if not fired:
                            continue  # the operation ended before the fault's moment came
                        t.injected += 1
                        t.by_kind[(kind, verdict[0])] += 1
                        _count(t, verdict, f"{kind} {args or kw} on {target}")
            sim.clear_faults()


def _station(meter, plan, plan_id, ref_id, refs, store, folder: Path) -> Station:
    apply_settings(meter, plan)
    context = StationContext(
        plan=plan, lot="FAULTS", operator="bench", station="bench", meter_name=str(
            meter.identify()), plan_id=plan_id, temperature=20.0,
    )  # fmt: skip
    screen = StationScreen(Console(file=io.StringIO(), width=100), interactive=False, bell=False)
    keeper = RecordKeeper(store, Outbox(folder / "matrix-outbox.db"))
    return Station(
        meter, context, keeper, screen, (ref_id, refs), lambda: (ref_id, refs),
        lambda s: [u.outcome for u in store.unit_attempts(s)],
    )  # fmt: skip


def _count(t: Tally, verdict: tuple[str, str], what: str) -> None:
    name, detail = verdict
    if name == "correct":
        t.correct += 1
    elif name == "reported":
        t.reported += 1
    elif name == "hang":
        t.hangs += 1
        t.note(f"hang: {what}")
    elif name == "lost":
        t.lost += 1
        t.note(f"record lost: {what}: {detail}")
    elif name == "wrong":
        t.wrong += 1
        t.note(f"wrong value accepted: {what}: {detail}")
    else:
        t.unexpected += 1
        t.note(f"unexpected exception: {what}: {detail}")


def _judge_identify(clean: str, got: tuple[str, Any]) -> tuple[str, str]:
    kind, value = got
    if kind == "value":
        return ("correct", "") if str(value) == clean else ("wrong", f"{value!s} != {clean}")
    if kind == "error":
        return "reported", str(value)
    return kind, repr(value)


def _judge_sweep(clean: Any, got: tuple[str, Any]) -> tuple[str, str]:
    kind, out = got
    if kind != "value":
        return (kind, repr(out)) if kind != "error" else ("reported", str(out))
    n = out.frequency.size
    same = _same(out.raw, clean.raw[:n])
    overrange = np.isinf(out.raw.real) & (
        np.abs(out.frequency - OVERRANGE_HZ) <= 1e-3 * OVERRANGE_HZ
    )
    bad = ~(same | overrange)
    if bad.any():
        i = int(np.argmax(bad))
        return "wrong", (
            f"point {i} at {out.frequency[i]:.6g} Hz read {out.raw[i]:.6g}, clean "
            f"{clean.raw[i]:.6g} ({out.status}, {out.reason})"
        )
    if out.status == "complete" and n == clean.frequency.size and not overrange.any():
        return "correct", ""
    return "reported", out.reason or "overrange shown as infinite"


def _judge_unit(store: Any, serial: str, clean: Any, got: tuple[str, Any]) -> tuple[str, str]:
    kind, shown = got
    if kind != "value":
        return (kind, repr(shown)) if kind != "error" else ("reported", str(shown))
    attempts = {u.attempt: u for u in store.unit_attempts(serial)}
    if clean is None or shown is None or shown.attempt not in attempts:
        return "lost", f"attempt {getattr(shown, 'attempt', '?')} of {serial} not in the store"
    ref, unit = attempts[clean.attempt], attempts[shown.attempt]
    if unit.outcome == "error":
        return (
            ("reported", unit.notes)
            if not unit.measurements
            else ("wrong", "error unit with values")
        )
    a = np.array([m.value for m in unit.measurements])
    b = np.array([m.value for m in ref.measurements])
    if a.shape != b.shape:
        return "wrong", f"{a.size} values stored, the plan has {b.size}"
    differ = ~_same(a, b)
    if not differ.any():
        return "correct", ""
    if np.all(~np.isfinite(a[differ])) and unit.outcome != "pass":
        return "reported", "overrange values judged failing"
    i = int(np.argmax(differ))
    m = unit.measurements[i]
    return "wrong", (
        f"{m.parameter} at {m.frequency} Hz stored {a[i]:.7g}, clean {b[i]:.7g}, outcome "
        f"{unit.outcome}"
    )


# -- bad inputs ----------------------------------------------------------------------------------

_PIECES = ["1", "0", "-", "+", ".", "e", "E", "9", "k", "M", "u", "µ", "m", "H", "Hz", "ohm", "Ω",
           "%", "C", "K", "F", "mm", "nan", "inf", " ", ",", ";", "1e308", "1e-400", "\x00", "é",
           "′", "#", "\"", "9.9E37", "9.91E37", "T", ":", "2026-03-02", "+01:00", "  ", "\t",
           "\n", "×10^3", "0x1F", "1_000"]  # fmt: skip


def _random_text(rng: random.Random) -> str:
    if rng.random() < 0.2:
        return "".join(chr(rng.randrange(0, 0x3000)) for _ in range(rng.randrange(0, 20)))
    return "".join(rng.choice(_PIECES) for _ in range(rng.randrange(0, 8)))


def _mutated_plan(rng: random.Random, lines: list[str]) -> str:
    values = ['""', "0", "-1", "1e400", "nan", "true", "[]", "{}", '"1kHz"', '"-3%"', '"abc"',
              "[1, 2]", '"0ohm"', '"1e99H"', "{ a = 1 }", '"\\u0000"', "3.5", '"8h"']  # fmt: skip
    out = list(lines)
    for _ in range(rng.randrange(1, 4)):
        i = rng.randrange(len(out))
        line = out[i]
        choice = rng.random()
        if "=" in line and choice < 0.6:
            key = line.split("=", 1)[0]
            out[i] = f"{key}= {rng.choice(values)}"
        elif choice < 0.8:
            del out[i]
        else:
            out.insert(i, _random_text(rng))
    return "\n".join(out)


def _block(raw: bytes) -> Any:
    from drivers import scpi

    _, offset, length = scpi.find_block(raw)
    return scpi.block_values(raw, offset, length)


def bad_inputs(t: Tally, samples: int) -> None:
    from acquire import units
    from acquire.commands.options import parse_time
    from drivers import readings, scpi

    rng = random.Random(11)
    plan_lines = example_plan_path().read_text().splitlines()
    targets: list[tuple[str, Callable[[str], Any]]] = [
        ("parse_quantity", units.parse_quantity),
        ("parse_quantity H", lambda s: units.parse_quantity(s, "H")),
        ("parse_length", units.parse_length),
        ("parse_temperature", units.parse_temperature),
        ("parse_fraction", units.parse_fraction),
        ("parse_list", lambda s: units.parse_list(s, "Hz")),
        ("parse_time", lambda s: parse_time(s, "--since")),
        ("parse_identity", scpi.parse_identity),
        ("parse_error", scpi.parse_error),
        ("parse_number", scpi.parse_number),
        ("parse_numbers", lambda s: scpi.parse_numbers(s, 4)),
        ("block", lambda s: _block(s.encode("utf-8", "replace"))),
        (
            "from_flat",
            lambda s: readings.from_flat(("Ls", "Rs"), [1e3, 1e4], scpi.parse_numbers(s, 4)),
        ),
        ("parse_plan", lambda s: parse_plan(_mutated_plan(rng, plan_lines), "mutated plan")),
    ]
    seen: set[tuple[str, type]] = set()
    for i in range(samples):
        name, fn = targets[i % len(targets)]
        text = _random_text(rng)
        if name == "block" and rng.random() < 0.5:
            text = f"#{rng.randrange(0, 10)}{rng.randrange(0, 10**4)}" + text
        t.bad_inputs += 1
        try:
            fn(text)
        except (AcquireError, InstrumentError):
            pass
        except Exception as exc:  # noqa: BLE001 - counted, not hidden
            t.unexpected += 1
            if (name, type(exc)) not in seen:
                seen.add((name, type(exc)))
                t.note(f"unexpected {type(exc).__name__} from {name}({text!r}): {exc}")


# -- kills and outages of a station --------------------------------------------------------------


@dataclass
class Lot:
    """One lot run by ``acquire station`` subprocesses on one store and one outbox."""

    sim: Any
    store: str
    folder: Path
    schema: str | None = None
    direct: str | None = None  # the PostgreSQL URL without the relay, for checks
    next_serial: int = 0
    runs: int = 0
    shown: set[str] = field(default_factory=set)

    @property
    def outbox(self) -> Path:
        return self.folder / "outbox.db"

    def start(self, serials: int) -> subprocess.Popen:
        url = self.store if self.schema is None else f"{self.store}?schema={self.schema}"
        proc = subprocess.Popen(
            [sys.executable, "-m", "acquire", "station", "--resource", self.sim.resource,
             "--store", url, "--plan", str(self.folder / "plan.toml"), "--lot", "L-K",
             "--operator", "ana", "--station", "bench-k", "--no-bell",
             "--outbox", str(self.outbox)],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
            env=ENV, cwd=self.folder,
        )  # fmt: skip
        assert proc.stdin is not None
        lines = "".join(f"EXAMPLE-{self.next_serial + i:04d}\n" for i in range(serials))
        self.next_serial += serials
        proc.stdin.write(lines)
        proc.stdin.flush()
        self.runs += 1
        return proc

    def take_output(self, out: str) -> None:
        self.shown |= set(re.findall(r"(EXAMPLE-\d{4})\s+attempt \d+\s+(?!not)", out))

    def stored(self) -> list[tuple[str, str, str, int]]:
        """(attempt_id, serial, outcome, measurements) of every stored unit."""
        q = (
            "SELECT u.attempt_id, u.serial, u.outcome, COUNT(m.unit_id) FROM units u "
            "LEFT JOIN measurements m ON m.unit_id = u.id GROUP BY u.id, u.attempt_id, "
            "u.serial, u.outcome"
        )
        if self.schema is None:
            path = self.store.removeprefix("sqlite:///")
            with contextlib.closing(sqlite3.connect(path, timeout=10)) as conn:
                return list(conn.execute(q))
        import psycopg

        with psycopg.connect(self.direct or self.store) as conn:
            conn.execute(f'SET search_path TO "{self.schema}"')
            return list(conn.execute(q))

    def integrity(self) -> list[str]:
        problems = []
        paths = [self.outbox]
        if self.schema is None:
            paths.append(Path(self.store.removeprefix("sqlite:///")))
        for path in paths:
            if path.exists():
                with contextlib.closing(sqlite3.connect(path, timeout=10)) as conn:
                    result = conn.execute("PRAGMA integrity_check").fetchall()
                if result != [("ok",)]:
                    problems.append(f"{path.name}: integrity_check {result}")
        return problems

    def waiting(self) -> list[str]:
        if not self.outbox.exists():
            return []
        with contextlib.closing(sqlite3.connect(self.outbox, timeout=10)) as conn:
            try:
                return [a for (a,) in conn.execute("SELECT attempt_id FROM waiting")]
            except sqlite3.OperationalError:
                return []


def check_lot(lot: Lot, checks: int) -> list[str]:
    """What is wrong with the lot's store and outbox now ([] when nothing is)."""
    problems = lot.integrity()
    rows = lot.stored()
    ids = Counter(a for a, *_ in rows)
    problems += [f"attempt {a} stored {n} times" for a, n in ids.items() if n > 1]
    for a, serial, outcome, n in rows:
        want = 0 if outcome == "error" else checks
        if n != want:
            problems.append(f"{serial} ({a}) stored with {n} measurements, not {want}")
    waiting = lot.waiting()
    both = set(waiting) & set(ids)
    if both:
        problems.append(f"{len(both)} unit(s) both in the store and in the outbox")
    kept = {s for _, s, *_ in rows} | set()
    if waiting:
        with contextlib.closing(sqlite3.connect(lot.outbox, timeout=10)) as conn:
            kept |= {
                re.search(r'"serial": "([^"]*)"', r).group(1)  # type: ignore[union-attr]
                for (r,) in conn.execute("SELECT record FROM waiting")
            }
    missing = lot.shown - kept
    if missing:
        problems.append(f"lost: {sorted(missing)} shown by the station, in neither store nor "
                        "outbox")  # fmt: skip
    return problems


def run_kills(t: Tally, lot: Lot, kills: int, rng: random.Random, checks: int,
              relay: Any = None, label: str = "") -> None:  # fmt: skip
    for k in range(kills):
        proc = lot.start(40)
        cut = relay is not None and k % 2 == 0
        try:
            time.sleep(rng.uniform(1.5, 4.0))
            if cut:
                relay.cut()
                time.sleep(rng.uniform(0.3, 1.5))
            proc.send_signal(signal.SIGKILL)
            out, _ = proc.communicate(timeout=60)
        finally:
            proc.kill()
            if cut:
                relay.mend()
        lot.take_output(out)
        t.kills += 1
        problems = check_lot(lot, checks)
        if problems:
            t.note(f"kill {k + 1} {label}: " + "; ".join(problems))
            t.lost += sum("lost:" in p for p in problems)
        else:
            t.kills_survived += 1
    finish_lot(t, lot, checks, label)


def finish_lot(t: Tally, lot: Lot, checks: int, label: str) -> None:
    """Run the lot on to its end: the waiting units stored once, every unit counted."""
    proc = lot.start(3)
    try:
        out, err = proc.communicate(timeout=120)
    finally:
        proc.kill()
    lot.take_output(out)
    problems = check_lot(lot, checks)
    rows = lot.stored()
    tested = re.search(r"tested\s+(\d+)", out)
    serials = {s for _, s, *_ in rows}
    if tested is None or int(tested.group(1)) != len(serials):
        problems.append(f"final run counted {tested and tested.group(1)} units, the store has "
                        f"{len(serials)} serials: {err.strip()[-300:]}")  # fmt: skip
    if lot.waiting():
        problems.append(f"{len(lot.waiting())} unit(s) still in the outbox after a normal end")
    if problems:
        t.note(f"lot {label} at its end: " + "; ".join(problems))
        t.lost += sum("lost:" in p for p in problems)


@contextlib.contextmanager
def lot_on(kind: str, sim: Any, refs: Any, folder: Path, url: str | None,
           relay: Any = None) -> Iterator[Lot]:  # fmt: skip
    from store_support import temporary_schema

    folder.mkdir()
    (folder / "plan.toml").write_text(example_plan_text())
    if kind == "sqlite":
        store = f"sqlite:///{folder / 'store.db'}"
        with open_store(store) as s:
            s.save_reference_set(refs, name="line refs")
        yield Lot(sim, store, folder)
        return
    assert url is not None
    with temporary_schema(url) as schema:
        with open_store(url, schema=schema) as s:
            s.save_reference_set(refs, name="line refs")
        store = url if relay is None else _relayed(url, relay)
        yield Lot(sim, store, folder, schema=schema, direct=url)


def _relayed(url: str, relay: Any) -> str:
    from sqlalchemy.engine import make_url

    real = make_url(url)
    return real.set(host="127.0.0.1", port=relay.port).render_as_string(hide_password=False)


def _relay(url: str) -> Any:
    from sqlalchemy.engine import make_url
    from test_production_outbox import Relay

    real = make_url(url)
    return Relay(real.host or "127.0.0.1", real.port or 5432)


def lot_outage(t: Tally, lot: Lot, relay: Any, checks: int, seconds: float) -> None:
    proc = lot.start(30)
    try:
        time.sleep(2.5)
        relay.cut()
        time.sleep(seconds)
        relay.mend()
        time.sleep(1.0)
        out, err = proc.communicate(timeout=120)  # closes the input: the lot ends
    finally:
        proc.kill()
        relay.mend()
    lot.take_output(out)
    t.outage_s += seconds
    problems = check_lot(lot, checks)
    if lot.waiting():
        problems.append(f"{len(lot.waiting())} unit(s) still in the outbox after the lot ended")
    if proc.returncode != 0:
        problems.append(f"station ended with {proc.returncode}: {err.strip()[-300:]}")
    if problems:
        t.note("lot outage: " + "; ".join(problems))
        t.lost += sum("lost:" in p for p in problems)
    else:
        t.outage_survived_s += seconds


def sweep_outage(t: Tally, sim: Any, url: str, seconds: float) -> None:
    from store_support import temporary_schema

    relay = _relay(url)
    plan = log_plan("100Hz", "1MHz", 301)
    state = SweepState(plan)
    cut: list[int] = []

    def cut_once() -> None:
        if state.count >= 30 and not cut:
            cut.append(state.count)
            relay.cut()
            threading.Timer(seconds, relay.mend).start()

    t.outage_s += seconds
    try:
        with (
            temporary_schema(url) as schema,
            open_store(_relayed(url, relay), schema=schema) as store,
            ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
        ):
            writer = store.begin_sweep(dut="outage-coil")
            out = run_sweep(meter, plan, writer=writer, state=state, on_progress=cut_once)
            with open_store(url, schema=schema) as direct:
                info = direct.sweep_info(writer.id)
                points = direct.sweep_points(writer.id)
        lost = 301 - len(points)
        same = np.array_equal(points["raw_r"].to_numpy(), out.raw.real)
        if out.status == "complete" and info.points == 301 and lost == 0 and same:
            t.outage_survived_s += seconds
        else:
            t.lost += max(lost, 0)
            t.note(f"sweep outage: {out.status}, {info.points} points recorded, {lost} lost, "
                   f"values {'equal' if same else 'DIFFERENT'}: {out.message()}")  # fmt: skip
    finally:
        relay.close()


def kills_and_outages(t: Tally, quick: bool) -> None:
    from store_support import postgres_unreachable, postgres_url

    url = postgres_url()
    reason = postgres_unreachable(url)
    rng = random.Random(7)
    checks = len(parse_plan(example_plan_text(), "plan").checks)
    with (
        tempfile.TemporaryDirectory() as tmp,
        running(dut="demo-coil", fixture="bench-leads", seed=3, measure_time=0.02) as sim,
    ):
        refs = capture(sim, "bench-leads")
        folder = Path(tmp)
        with lot_on("sqlite", sim, refs, folder / "sqlite", None) as lot:
            run_kills(t, lot, 3 if quick else 8, rng, checks, label="SQLite")
        if reason is not None:
            t.skipped.append(f"PostgreSQL kills and outages: {reason}")
            return
        with lot_on("postgresql", sim, refs, folder / "pg", url) as lot:
            run_kills(t, lot, 1 if quick else 3, rng, checks, label="PostgreSQL")
        relay = _relay(url)
        try:
            with lot_on("postgresql", sim, refs, folder / "cut", url, relay) as lot:
                run_kills(t, lot, 1 if quick else 2, rng, checks, relay, "PostgreSQL cut")
            if not quick:
                with lot_on("postgresql", sim, refs, folder / "outage", url, relay) as lot:
                    lot_outage(t, lot, relay, checks, 3.0)
        finally:
            relay.close()
        sweep_outage(t, sim, url, 2.0)


# -- the table -----------------------------------------------------------------------------------


def table(t: Tally, seconds: float) -> str:
    rows = [
        ("faults injected", str(t.injected), "all 7 kinds"),
        ("results correct", str(t.correct), "-"),
        ("errors reported", str(t.reported), "-"),
        ("hangs", str(t.hangs), "0"),
        ("wrong values accepted", str(t.wrong), "0"),
        ("records lost", str(t.lost), "0"),
        ("bad inputs tried", str(t.bad_inputs), "-"),
        ("unexpected exceptions", str(t.unexpected), "0"),
        ("kills survived", f"{t.kills_survived} of {t.kills}", "all"),
        ("outage seconds survived", f"{t.outage_survived_s:g} of {t.outage_s:g}", "all"),
    ]
    lines = [f"{'':26}{'figure':>12}   goal   ", "-" * 52]
    for name, value, goal in rows:
        met = ""
        if goal == "0":
            met = "met" if value == "0" else "NOT MET"
        elif goal == "all" and " of " in value:
            a, b = value.split(" of ")
            met = "met" if a == b else "NOT MET"
        lines.append(f"{name:26}{value:>12}   {goal:6} {met}")
    lines.append(f"(ran {seconds:.0f} s)")
    return "\n".join(lines)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a shorter run (about 1 minute)")
    args = parser.parse_args()
    began = time.monotonic()
    t = Tally()
    fault_matrix(t, (1, 2) if args.quick else (1, 2, 3, 5))
    bad_inputs(t, 3000 if args.quick else 12000)
    kills_and_outages(t, args.quick)
    print(table(t, time.monotonic() - began))
    kinds = sorted({k for k, _ in t.by_kind})
    print("\nfaults by kind: " + "; ".join(
        f"{k} " + ", ".join(f"{v} {n}" for (kk, v), n in sorted(t.by_kind.items()) if kk == k)
        for k in kinds
    ))  # fmt: skip
    for text in t.skipped:
        print(f"skipped: {text}")
    for text in t.notes:
        print(f"- {text}")


if __name__ == "__main__":
    main()
