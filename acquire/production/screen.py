"""What the operator of a production station sees: the verdict of the unit just tested in
large letters, why it failed, the lot's counts, and the last units.

:func:`render` is a pure function of a :class:`StationStatus`. :class:`StationScreen` shows it:
on a terminal it clears the screen and draws the whole view after each unit (the operator
scans the next serial at a prompt between units); with serials piped on standard input it
prints one plain line per unit. :meth:`StationScreen.summary` gives the lot's totals. What a
person typed (names, serials, bins, messages) is shown as :class:`rich.text.Text`: a serial
such as ``[red]x`` shows as written, never as a style.
"""

from __future__ import annotations

import math
import sys
from dataclasses import dataclass, field
from datetime import datetime

from rich import box
from rich.console import Console, Group, RenderableType
from rich.table import Table
from rich.text import Text

from acquire.display import lines_taken
from acquire.production.big_letters import fit
from acquire.production.plan import CONDITIONAL_FAIL, CONDITIONAL_PASS, ERROR, FAIL, PASS

#: The outcome shown for a scanned line the station refused (not measured, nothing recorded).
NOT_TESTED = "not tested"
#: The word drawn in large letters for each outcome.
WORDS = {
    NOT_TESTED: "NOT TESTED",
    PASS: "PASS",
    CONDITIONAL_PASS: "COND PASS",
    CONDITIONAL_FAIL: "COND FAIL",
    FAIL: "FAIL",
    ERROR: "ERROR",
}
#: The colour of each outcome: green to ship, red to reject, yellow to look again.
COLOURS = {
    NOT_TESTED: "bold yellow",
    PASS: "bold green",
    CONDITIONAL_PASS: "bold yellow",
    CONDITIONAL_FAIL: "bold red",
    FAIL: "bold red",
    ERROR: "bold yellow",
}
#: Outcome words in the narrow table of the last units.
SHORT = {CONDITIONAL_PASS: "cond pass", CONDITIONAL_FAIL: "cond fail"}
#: At most this many failing lines on the screen (the rest are counted).
FAILING_SHOWN = 6
#: Units in the table of the last ones.
LAST_SHOWN = 8
#: Cells the serial, attempt and bin need beside the large letters (else they go below).
DETAILS_WIDTH = 20
WARNING = "bold yellow"


@dataclass(frozen=True)
class ShownUnit:
    """One judged attempt as the screen shows it.

    ``failing`` holds one worded line per failing check; ``recorded`` is False while the unit
    waits in the outbox for the store."""

    serial: str
    attempt: int
    outcome: str
    bin: str
    failing: tuple[str, ...]
    recorded: bool
    at: datetime


@dataclass(frozen=True)
class StationStatus:
    """The station as it stands after a unit (or a refusal, or a block).

    Counts are per serial, as the store's lot yield counts them: ``tested`` serials,
    ``passed`` whose latest attempt passed, ``first_pass`` whose first attempt passed;
    ``bins`` and ``outcomes`` count units by bin (in plan order) and by outcome word.
    ``waiting`` units are in the outbox, not yet in the store. ``blocked`` says why the station
    is stopped and what to do ("" when it runs); ``override`` the reason given for using
    references despite a block. ``last`` holds the latest units, newest first; ``current`` the
    one just judged; ``message`` one line for the operator (a refused serial, a hint);
    ``energy`` the energy a unit stores at the plan's largest bias ('' without bias checks).
    """

    station: str
    operator: str
    lot: str
    plan: str
    tested: int = 0
    passed: int = 0
    first_pass: int = 0
    bins: dict[str, int] = field(default_factory=dict)
    outcomes: dict[str, int] = field(default_factory=dict)
    waiting: int = 0
    blocked: str = ""
    override: str = ""
    last: tuple[ShownUnit, ...] = ()
    current: ShownUnit | None = None
    message: str = ""
    energy: str = ""

    @property
    def yield_(self) -> float:
        """Final yield: ``passed / tested``; NaN before the first unit."""
        return self.passed / self.tested if self.tested else math.nan

    @property
    def first_pass_yield(self) -> float:
        """``first_pass / tested``; NaN before the first unit."""
        return self.first_pass / self.tested if self.tested else math.nan


