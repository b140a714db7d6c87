"""`acquire report` as a user runs it (a subprocess), and the demo's report step.

Checks: the page and PNGs land in --out, the page embeds each PNG file byte for byte (data URIs,
RFC 2397; base64, RFC 4648), a lot name with HTML in it is escaped (html.escape's replacements,
HTML Living Standard), and mistakes end with one line and exit code 2 (the command line's own
rule, acquire/cli.py).
"""

from __future__ import annotations

import base64
import io
import re
import subprocess
import sys
from pathlib import Path

import pytest
from rich.console import Console

from acquire.store import open_store

TESTS = Path(__file__).resolve().parent
sys.path.insert(0, str(TESTS))

from store_support import synthetic_unit  # noqa: E402
from test_report_pictures import demo_store, png_size  # noqa: E402


def acquire(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "acquire", *args],
        capture_output=True,
        text=True,
        timeout=120,
    )


def embedded(page: str) -> list[bytes]:
    return [base64.b64decode(m) for m in re.findall(r'src="data:image/png;base64,([^"]+)"', page)]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return demo_store(str(tmp_path_factory.mktemp("demo")))


def test_report_of_the_demo_lot_and_sweep(demo, tmp_path):
    with open_store(demo) as store:
        sweep = store.list_sweeps()[0].id
    out = tmp_path / "report"
    done = acquire("report", "--lot", "DEMO-LOT-1", "--sweep", str(sweep), "--out", str(out),
                   "--store", demo)  # fmt: skip
    assert done.returncode == 0, done.stderr
    assert str(out / "report.html") in done.stdout
    page = (out / "report.html").read_text(encoding="utf-8")
    files = sorted(out.glob("*.png"))
    # a histogram and a control chart for each of the plan's 8 quantities, and the sweep's
    assert len([f for f in files if f.name.startswith("lot-")]) == 16
    assert len(files) > 16
    assert sorted(embedded(page)) == sorted(f.read_bytes() for f in files)
    assert all(png_size(f.read_bytes())[0] > 0 for f in files)
    assert "DEMO-LOT-1" in page and "first-pass yield" in page and "Cpk" in page


def test_a_lot_name_with_html_in_it_is_escaped(tmp_path):
    hostile = "<b>&x</b>"
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        for i in range(12):
            store.save_unit(synthetic_unit(i, lot=hostile))
    out = tmp_path / "out"
    done = acquire("report", "--lot", hostile, "--out", str(out), "--store", url)
    assert done.returncode == 0, done.stderr
    page = (out / "report.html").read_text(encoding="utf-8")
    assert hostile not in page
    assert "&lt;b&gt;&amp;x&lt;/b&gt;" in page
    assert embedded(page)


def test_mistakes_end_in_one_line(tmp_path):
    missing = f"sqlite:///{tmp_path}/x.db"
    done = acquire("report", "--lot", "L", "--out", str(tmp_path / "o"), "--store", missing)
    assert done.returncode == 2 and "no results store" in done.stderr
    assert len(done.stderr.strip().splitlines()) == 1
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        store.save_unit(synthetic_unit(0))
    done = acquire("report", "--out", str(tmp_path / "o"), "--store", url)
    assert done.returncode == 2 and "--lot" in done.stderr
    done = acquire("report", "--lot", "L", "--since", "yesterday", "--out", "o", "--store", url)
    assert done.returncode == 2 and "ISO 8601" in done.stderr


def test_the_demo_step_writes_the_report_beside_the_store(tmp_path, monkeypatch):
    import acquire.demo
    from acquire.demo import STEPS, run_demo
    from acquire.demo_report import write_report

    assert STEPS.index(write_report) == STEPS.index(acquire.demo.finish) - 1
    buffer = io.StringIO()
    run_demo(f"sqlite:///{tmp_path / 'demo.db'}", live=False, points=51, measure_time=0,
                   console=Console(file=buffer, width=200))  # fmt: skip
    page = tmp_path / "demo-report" / "report.html"
    assert f"report: {page}" in buffer.getvalue()
    assert len(embedded(page.read_text(encoding="utf-8"))) > 16
