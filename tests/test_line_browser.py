"""The line overview in a real browser (Debian's Chromium, headless, driven by Playwright) while
real `acquire station` processes test a lot on simulated meters into one PostgreSQL store.

The page's numbers are checked against `acquire lot LOT --station NAME --json` and `acquire lot
LOT --json`, the program's own lot report (its yields are defined in acquire/report/statistics.py:
serials whose latest attempt passed, over serials). Hostile names must appear as text: markup in
a station, operator or lot name must neither run (``window.pwned`` stays undefined) nor become
elements; the HTML rule that text is escaped is from the WHATWG HTML standard's serialisation of
text ("&", "<", ">" escaped), checked here by what the browser builds from the page.
"""

from __future__ import annotations

import time
from pathlib import Path

from bench_support import example_plan_references
from line_support import acquire_json, chromium, line_view, station_process
from store_support import require_postgres, temporary_schema

from acquire.store import open_store
from drivers.simulator.handle import running

SCRIPT_NAME = "<script>window.pwned=1</script>"
BOLD_NAME = "<b>x</b>"
OPERATOR = '<img src=x onerror="window.pwned=2">'
LOT = "lot <i>7</i> & co"


def _capture(sim, store_url: str, name: str) -> int:
    """References captured on ``sim``'s fixture, stored as ``name``; their id."""
    refs = example_plan_references(sim)
    with open_store(store_url) as store:
        return store.save_reference_set(refs, name=name)


def _cards(page) -> dict[str, dict[str, str]]:
    """Each station card's attributes and shown texts, by the station's name as the browser
    reads it back from the page (attribute values unescaped by the browser)."""
    found = page.eval_on_selector_all(
        "section.station",
        """cards => cards.map(c => ({
            name: c.dataset.station, tested: c.dataset.tested, yield: c.dataset.yield,
            state: c.querySelector('.state').textContent,
            title: c.querySelector('h2.name').textContent,
            shown_yield: c.querySelector('.yield').textContent,
            operator: c.querySelector('.field-operator .value').textContent,
            lot: c.querySelector('.field-lot .value').textContent}))""",
    )
    return {card["name"]: card for card in found}


def _watch(page, names: list[str], want: int, seen: dict[str, list[int]], limit: float) -> None:
    """Poll the page (never reloaded) until every station in ``names`` shows ``want`` tested,
    noting each new count seen."""
    end = time.monotonic() + limit
    while time.monotonic() < end:
        cards = _cards(page)
        for name in names:
            if name in cards:
                count = int(cards[name]["tested"])
                if not seen[name] or seen[name][-1] != count:
                    seen[name].append(count)
        if all(seen[n] and seen[n][-1] >= want for n in names):
            return
        time.sleep(0.2)
    raise AssertionError(f"the page did not reach {want} tested per station: saw {seen}")


def _run_line(store_url: str, sims: list, names: list[str], tmp_path: Path) -> None:
    """Stations ``names`` on simulated meters ``sims`` test two batches of a lot into the store
    at ``store_url`` while the page is watched; then the page is checked against the lot
    report."""
    # each station corrects with the references of its own (simulated) fixture
    references = [str(_capture(sim, store_url, f"refs {k}")) for k, sim in enumerate(sims)]
    with line_view(store_url) as address, chromium(tmp_path / "profile") as context:
        page = context.new_page()
        page.goto(address)
        assert "no station has reported" in page.inner_text("main")
        stations = [
            station_process(
                sim.resource, store_url, LOT, OPERATOR, name, tmp_path, "--reference", ref
            )
            for sim, name, ref in zip(sims, names, references, strict=True)
        ]
        seen: dict[str, list[int]] = {n: [] for n in names}
        for k, proc in enumerate(stations):
            proc.stdin.write("".join(f"EXAMPLE-{1000 + 100 * k + i}\n" for i in range(4)))
            proc.stdin.flush()
        _watch(page, names, 4, seen, limit=30)
        for k, proc in enumerate(stations):
            proc.stdin.write("".join(f"EXAMPLE-{1004 + 100 * k + i}\n" for i in range(5)))
            proc.stdin.close()
        for proc in stations:
            assert proc.wait(timeout=60) == 0, proc.stderr.read()
        _watch(page, names, 9, seen, limit=15)
        page.wait_for_function(
            "() => [...document.querySelectorAll('section.station .state')]"
            ".every(s => s.textContent === 'STOPPED')",
            timeout=10_000,
        )
        cards = _cards(page)
        shot = tmp_path / f"line-view-{len(names)}-stations.png"
        page.screenshot(path=str(shot), full_page=True)
        print(f"screenshot of the line overview: {shot}")
        assert page.evaluate("typeof window.pwned") == "undefined"
        assert page.locator("main script, main b, main img, main i").count() == 0
        lot_yield = page.get_attribute("section.lot", "data-yield")
        lot_name = page.inner_text("section.lot h2 .name")
    for name in names:
        # the page was never reloaded, yet its counts went up while the stations worked
        assert 4 in seen[name] and seen[name][-1] == 9, seen
        assert seen[name] == sorted(seen[name]), seen
        card = cards[name]
        assert (card["title"], card["operator"], card["lot"]) == (name, OPERATOR, LOT)
        report = acquire_json("lot", LOT, "--station", name, "--store", store_url)
        assert int(card["tested"]) == report["units"] == 9
        assert abs(float(card["yield"]) - report["yield"]) < 1e-6
        assert card["shown_yield"] == f"{report['yield']:.1%}"
    whole = acquire_json("lot", LOT, "--store", store_url)
    assert lot_name == LOT
    assert abs(float(lot_yield) - whole["yield"]) < 1e-6
    assert Path(shot).stat().st_size > 10_000


def test_two_stations_into_one_postgresql_store_as_the_page_shows_them(tmp_path):
    url = require_postgres()
    with (
        temporary_schema(url) as schema,
        running(dut="demo-coil", fixture="bench-leads", noise=True, seed=5, measure_time=0) as a,
        running(dut="demo-coil", fixture="bench-leads", noise=True, seed=6, measure_time=0) as b,
    ):
        _run_line(f"{url}?schema={schema}", [a, b], [SCRIPT_NAME, BOLD_NAME], tmp_path)


def test_a_station_writing_an_sqlite_store_while_the_page_reads_it(tmp_path):
    with running(dut="demo-coil", fixture="bench-leads", noise=True, seed=7, measure_time=0) as a:
        _run_line(f"sqlite:///{tmp_path / 'line.db'}", [a], [BOLD_NAME], tmp_path)
