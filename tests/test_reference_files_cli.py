"""`acquire reference export ID FILE` and `acquire reference import FILE` as a user runs them.

External checks: the file's sha256 field is recomputed here with hashlib (SHA-256 as FIPS 180-4
defines it) over the canonical JSON the file format documents (keys sorted, no spaces), and
the file is read with Python's json module (RFC 8259); a value too large for an IEEE 754
double (1e400, or a 400-digit integer) has no float64 to become and must be refused.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pytest

from acquire.compensation.reference_set import ReferenceSet
from acquire.store import open_store

ROOT = Path(__file__).resolve().parents[1]


def acquire(*args: str) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
    return subprocess.run(
        [sys.executable, "-m", "acquire", *args],
        capture_output=True, text=True, timeout=60, cwd=ROOT, env=env,
    )  # fmt: skip


def references() -> ReferenceSet:
    """Our invented fixture: 25 nH and 12 mohm of leads, 3 pF across, a 100 ohm load; one
    overrange open reading (inf) and a NaN to carry through the file."""
    f = np.geomspace(1e3, 1e6, 7)
    w = 2 * np.pi * f
    short = 0.012 + 1j * w * 25e-9
    opened = 1 / (1j * w * 3e-12 + 1e-9)
    opened[0] = complex(np.inf, np.inf)
    load = 100.0 + short
    load[3] = complex(np.nan, 0.0)
    return ReferenceSet(
        f, open=opened, short=short, load=load, load_true=100.0 + 0j,
        captured_at=datetime(2031, 5, 4, 8, 30, tzinfo=UTC), fixture="clips [red] µ",
        meter="Example Works 1, serial 9", temperature=23.5, notes="after lunch",
        open_u=np.full(7, 1e-3), short_u=np.full(7, 2e-6), repeats=3, grid_spacing="log",
    )  # fmt: skip


@pytest.fixture
def stored(tmp_path):
    url = f"sqlite:///{tmp_path / 'bench.db'}"
    with open_store(url) as store:
        ref_id = store.save_reference_set(references(), name="clips")
    return tmp_path, url, ref_id


def same(a: np.ndarray | None, b: np.ndarray | None) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return np.array_equal(a, b, equal_nan=True)


def test_export_then_import_gives_equal_arrays(stored):
    folder, url, ref_id = stored
    path = folder / "clips.json"
    out = acquire("reference", "export", str(ref_id), str(path), "--store", url)
    assert out.returncode == 0 and "written to" in out.stdout, out.stderr
    data = json.loads(path.read_text(encoding="utf-8"))
    body = {k: v for k, v in data.items() if k != "sha256"}
    canonical = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    assert data["sha256"] == hashlib.sha256(canonical.encode("utf-8")).hexdigest()
    other = f"sqlite:///{folder / 'other.db'}"
    back = acquire("reference", "import", str(path), "--name", "from bench 1", "--store", other)
    assert back.returncode == 0 and "imported reference set 1" in back.stdout, back.stderr
    with open_store(other) as store:
        info = store.list_reference_sets()[0]
        got = store.load_reference_set(info.id)
    want = references()
    assert info.name == "from bench 1" and info.fixture == "clips [red] µ"
    for name in ("frequency", "open", "short", "load", "load_true", "open_u", "short_u", "load_u"):
        assert same(getattr(got, name), getattr(want, name)), name
    assert (got.captured_at, got.meter, got.temperature, got.notes, got.repeats) == (
        want.captured_at, want.meter, want.temperature, want.notes, want.repeats,
    )  # fmt: skip


def test_an_imported_set_gets_a_name_and_is_found_by_it(stored):
    folder, url, ref_id = stored
    path = folder / "clips.json"
    assert acquire("reference", "export", "latest", str(path), "--store", url).returncode == 0
    assert acquire("reference", "import", str(path), "--store", url).returncode == 0
    with open_store(url) as store:
        names = [info.name for info in store.list_reference_sets()]
    assert names == ["clips", "clips [red] µ 2031-05-04 08:30 (imported)"]


def _edited(folder: Path, url: str, ref_id: int, edit) -> Path:
    path = folder / "good.json"
    assert acquire("reference", "export", str(ref_id), str(path), "--store", url).returncode == 0
    bad = folder / "bad.json"
    bad.write_text(edit(path.read_text(encoding="utf-8")), encoding="utf-8")
    return bad


@pytest.mark.parametrize(
    "edit, fragment",
    [
        (lambda t: t.replace('"temperature_c": 23.5', '"temperature_c": 24.5'), "checksum"),
        (lambda t: t.replace("1000.0,", "1e400,", 1), "damaged"),
        (lambda t: t.replace("1000.0,", "1" + "0" * 400 + ",", 1), "damaged"),
        (lambda t: t.replace("1000.0,", "1" + "0" * 5000 + ",", 1), "damaged"),
        (lambda t: t.replace("1000.0,", "NaN,", 1), "damaged"),
        (lambda t: t[: len(t) // 2], "damaged"),
        (lambda t: "[1, 2, 3]", "not a reference-set file"),
    ],
)
def test_a_hostile_file_is_refused_in_one_line(stored, edit, fragment):
    folder, url, ref_id = stored
    bad = _edited(folder, url, ref_id, edit)
    result = acquire("reference", "import", str(bad), "--store", url)
    assert result.returncode == 2, result.stdout
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in result.stderr, result.stderr
    assert lines[0].startswith("acquire reference: error: ") and fragment in lines[0], lines[0]
    with open_store(url) as store:
        assert len(store.list_reference_sets()) == 1  # nothing was added


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["export", "7", "{folder}/x.json"], "no reference set 7"),
        (["export", "1", "{folder}/bench.db"], "the results store's own file"),
        (["export", "1", "{folder}"], "that is a folder"),
        (["export", "1", "{folder}/no/x.json"], "does not exist"),
        (["import", "{folder}/missing.json"], "no reference-set file"),
        (["import", "{folder}/bench.db"], "not a reference-set file"),
    ],
)
def test_bad_ids_and_paths_are_refused_in_one_line(stored, args, fragment):
    folder, url, _ = stored
    result = acquire(
        "reference", *(a.replace("{folder}", str(folder)) for a in args), "--store", url
    )
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0], result.stderr
    with open_store(url) as store:
        assert len(store.list_reference_sets()) == 1
