"""The demo's report: the production lot's and the sweep's pictures on one page.

:func:`write_report` is a step of the demo (:data:`acquire.demo.STEPS`, after the lot): it writes
``report.html`` and its PNGs into a folder beside the store (``acquire-demo-report`` next to
``acquire-demo.db``; in the current folder for a store that is not a file) and prints the
page's path. It is what ``acquire report --lot DEMO-LOT-1 --sweep ID --out DIR`` writes.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any


def report_folder(store: Any) -> Path:
    """``<store file's stem>-report`` beside an SQLite store, else ``acquire-demo-report``."""
    path = getattr(store, "path", None)
    if path is None:
        return Path("acquire-demo-report").resolve()
    path = Path(path).resolve()
    return path.with_name(f"{path.stem}-report")


def write_report(run: Any) -> None:
    """Write the report of the demo's lot and sweep; print where the page is."""
    from acquire.demo_lot import LOT
    from acquire.report import page
    from acquire.report.statistics import LotFilter

    sections, shown = [], []
    sweep_id = getattr(run.outcome, "sweep_id", None)
    if LOT in {lot.name for lot in run.store.list_lots()}:
        sections.append(page.lot_section(run.store, LotFilter(lot=LOT)))
        shown.append(f"lot {LOT}")
    if sweep_id is not None:
        sections.append(page.sweep_section(run.store, [sweep_id]))
        shown.append(f"sweep {sweep_id} of {run.dut}")
    if not sections:
        return
    title = "Demo report: " + " and ".join(shown)
    where = page.write_report(report_folder(run.store), title, sections)
    run.console.print(
        f"\nreport: {where} (open it in a browser; the PNGs are beside it)",
        soft_wrap=True,
        markup=False,
        emoji=False,
    )