def percent(share: float) -> str:
    """``91.7 %``; ``—`` for NaN."""
    return "—" if math.isnan(share) else f"{100.0 * share:.1f} %"


def outcome_style(outcome: str) -> str:
    return COLOURS.get(outcome, "bold")


def clock(at: datetime) -> str:
    """The local time of day of ``at`` (a naive datetime is taken as local)."""
    return at.astimezone().strftime("%H:%M:%S")


def render(status: StationStatus, width: int = 80, height: int | None = None) -> RenderableType:
    """The station screen for a terminal ``width`` cells wide (never wider).

    With ``height``, the table of the last units gives up rows (and goes, if need be) so that
    the screen fits that many lines and the verdict never scrolls off the top."""
    parts: list[RenderableType] = [_header(status)]
    if status.energy:
        parts.append(Text(f"BIAS: {status.energy}", style=WARNING))
    if status.blocked:
        parts.append(
            Text(f"STATION STOPPED: {status.blocked}", style="bold white on red", justify="left")
        )
    parts.append(Text(""))
    parts.append(_verdict(status.current, width))
    if status.current is not None and status.current.failing:
        parts.append(_failing(status.current.failing))
    if status.message:
        parts.append(Text(status.message, style=WARNING))
    parts.append(Text(""))
    parts.append(_counts(status))
    last = status.last[:LAST_SHOWN]
    if height is not None and last:
        room = height - lines_taken(Group(*parts), width)
        while last and lines_taken(_last_table(last), width) > room:
            last = last[:-1]
    if last:
        parts.append(_last_table(last))
    return Group(*parts)


def _header(s: StationStatus) -> Text:
    text = Text(overflow="fold")
    named = {"station": s.station, "operator": s.operator, "lot": s.lot, "plan": s.plan}
    for k, (label, value) in enumerate(named.items()):
        text.append(" · " if k else "", style="dim")
        text.append(f"{label} ", style="dim")
        text.append(value or "—", style="bold")
    if s.override:
        text.append("\nreferences used despite a block; reason given: ", style="bold red")
        text.append(s.override, style="red")
    return text


def _verdict(unit: ShownUnit | None, width: int) -> RenderableType:
    if unit is None:
        return Text("No unit tested yet: scan or type the first serial.", style="bold")
    word = WORDS.get(unit.outcome, unit.outcome.upper())
    style = outcome_style(unit.outcome)
    details = Text(overflow="fold")
    details.append(unit.serial, style="bold reverse")
    if unit.outcome == NOT_TESTED:
        details.append("\nnot measured\nnothing recorded")
    else:
        details.append(f"\nattempt {unit.attempt}")
    if unit.bin:
        details.append("\nbin ")
        details.append(unit.bin, style="bold")
    details.append(f"\n{clock(unit.at)}", style="dim")
    if not unit.recorded:
        details.append("\nwaiting in outbox", style=WARNING)
    # the serial belongs beside the verdict: the largest one-band drawing that leaves it room,
    # else the largest drawing at all with the serial below it
    drawn = fit(word, width - DETAILS_WIDTH - 2, split=False)
    if drawn is not None:
        grid = Table.grid(padding=(0, 2))
        grid.add_column(width=len(drawn[0]), no_wrap=True)
        grid.add_column(overflow="fold")
        grid.add_row(_letters(drawn, style), details)
        return grid
    drawn = fit(word, width)
    letters = Text(word, style=style) if drawn is None else _letters(drawn, style)
    return Group(letters, details)


def _letters(drawn: list[str], style: str) -> Text:
    return Text("\n".join(drawn), style=style, no_wrap=True, overflow="crop")


