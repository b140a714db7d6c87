"""How fast do the commands start? Each as a user types it, against `python -c "import numpy"`.

Goals (issue "speed where the user waits"):

- `acquire reference list` (a store holding a few reference sets) at most 2x `import numpy`;
- `acquire sweep` of 1,601 points (the simulated meter in its own process at 0 ms a point, an
  SQLite store in a temporary folder that already exists, as a bench's store does after its
  first use, `--no-live`) at most 2.5x `import numpy`; shown beside it, the same sweep into a
  new store, which the same path first makes from the frozen script of the newest layout;
- `acquire --help` at most 2x `import numpy` (help must not load what the commands need).

Shown for reference, with no goal in the issue: `acquire station` from its start until it has
waited for a serial and read the end of its input (no unit measured), and `acquire lot` on a
store holding one lot. Also printed: the import floor of the sweep (numpy, pyvisa with
pyvisa-py's TCP/IP session, rich's live view and table, sqlite3), the same without rich (which a
sweep with --no-live into a pipe does not load), and the same with SQLAlchemy,
which every write to the store goes through, so the reader sees what is reachable.

Every figure is the median of several fresh interpreter runs, interleaved with the baseline's
runs so a busy machine slows both alike. The tool's modules are compiled once before the runs
(into a temporary folder), as an installed package's are, so no run pays for compiling them.

Run: ``python benchmarks/bench_cli.py`` (``--quick``: fewer repeats).
"""

from __future__ import annotations

import argparse
import atexit
import math
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

from goals import Goal, report

ROOT = Path(__file__).resolve().parent.parent
PYTHON = sys.executable
NUMPY = ["-c", "import numpy"]
#: What the sweep command imports before it can measure, bar SQLAlchemy and the tool itself.
FLOOR = (
    "import numpy, sqlite3, pyvisa, pyvisa_py.tcpip, pyvisa_py.highlevel, rich.live, "
    "rich.table, rich.console; pyvisa.ResourceManager('@py')"
)
#: The same without rich: a sweep with --no-live into a pipe or a file prints without it.
FLOOR_PLAIN = "import numpy, sqlite3, pyvisa, pyvisa_py.tcpip, pyvisa_py.highlevel; " + (
    "pyvisa.ResourceManager('@py')"
)
BASELINE = 'python -c "import numpy"'


#: Where the tool's compiled modules are kept for the runs (a temporary folder, see
#: :func:`compile_tool`), so the runs read bytecode as an installed package does.
BYTECODE = Path(tempfile.mkdtemp(prefix="bench-cli-bytecode-"))
atexit.register(shutil.rmtree, BYTECODE, True)


def run_env() -> dict[str, str]:
    env = dict(os.environ, COLUMNS="120", PYTHONPATH=str(ROOT), PYTHONPYCACHEPREFIX=str(BYTECODE))
    for name in [n for n in env if n.startswith("ACQUIRE_") or n == "PYTHONDONTWRITEBYTECODE"]:
        del env[name]
    return env


def compile_tool() -> None:
    """The tool's modules compiled once, into :data:`BYTECODE` (the checkout is left as it is).

    An installed package is compiled when installed; a run from a checkout compiles each module
    on its first import and keeps the result, unless PYTHONDONTWRITEBYTECODE is set (as on some
    shared machines), when every run would compile every module again: a cost users do not pay.
    """
    folders = [str(ROOT / "acquire"), str(ROOT / "drivers")]
    subprocess.run([PYTHON, "-m", "compileall", "-q", *folders], env=run_env(), check=True,
                   capture_output=True)  # fmt: skip


def run_once(args: list[str], stdin: bytes = b"") -> float:
    env = run_env()
    began = time.perf_counter()
    done = subprocess.run(
        [PYTHON, *args], input=stdin, capture_output=True, env=env, cwd=ROOT, timeout=300
    )
    seconds = time.perf_counter() - began
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(args)} failed:\n{done.stderr.decode(errors='replace')}")
    return seconds


def against_numpy(args: list[str], repeats: int, stdin: bytes = b"") -> tuple[float, float]:
    """Median seconds of ``args`` and of `import numpy`, their runs interleaved."""
    runs, base = [], []
    for _ in range(repeats):
        base.append(run_once(NUMPY))
        runs.append(run_once(args, stdin))
    return statistics.median(runs), statistics.median(base)


