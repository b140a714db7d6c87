"""The line overview's server: GET only, names escaped, a well-formed picture, the store untouched,
and the page kept on this computer unless opened on purpose.

External references: HTTP's 405 Method Not Allowed (RFC 9110, 15.5.6); the page is parsed with
Python's ``html.parser`` and the picture with ``xml.etree`` (an SVG fragment is XML, SVG 1.1
section 1.1), so what counts as an element is decided by those parsers, not by this program.
"""

from __future__ import annotations

import hashlib
import re
import subprocess
import sys
import xml.etree.ElementTree as ET
from datetime import timedelta
from html.parser import HTMLParser

import pytest
from line_support import ROOT
from starlette.testclient import TestClient
from store_support import synthetic_unit

from acquire.production.station_watch import StationState
from acquire.store import open_store
from acquire.store.read_only import open_read_only
from acquire.store.schema import utc_now
from acquire.web import picture
from acquire.web.app import make_app
from acquire.web.overview import read_overview

NAMES = ["<script>window.pwned=1</script>", "<b>bold</b>", '"><img src=x onerror=alert(1)>']


class Elements(HTMLParser):
    """Every start tag with its attributes, and the text, as an HTML parser sees them."""

    def __init__(self) -> None:
        super().__init__()
        self.tags: list[tuple[str, dict]] = []
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs) -> None:
        self.tags.append((tag, dict(attrs)))

    def handle_data(self, data) -> None:
        self.text.append(data)


@pytest.fixture
def served(tmp_path):
    """A store with three stations of hostile names on one lot, and a client of its page."""
    url = f"sqlite:///{tmp_path / 'line.db'}"
    lot = "<i>lot</i>"
    with open_store(url) as store:
        store.save_units([synthetic_unit(i, lot, worker=k) for k in range(3) for i in range(6)])
        for name in NAMES:
            now = utc_now()
            store.save_station_state(StationState(
                station=name, state="blocked", reason=f"because {name}", lot=lot, plan=name,
                plan_hash="", operator=name, meter="m", fixture="jig", tested=6, passed=4,
                waiting=0, references=f"too old {name}", check_standard="", started_at=now,
                updated_at=now,
            ))  # fmt: skip
        # the units were written by "station-k": rename them to the hostile names
        with store.engine.begin() as conn:
            from sqlalchemy import text

            for k, name in enumerate(NAMES):
                conn.execute(text("UPDATE units SET station = :n WHERE station = :o"),
                             {"n": name, "o": f"station-{k}"})  # fmt: skip
    before = hashlib.sha256((tmp_path / "line.db").read_bytes()).hexdigest()
    store = open_read_only(url)
    with TestClient(make_app(lambda: read_overview(store), store.url)) as client:
        yield client, tmp_path / "line.db", before
    store.close()


def test_only_get_is_answered_and_every_answer_forbids_inline_script(served):
    client, _, _ = served
    for path in ("/", "/part", "/line.css", "/line.js"):
        answer = client.get(path)
        assert answer.status_code == 200
        assert "script-src 'self'" in answer.headers["content-security-policy"]
        for method in ("POST", "PUT", "DELETE", "PATCH"):
            assert client.request(method, path).status_code == 405, (method, path)


def test_hostile_names_are_text_never_elements(served):
    client, _, _ = served
    page = Elements()
    page.feed(client.get("/").text)
    tags = [tag for tag, _ in page.tags]
    assert [attrs for tag, attrs in page.tags if tag == "script"] == [
        {"src": "/line.js", "defer": None}
    ]
    assert not {"b", "img", "i"} & set(tags)
    text = "".join(page.text)
    for name in NAMES:
        assert f"because {name}" in text and f"too old {name}" in text
    stations = [attrs["data-station"] for tag, attrs in page.tags if "data-station" in attrs]
    assert sorted(stations) == sorted(NAMES)
    assert "<i>lot</i>" in text


def test_the_picture_is_well_formed_svg_ending_at_the_lot_yield(served):
    client, _, _ = served
    part = client.get("/part").text
    start = part.index("<svg")
    svg = ET.fromstring(part[start : part.index("</svg>", start) + len("</svg>")])
    ns = "{http://www.w3.org/2000/svg}"
    assert "<i>lot</i>" in svg.find(f"{ns}title").text
    line = svg.find(f"{ns}polyline").get("points").split()
    panel = re.search(r'<section class="lot" data-lot="[^"]*" data-yield="([^"]*)"', part)
    lot_yield = float(panel.group(1))
    plot_h = picture.HEIGHT - picture.TOP - picture.BOTTOM
    last_y = float(line[-1].split(",")[1])
    assert last_y == pytest.approx(picture.TOP + plot_h * (1 - lot_yield), abs=0.06)


def test_the_page_leaves_the_store_file_as_it_was(served):
    client, path, before = served
    for _ in range(3):
        assert client.get("/part").status_code == 200
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


def test_a_time_span_under_ten_minutes_labels_seconds():
    now = utc_now()
    svg = picture.yield_picture([now, now + timedelta(seconds=30)], [1.0, 0.5], "t")
    assert svg.count(":") >= 4  # HH:MM:SS twice


def _line_view(*args: str, seconds: float = 20) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "acquire", "line-view", *args],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT,
    )  # fmt: skip


def test_another_address_needs_the_explicit_option_and_is_warned_about(tmp_path):
    url = f"sqlite:///{tmp_path / 'line.db'}"
    open_store(url).close()
    refused = _line_view("--store", url, "--host", "0.0.0.0", "--port", "0")
    out, err = refused.communicate(timeout=30)
    assert refused.returncode == 2
    assert "--open-to-network" in err and "no login" in err
    opened = _line_view("--store", url, "--host", "0.0.0.0", "--port", "0", "--open-to-network")
    try:
        first = opened.stdout.readline()
        second = opened.stdout.readline()
    finally:
        opened.terminate()
        opened.communicate(timeout=20)
    assert first.startswith("WARNING:") and "without a login" in first
    assert "http://0.0.0.0:" in second