def _failing(lines: tuple[str, ...]) -> Text:
    text = Text(overflow="fold", style="red")
    for k, line in enumerate(lines[:FAILING_SHOWN]):
        text.append(("\n" if k else "") + "✗ " + line)
    more = len(lines) - FAILING_SHOWN
    if more > 0:
        text.append(f"\n… and {more} more failing check{'s' if more > 1 else ''}")
    return text


def _counted(counts: dict[str, int], styles: dict[str, str] | None = None) -> Text:
    text = Text(overflow="fold")
    for k, (name, n) in enumerate(counts.items()):
        text.append(" · " if k else "", style="dim")
        text.append(name or "—", style=(styles or {}).get(name, ""))
        text.append(f" {n}", style="bold")
    return text


def _counts(status: StationStatus) -> Text:
    """The lot's counts as labelled lines (plain text: drawn after every unit, so kept cheap)."""
    totals = Text(f"{status.tested}", style="bold")
    totals.append(" tested · ", style="")
    totals.append(f"{status.passed}", style="bold")
    totals.append(" passed · yield ")
    totals.append(percent(status.yield_), style="bold")
    totals.append(" · first pass ")
    totals.append(f"{status.first_pass}", style="bold")
    rows = [("lot", totals)]
    if status.bins:
        rows.append(("bins", _counted(status.bins)))
    if status.outcomes:
        rows.append(("outcomes", _counted(status.outcomes, COLOURS)))
    rows.append(("outbox", _outbox(status.waiting)))
    label = max(len(name) for name, _ in rows) + 1
    text = Text(overflow="fold")
    for k, (name, value) in enumerate(rows):
        text.append(("\n" if k else "") + name.ljust(label), style="dim")
        text.append_text(value)
    return text


def _outbox(waiting: int) -> Text:
    if waiting > 0:
        unit = "unit" if waiting == 1 else "units"
        return Text(f"{waiting} {unit} waiting in outbox (store unreachable)", style=WARNING)
    return Text("empty: every unit is in the store", style="dim")


def _last_table(units: tuple[ShownUnit, ...]) -> Text:
    """The last units, newest first, as aligned plain-text columns under a title and a rule."""
    serial_w = max([12] + [len(u.serial) for u in units])
    bin_w = max([6] + [len(u.bin) for u in units])
    text = Text(overflow="fold")
    text.append("last units (newest first)\n", style="dim")
    text.append(f"{'time':8}  {'serial':{serial_w}}  try  {'outcome':9}  bin\n", style="bold")
    text.append("─" * (8 + serial_w + 3 + 9 + bin_w + 10), style="dim")
    for u in units:
        text.append("\n" + clock(u.at).ljust(8) + "  ")
        text.append(u.serial.ljust(serial_w))
        text.append("  " + str(u.attempt).rjust(3) + "  ")
        text.append(SHORT.get(u.outcome, u.outcome).ljust(9), style=outcome_style(u.outcome))
        text.append("  ")
        text.append(u.bin.ljust(bin_w))
        if not u.recorded:
            text.append("  outbox", style=WARNING)
    return text


def plain_line(unit: ShownUnit) -> str:
    """One line for a log or pipe: time, serial, attempt, outcome, bin, failing checks."""
    if unit.outcome == NOT_TESTED:
        return f"{clock(unit.at)}  {unit.serial}  not tested"
    line = f"{clock(unit.at)}  {unit.serial}  attempt {unit.attempt}  {unit.outcome}"
    if unit.bin:
        line += f"  bin {unit.bin}"
    if unit.failing:
        line += ("  error: " if unit.outcome == ERROR else "  failing: ") + "; ".join(unit.failing)
    if not unit.recorded:
        line += "  (waiting in outbox)"
    return line