def start_simulator(profile: str, fixture: str) -> tuple[subprocess.Popen, str]:
    process = subprocess.Popen(
        [PYTHON, "-m", "acquire", "sim", "--port", "0", "--profile", profile, "--fixture",
         fixture, "--measure-time", "0", "--seed", "1"],
        cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
    )  # fmt: skip
    line = process.stdout.readline().strip() if process.stdout else ""
    if not line.endswith("::SOCKET"):
        process.kill()
        raise SystemExit(f"the simulated meter did not start (said {line!r})")
    return process, line


class SimulatorOperator:
    """Puts each standard in the simulated fixture over SCPI, as a person would by hand."""

    def __init__(self, resource: str) -> None:
        import pyvisa

        self._rm = pyvisa.ResourceManager("@py")
        self._r = self._rm.open_resource(resource, read_termination="\n", write_termination="\n")

    def tell(self, text: str) -> None:
        pass

    def ready(self, standard: str, instruction: str) -> bool:
        self._r.write(f'SIM:DUT "{standard}"')
        return self._r.query("SYST:ERR?").startswith("0")

    def retry(self, standard: str, problems: list[str]) -> bool:
        return False

    def put_in(self, dut: str) -> None:
        self.ready(dut, "")

    def close(self) -> None:
        self._r.close()
        self._rm.close()


def make_reference_store(url: str) -> None:
    """A store holding four reference sets of 201 points (invented demo data)."""
    import numpy as np

    from acquire.compensation import ReferenceSet
    from acquire.store import open_store

    with open_store(url) as store:
        for k in range(4):
            f = np.geomspace(100.0, 1e7, 201)
            refs = ReferenceSet(
                frequency=f, open=1e-3 - 1e6j / f, short=0.02 + 1e-8j * f,
                fixture=f"jig-{k}", captured_at=datetime.now(UTC) - timedelta(hours=k + 1),
            )  # fmt: skip
            store.save_reference_set(refs, name=f"set {k}", fixture_id=store.record_fixture(
                f"jig-{k}"))  # fmt: skip


def make_station_store(url: str, resource: str) -> None:
    """Open, short and load captured on the example plan's fixture, and the demo coil put back."""
    from acquire.capture import capture_references
    from acquire.plan import log_plan
    from acquire.production.plan_file import example_plan_path, load_plan
    from acquire.store import open_store
    from drivers.meter import ImpedanceMeter
    from drivers.simulator.profiles import load_dut

    plan = load_plan(example_plan_path())
    operator = SimulatorOperator(resource)
    try:
        with ImpedanceMeter.open(resource, dialect="simulated") as meter:
            identity = meter.identify()
            refs = capture_references(
                meter, log_plan("100Hz", "1MHz", 41), operator, fixture=plan.fixture,
                load_true=lambda f: load_dut("load").impedance(f), meter_name=str(identity),
                repeats=1,
            )  # fmt: skip
        operator.put_in("demo-coil")
    finally:
        operator.close()
    with open_store(url) as store:
        store.save_reference_set(refs, name="bench references")


def make_lot_store(url: str, units: int) -> None:
    """One lot of ``units`` units, two measurements each (invented demo data)."""
    from acquire.store import MeasurementRecord, UnitRecord, open_store

    start = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)
    with open_store(url) as store:
        for i in range(units):
            value = 10.0 + math.sin(i)
            rs = MeasurementRecord("Rs", value, "Ω", 1e4, 8.5, 19.5, "pass", uncertainty=0.1)
            q = MeasurementRecord("Q", 40.0 + math.cos(i), "", 1e5, 36.0, None, "pass")
            end = start + timedelta(seconds=i)
            store.save_unit(UnitRecord(
                serial=f"U{i:05d}", outcome="pass", bin="1", measurements=(rs, q), lot="LOT-1",
                station="bench 2", started_at=end - timedelta(seconds=1), finished_at=end,
            ))  # fmt: skip


