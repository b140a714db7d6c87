"""Which heavy libraries each command's start loads, checked in a fresh interpreter (not timed).

`acquire --help` and the read-only listing of reference sets load none of numpy, SQLAlchemy,
Alembic, scipy, pandas, pyvisa or matplotlib; importing a store record loads no SQLAlchemy; a
sweep that opens an SQLite store already at the newest revision loads no SQLAlchemy, Alembic,
scipy or pandas, nor one that makes a new SQLite store; the sweep command itself, into a pipe,
loads neither rich nor what only other paths need (the live view, CSV output, the store's
records, the reference set's checks and file, DC bias).
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from acquire.compensation import ReferenceSet
from acquire.store import open_store
from drivers.simulator import running

ROOT = Path(__file__).resolve().parents[1]
HEAVY = ("numpy", "sqlalchemy", "alembic", "scipy", "pandas", "pyvisa", "matplotlib")


def _loaded_after(code: str, cwd: Path) -> set[str]:
    probe = f"import sys\n{code}\nprint(' '.join(m for m in {HEAVY!r} if m in sys.modules))\n"
    done = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, cwd=cwd, timeout=120
    )
    assert done.returncode == 0, done.stderr
    lines = done.stdout.strip().splitlines()
    return set(lines[-1].split()) if lines else set()


def test_help_loads_nothing_heavy(tmp_path):
    code = (
        "from acquire.cli import build_parser\nassert 'reference' in build_parser().format_help()"
    )
    assert _loaded_after(code, tmp_path) == set()


def test_reference_list_on_a_current_sqlite_store_loads_nothing_heavy(tmp_path):
    url = f"sqlite:///{tmp_path / 'r.db'}"
    with open_store(url) as store:
        f = np.array([1e3, 1e4])
        refs = ReferenceSet(frequency=f, open=1e-3 - 1e6j / f, short=0.02 + 1e-6j * f)
        store.save_reference_set(refs, name="jig set")
    code = (
        "import contextlib, io\nfrom acquire.cli import main\nout = io.StringIO()\n"
        f"with contextlib.redirect_stdout(out):\n    assert main(['reference', 'list', "
        f"'--store', {url!r}]) == 0\nassert 'jig set' in out.getvalue()"
    )
    assert _loaded_after(code, tmp_path) == set()


def test_store_records_load_no_sqlalchemy(tmp_path):
    code = "from acquire.store.records import ReferenceSetInfo as I\nI(1, 'a', '', '', None, (), 2)"
    assert _loaded_after(code, tmp_path) == set()


def test_opening_a_current_store_for_a_sweep_loads_no_sql_toolkit_nor_scipy(tmp_path):
    url = f"sqlite:///{tmp_path / 's.db'}"
    open_store(url).close()
    code = (
        "from acquire.store.sqlite_sweeps import open_sweep_store\n"
        "import acquire.sweep, acquire.sweep_setup\n"
        "import acquire.commands.sweep, acquire.dashboard, acquire.csvout\n"
        f"open_sweep_store({url!r}).close()"
    )
    loaded = _loaded_after(code, tmp_path)
    assert not loaded & {"sqlalchemy", "alembic", "scipy", "pandas"}, loaded


def test_opening_a_new_sqlite_store_for_a_sweep_loads_no_sql_toolkit(tmp_path):
    url = f"sqlite:///{tmp_path / 'new.db'}"
    code = (
        "from acquire.store.sqlite_sweeps import PlainSweepStore, open_sweep_store\n"
        f"store = open_sweep_store({url!r})\nassert isinstance(store, PlainSweepStore)\n"
        "store.close()"
    )
    loaded = _loaded_after(code, tmp_path)
    assert not loaded & {"sqlalchemy", "alembic"}, loaded
    with open_store(url) as store:
        assert not store.created  # made, at the newest revision, without them


#: What `acquire sweep` into a pipe (with --no-live or without: off a terminal there is no live
#: view) must not load: rich (the plain text is printed without it, acquire.plain_console) and
#: modules that only other paths need.
NOT_ON_THE_PLAIN_SWEEP = (
    "rich",
    "acquire.dashboard",
    "acquire.dashboard_side",
    "acquire.csvout",
    "acquire.destination",
    "acquire.capture",
    "acquire.store.records",
    "acquire.compensation.reference_set",
    "acquire.compensation.checks",
    "acquire.compensation.refs_file",
    "drivers.bias",
    "drivers.supply",
    "hashlib",  # OpenSSL: identity keys use CPython's own SHA-256 (acquire.store.plain_values)
)


@pytest.mark.parametrize("live", [["--no-live"], []])
def test_a_sweep_into_a_pipe_loads_neither_rich_nor_what_other_paths_need(tmp_path, live):
    url = f"sqlite:///{tmp_path / 's.db'}"
    open_store(url).close()
    wrapper = (
        "import sys\nfrom acquire.cli import main\ncode = main(sys.argv[1:])\n"
        f"gone = {NOT_ON_THE_PLAIN_SWEEP!r}\n"
        "print('LOADED', *sorted(m for m in sys.modules if m in gone or m.split('.')[0] in gone))\n"
        "sys.exit(code)\n"
    )
    env = {k: v for k, v in os.environ.items() if not k.startswith(("ACQUIRE_", "FORCE_COLOR"))}
    with running(dut="demo-coil", fixture="bench-leads", seed=3, measure_time=0.0) as sim:
        done = subprocess.run(
            [sys.executable, "-c", wrapper, "sweep", "--resource", sim.resource, "--store", url,
             "--points", "41", *live],
            capture_output=True, text=True, cwd=ROOT, env=env, timeout=120,
        )  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert "Sweep complete: 41 of 41 points" in done.stdout
    loaded = done.stdout.splitlines()[-1].split()
    assert loaded == ["LOADED"], loaded


def test_every_name_the_store_package_offers_is_there():
    import acquire.store

    for name in acquire.store.__all__:
        assert getattr(acquire.store, name) is not None, name


def test_the_identity_key_s_sha256_is_the_standard_one():
    import hashlib
    import json

    from acquire.store import plain_values

    # FIPS 180-4 (Secure Hash Standard), example "abc": SHA-256 of the three bytes.
    abc = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert plain_values.sha256(b"abc").hexdigest() == abc
    for parts in [("Maker", "M1", "SN 7", "1.0"), ("bench 'leads' µΩ",), ("",)]:
        text = json.dumps(list(parts), ensure_ascii=False).encode()
        assert plain_values.identity_key(*parts) == hashlib.sha256(text).hexdigest()