def summary(status: StationStatus) -> RenderableType:
    """The lot's totals at the end: tested, passed, yields, bins and outcomes with shares."""
    head = Text.assemble(("Lot ", "bold"), (status.lot or "—", "bold"), " finished at station ")
    head.append_text(Text.assemble(status.station or "—", ", plan ", status.plan or "—"))
    table = Table(box=box.SIMPLE_HEAD, show_edge=False, padding=(0, 1), pad_edge=False)
    table.add_column("", overflow="fold")
    table.add_column("units", justify="right", no_wrap=True)
    table.add_column("share", justify="right", no_wrap=True)
    n = status.tested

    def share(count: int) -> str:
        return percent(count / n if n else math.nan)

    table.add_row(Text("tested"), Text(str(n)), Text(""))
    table.add_row(
        Text("passed (final yield)"), Text(str(status.passed)), Text(share(status.passed))
    )
    table.add_row(
        Text("passed first time (first-pass yield)"),
        Text(str(status.first_pass)),
        Text(share(status.first_pass)),
        end_section=True,
    )
    for k, (name, count) in enumerate(status.bins.items()):
        label = Text("bin ")
        label.append(name or "—", style="bold")
        table.add_row(
            label, Text(str(count)), Text(share(count)), end_section=(k + 1 == len(status.bins))
        )
    for name, count in status.outcomes.items():
        table.add_row(Text(name, style=outcome_style(name)), Text(str(count)), Text(share(count)))
    parts: list[RenderableType] = [head, table]
    if status.waiting:
        parts.append(
            Text(
                f"{status.waiting} unit{'s' if status.waiting != 1 else ''} still waiting in the "
                "outbox: not in the store yet; they are written when the store can be reached.",
                style=WARNING,
            )
        )
    return Group(*parts)


class StationScreen:
    """Shows the station to its operator and reads what they type.

    ``interactive`` (a terminal): the screen is cleared and redrawn by :meth:`show`, questions
    are asked with the console's prompt, and :meth:`ring` sounds the terminal's bell. Otherwise
    (serials piped in): one plain line per unit, lines are read from standard input, no bell.
    """

    def __init__(self, console: Console, interactive: bool, bell: bool = True) -> None:
        self.console = console
        self.interactive = interactive
        self.bell = bell
        self._last_unit: ShownUnit | None = None
        self._last_blocked = ""
        self._last_status: StationStatus | None = None

    def show(self, status: StationStatus) -> None:
        """Draw ``status`` (interactive) or print what is new in it as plain lines."""
        if self.interactive:
            self.console.clear()
            # one line stays free for the prompt below
            self.console.print(render(status, self.console.width, self.console.height - 1))
        else:
            if status == self._last_status:
                return
            if status.current is not None and status.current != self._last_unit:
                self._plain(plain_line(status.current))
            last = self._last_status
            if status.energy and (last is None or status.energy != last.energy):
                self._plain(status.energy)
            if status.blocked and status.blocked != self._last_blocked:
                self._plain(f"station stopped: {status.blocked}")
            if status.message:
                self._plain(status.message)
        self._last_unit = status.current
        self._last_blocked = status.blocked
        self._last_status = status

    def _plain(self, line: str) -> None:
        self.console.print(Text(line), soft_wrap=True, highlight=False)

    def ring(self) -> None:
        """Sound the terminal's bell (interactive, with ``bell``); nothing otherwise."""
        if self.bell and self.interactive:
            self.console.file.write("\a")
            self.console.file.flush()

    def ask(self, prompt: str) -> str | None:
        """One line typed or piped, without its line ending; None at the end of input.

        Interactive: the console's prompt (``prompt`` shown as text). Otherwise a line of
        standard input, the prompt not printed."""
        if self.interactive:
            try:
                return self.console.input(Text(prompt))
            except EOFError:
                self.console.line()  # what follows starts below the prompt
                return None
        line = sys.stdin.readline()
        if not line:
            return None
        return line.rstrip("\r\n")

    def summary(self, status: StationStatus) -> RenderableType:
        """The lot summary (see :func:`summary`), for the caller to print."""
        return summary(status)