def row(label: str, seconds: float, numpy: float) -> None:
    print(f"{label:<58}{seconds:>9.3f}{seconds / numpy:>9.2f}x", flush=True)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats (a fast look)")
    args = parser.parse_args()
    repeats = 3 if args.quick else 9
    run_once(["-c", "pass"])  # warm the file cache
    compile_tool()
    goals: list[Goal] = []
    with tempfile.TemporaryDirectory() as folder:
        refs_url = f"sqlite:///{Path(folder) / 'refs.db'}"
        lot_url = f"sqlite:///{Path(folder) / 'lot.db'}"
        station_url = f"sqlite:///{Path(folder) / 'station.db'}"
        make_reference_store(refs_url)
        make_lot_store(lot_url, 200 if args.quick else 1000)
        coil, coil_resource = start_simulator("air-core-coil", "bench-leads")
        demo, demo_resource = start_simulator("demo-coil", "bench-leads")
        try:
            make_station_store(station_url, demo_resource)
            print(f"start-up times: median of {repeats} fresh interpreters each, "
                  "interleaved with `import numpy`")  # fmt: skip
            print(f"{'command':<58}{'seconds':>9}{'x numpy':>10}")
            bare, numpy = against_numpy(["-c", "pass"], repeats)
            row("python -c pass", bare, numpy)
            row(BASELINE, numpy, numpy)
            floor, numpy_f = against_numpy(["-c", FLOOR], repeats)
            row("floor: numpy+sqlite3+pyvisa(+py TCPIP)+rich live/table", floor, numpy_f)
            plain, numpy_p = against_numpy(["-c", FLOOR_PLAIN], repeats)
            row("floor without rich (a --no-live sweep into a pipe)", plain, numpy_p)
            floor_sa, numpy_fs = against_numpy(["-c", FLOOR + "; import sqlalchemy"], repeats)
            row("floor with sqlalchemy (the store's writes)", floor_sa, numpy_fs)

            top, numpy_h = against_numpy(["-m", "acquire", "--help"], repeats)
            row("acquire --help", top, numpy_h)
            goals.append(Goal("acquire --help", top / numpy_h, 2.0, "x", baseline=BASELINE))

            listing, numpy_r = against_numpy(
                ["-m", "acquire", "reference", "list", "--store", refs_url], repeats
            )
            row("acquire reference list (4 sets)", listing, numpy_r)
            goals.append(
                Goal("acquire reference list", listing / numpy_r, 2.0, "x", baseline=BASELINE)
            )

            from acquire.store import open_store

            sweep_db = Path(folder) / "sweep.db"
            with open_store(f"sqlite:///{sweep_db}"):
                pass  # the store a bench keeps: made once, by the first command that used it
            sweep = ["-m", "acquire", "sweep", "--resource", coil_resource, "--store",
                     f"sqlite:///{sweep_db}", "--points", "1601", "--no-live"]  # fmt: skip
            swept, numpy_s = against_numpy(sweep, repeats)
            row("acquire sweep --points 1601 --no-live (0 ms/point)", swept, numpy_s)
            first = [run_once(sweep[:6] + [f"sqlite:///{Path(folder) / f'new{k}.db'}"]
                              + sweep[7:]) for k in range(repeats)]  # fmt: skip
            row("  the same into a new store (made from the script)", statistics.median(first),
                numpy_s)  # fmt: skip
            goals.append(
                Goal("acquire sweep of 1,601 points (simulator at 0 ms/point, SQLite)",
                     swept / numpy_s, 2.5, "x", baseline=BASELINE)
            )  # fmt: skip

            station = ["-m", "acquire", "station", "--resource", demo_resource, "--store",
                       station_url, "--plan", "acquire/examples/coil-plan.toml", "--lot",
                       "L-1", "--operator", "ana", "--station", "s1", "--no-bell",
                       "--outbox", str(Path(folder) / "outbox.db")]  # fmt: skip
            started, numpy_st = against_numpy(station, repeats)
            row("acquire station (start, wait for a serial, end of input)", started, numpy_st)

            lot, numpy_l = against_numpy(["-m", "acquire", "lot", "LOT-1", "--store", lot_url],
                                         repeats)  # fmt: skip
            row("acquire lot LOT-1 (one lot)", lot, numpy_l)
        finally:
            for process in (coil, demo):
                process.terminate()
                process.wait(timeout=10)
    print()
    for goal in goals:
        report(goal)
    print("(no goal in the issue for station and lot; shown for reference)")
    print(f"station start: {started / numpy_st:.2f}x, lot: {lot / numpy_l:.2f}x {BASELINE}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
