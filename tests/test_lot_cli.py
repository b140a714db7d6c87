"""`acquire lot` as a subprocess, on a small store whose numbers are worked out by hand.

The lot: five serials whose Rs readings at 10 kHz in test order are 10, 12, 11, 15, 13 ohm
(one serial retested after an invalid reading), tolerance 8 ... 20 ohm. By hand: mean 12.2,
std sqrt(14.8/4) = 1.9235, moving ranges 2, 1, 4, 2 -> sigma within 2.25/1.128 = 1.9947
(NIST/SEMATECH e-Handbook 6.3.2), Cp = 12/(6·1.9947) = 1.0027, Cpk = 4.2/(3·1.9947) = 0.7019
(6.1.6). Q has a lower limit only, so its Cp is not defined (6.1.6's one-sided indices).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from datetime import UTC, datetime, timedelta

import pandas as pd
import pytest

from acquire.store import MeasurementRecord, UnitRecord, open_store

T0 = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)
#: A lot name that rich would read as markup if it were printed as markup.
LOT = "[bold]L&1[/bold]"


def _unit(serial, value, order, attempt=1):
    good = not math.isnan(value)
    verdict = "pass" if good else "fail"
    rs = MeasurementRecord(
        "Rs", value, "Ω", 1e4, 8.5, 19.5, verdict, uncertainty=0.1,
        tolerance_low=8.0, tolerance_high=20.0,
    )  # fmt: skip
    q = MeasurementRecord("Q", 40.0 + order, "", 1e5, 36.0, None, "pass", tolerance_low=35.0)
    end = T0 + timedelta(seconds=order)
    return UnitRecord(
        serial=serial, outcome=verdict, bin="1" if good else "reject", measurements=(rs, q),
        lot=LOT, attempt=attempt, station="bench 2", started_at=end - timedelta(seconds=1),
        finished_at=end,
    )  # fmt: skip


@pytest.fixture(scope="module")
def store_url(tmp_path_factory):
    folder = tmp_path_factory.mktemp("lot")
    url = f"sqlite:///{folder / 'store.db'}"
    with open_store(url) as store:
        for u in [
            _unit("E", 13.0, 6),
            _unit("C", 11.0, 4, attempt=2),
            _unit("A", 10.0, 1),
            _unit("D", 15.0, 5),
            _unit("C", math.nan, 3),
            _unit("B", 12.0, 2),
        ]:
            store.save_unit(u)
    return url


def acquire(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "acquire", "lot", *args],
        capture_output=True,
        text=True,
        timeout=60,
        env={"PATH": "/usr/bin:/bin", "COLUMNS": "160"},
    )


def test_text_output(store_url, tmp_path):
    long_csv, wide_csv = tmp_path / "long.csv", tmp_path / "wide.csv"
    done = acquire(
        LOT, "--store", store_url, "--csv-long", str(long_csv), "--csv-wide", str(wide_csv)
    )
    assert done.returncode == 0, done.stderr
    out = done.stdout
    assert f"lot {LOT}" in out  # printed as data, never as markup
    assert "5 units in 6 attempts" in out
    assert "first-pass yield 80.0% (4), final yield 100.0% (5)" in out
    assert "bins (latest attempt per serial): 1 5" in out
    row = next(line for line in out.splitlines() if "Rs @ 10.00 kHz" in line)
    cells = [c.strip() for c in row.replace("│", "|").split("|")]
    # n, mean, std, min, max, tolerance, Cp, Cpk, Pp, Ppk (by hand, see the module docstring;
    # Pp = 12/(6·1.9235) = 1.04, Ppk = 4.2/(3·1.9235) = 0.73).
    assert cells[1:] == ["5/6", "12.20 Ω", "1.924 Ω", "10.00 Ω", "15.00 Ω"] + [
        "8.000 Ω … 20.00 Ω", "1.00", "0.70", "1.04", "0.73",
    ]  # fmt: skip
    q_row = next(line for line in out.splitlines() if "Q @ 100.0 kHz" in line)
    assert "≥ 35" in q_row and "—" in q_row
    assert "within sigma" in out and "latest attempt" in out
    assert f"wrote {long_csv}" in out
    heads = [line for line in long_csv.read_text(encoding="utf-8").splitlines() if line[0] == "#"]
    assert f"# lot: {LOT}" in heads and "# layout: long" in heads
    long = pd.read_csv(long_csv, comment="#")
    assert long.shape[0] == 12 and set(long["lot"]) == {LOT}
    wide = pd.read_csv(wide_csv, comment="#")
    rs = wide["Rs@10kHz [ohm]"].fillna(-1.0).tolist()  # the invalid reading is an empty cell
    assert wide["serial"].tolist() == ["A", "B", "C", "C", "D", "E"]
    assert rs == [10.0, 12.0, -1.0, 11.0, 15.0, 13.0]
    assert "Q@100kHz [1]" in wide.columns and "U(Rs@10kHz) [ohm]" in wide.columns


def test_json_output(store_url):
    done = acquire("--station", "bench 2", "--store", store_url, "--json")
    assert done.returncode == 0, done.stderr
    doc = json.loads(done.stdout)
    assert (doc["units"], doc["attempts"], doc["passed"]) == (5, 6, 5)
    assert doc["first_pass_yield"] == pytest.approx(0.8) and doc["yield"] == 1.0
    assert doc["bins"] == {"1": 5} and doc["failing"] == {}
    rs = next(q for q in doc["quantities"] if q["parameter"] == "Rs")
    assert rs["frequency"] == 1e4 and rs["unit"] == "Ω"
    assert rs["mean"] == pytest.approx(12.2) and rs["std"] == pytest.approx(1.923538406)
    assert rs["sigma_within"] == pytest.approx(1.994680851)
    assert rs["cp"] == pytest.approx(1.002666667) and rs["cpk"] == pytest.approx(0.701866667)
    q = next(q for q in doc["quantities"] if q["parameter"] == "Q")
    assert q["cp"] is None and q["pp"] is None and q["cpk"] is not None
    assert "within" in doc["sigma"]


def test_refusals_are_one_line(store_url, tmp_path):
    done = acquire("--store", store_url)
    assert done.returncode == 2 and done.stderr.count("\n") == 1
    assert "give a LOT" in done.stderr
    done = acquire("L", "--store", f"sqlite:///{tmp_path / 'none.db'}")
    assert done.returncode == 2 and "no results store" in done.stderr
    done = acquire(LOT, "--since", "last week", "--store", store_url)
    assert done.returncode == 2 and "ISO 8601" in done.stderr
