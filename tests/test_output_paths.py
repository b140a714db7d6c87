"""No command writes a file over the results store: every output path naming the store's own
SQLite file (or its journal) is refused in one line, and the store is left as it was.

(A rule of this tool, no published source: an output option that names the database would
otherwise destroy every record in it.)
"""

from __future__ import annotations

import hashlib
import subprocess
import sys
from pathlib import Path

import pytest
from store_support import synthetic_unit

from acquire.store import open_store

ROOT = Path(__file__).resolve().parents[1]


def acquire(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "acquire", *args], capture_output=True, text=True, timeout=120,
        cwd=ROOT,
    )  # fmt: skip


@pytest.fixture
def store_file(tmp_path):
    path = tmp_path / "line.db"
    with open_store(f"sqlite:///{path}") as store:
        for i in range(3):
            store.save_unit(synthetic_unit(i, lot="L-1"))
    return path


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.mark.parametrize(
    "args",
    [
        ("lot", "L-1", "--csv-long", "{db}"),
        ("lot", "L-1", "--csv-wide", "{db}-wal"),
        ("report", "--lot", "L-1", "--out", "{db}"),
    ],
)
def test_an_output_naming_the_store_is_refused_and_the_store_kept(store_file, args):
    before = digest(store_file)
    done = acquire(*(a.format(db=store_file) for a in args), "--store", f"sqlite:///{store_file}")
    assert done.returncode == 2
    assert "results store's own file" in done.stderr
    assert len(done.stderr.strip().splitlines()) == 1
    assert digest(store_file) == before
    with open_store(f"sqlite:///{store_file}") as store:
        assert len(store.lot_units("L-1")) == 3


def test_a_sweep_csv_naming_the_store_is_refused_before_measuring(store_file, simulator):
    sim = simulator()
    url = f"sqlite:///{store_file}"
    done = acquire("sweep", "--resource", sim.resource, "--store", url, "--points", "5",
                   "--no-live", "--csv", str(store_file))  # fmt: skip
    assert done.returncode == 2 and "results store's own file" in done.stderr
    with open_store(url) as store:
        assert len(store.lot_units("L-1")) == 3 and store.list_sweeps() == []
