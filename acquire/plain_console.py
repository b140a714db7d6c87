"""Printing what rich would print, without importing rich, where that is plain text.

Written to a pipe or a file (not a terminal), rich draws no colours: its output is text laid
out by rules simple enough to follow here (words wrapped at the console's width, a table's
columns as wide as their widest cell, one box). :class:`PlainConsole` prints strings and
objects that offer ``plain_lines(width)`` (such as :class:`acquire.sweep_summary.SweepSummary`)
exactly as ``acquire.display.text_console()`` would print them, and hands anything outside
those rules (a terminal, a character of another width, a line that needs cutting, a table
wider than the console) to rich itself, so the output is the same either way; only the
import of rich is saved. ``tests/test_plain_console.py`` holds both to the same bytes.
"""

from __future__ import annotations

import builtins
import os
import sys
from collections.abc import Sequence
from typing import IO, Any

#: Characters outside Latin-1 that this tool prints and that take one terminal cell.
_NARROW = frozenset("ΩθµμδσΔ±°—–…≈≤≥≠·×√→∞┊│━‘’“”")


def narrow(text: str) -> bool:
    """True if every character of ``text`` is printable and one terminal cell wide (no tab,
    no control character: rich would expand or remove those)."""
    return all((c < "\u0300" or c in _NARROW) and c.isprintable() for c in text)


def plain_console(file: IO[str] | None = None) -> PlainConsole | None:
    """A :class:`PlainConsole` for ``file`` (default: sys.stdout at each print) when rich would
    print to it without colours, in UTF-8 and at a known width; None otherwise (use rich)."""
    stream = file if file is not None else sys.stdout
    if sys.platform == "win32" or hasattr(builtins, "get_ipython"):
        return None  # rich's own rules differ there (legacy consoles, notebooks)
    if _rich_sees_a_terminal(stream):
        return None
    encoding = (getattr(stream, "encoding", "utf-8") or "utf-8").lower()
    if not encoding.startswith("utf"):
        return None
    return PlainConsole(file)


def _rich_sees_a_terminal(stream: Any) -> bool:
    """What ``rich.console.Console.is_terminal`` decides for ``stream`` (rich 13 to 15)."""
    tty_compatible = os.environ.get("TTY_COMPATIBLE", "")
    if tty_compatible in ("0", "1"):
        return tty_compatible == "1"
    force_color = os.environ.get("FORCE_COLOR")
    if force_color is not None:
        return force_color != ""
    isatty = getattr(stream, "isatty", None)
    try:
        return False if isatty is None else bool(isatty())
    except ValueError:
        return False


def console_width() -> int:
    """The width rich gives a console that is not a terminal: COLUMNS, else the size of the
    first of stdin, stdout and stderr that is a terminal, else 80."""
    width = None
    for descriptor in (0, 1, 2):
        try:
            width = os.get_terminal_size(descriptor).columns
        except (AttributeError, ValueError, OSError):
            continue
        break
    columns = os.environ.get("COLUMNS")
    if columns is not None and columns.isdigit():
        width = int(columns)
    return width or 80


class PlainConsole:
    """Prints as ``acquire.display.text_console()`` does on a console that is not a terminal."""

    is_terminal = False

    def __init__(self, file: IO[str] | None = None) -> None:
        self._file = file
        self._rich: Any = None

    @property
    def file(self) -> IO[str]:
        return self._file if self._file is not None else sys.stdout

    @property
    def width(self) -> int:
        return console_width()

    def print(self, item: Any, soft_wrap: bool = False) -> None:
        """Print a string (wrapped at the width unless ``soft_wrap``) or an object that offers
        ``plain_lines(width)``; anything else, or what these rules cannot lay out, by rich."""
        lines: list[str] | None = None
        if isinstance(item, str):
            if narrow(item) and not item.endswith("\n"):
                lines = [item] if soft_wrap else wrap_text(item, self.width)
        elif hasattr(item, "plain_lines") and not soft_wrap:
            lines = item.plain_lines(self.width)
        if lines is None:
            self._by_rich().print(item, soft_wrap=soft_wrap)
            return
        self.file.write("".join(line + "\n" for line in lines))
        self.file.flush()

    def _by_rich(self) -> Any:
        if self._rich is None:
            from acquire.display import text_console

            self._rich = text_console(file=self._file) if self._file else text_console()
        return self._rich


def wrap_text(text: str, width: int) -> list[str] | None:
    """``text``'s lines word-wrapped as rich wraps a Text at ``width`` (a word runs to the
    next non-space; the space after the last word of a line stays, up to the width); None when
    a word is longer than the width (rich would cut it) or a character is not :func:`narrow`."""
    if not narrow(text.replace("\n", "")) or width < 1:
        return None
    out: list[str] = []
    for line in text.split("\n"):
        pieces = _divide(line, width)
        if pieces is None:
            return None
        out += pieces
    return out


def _divide(line: str, width: int) -> list[str] | None:
    starts = [0]
    offset = 0
    for start, word in _words(line):
        length = len(word.rstrip())
        if width - offset >= length:
            offset += len(word)
        elif length > width:
            return None
        elif offset and start:
            starts.append(start)
            offset = len(word)
    pieces = [line[a:b] for a, b in zip(starts, [*starts[1:], len(line)], strict=True)]
    return [_rstrip_to(p, width) for p in pieces]


def _words(line: str) -> list[tuple[int, str]]:
    """Each word with the spaces before (at the start of the line) and after it."""
    out = []
    i, n = 0, len(line)
    while i < n:
        j = i
        while j < n and line[j].isspace():
            j += 1
        if j == n:
            break
        while j < n and not line[j].isspace():
            j += 1
        while j < n and line[j].isspace():
            j += 1
        out.append((i, line[i:j]))
        i = j
    return out


def _rstrip_to(piece: str, width: int) -> str:
    excess = len(piece) - width
    if excess <= 0:
        return piece
    spaces = len(piece) - len(piece.rstrip())
    return piece[: len(piece) - min(spaces, excess)]


def table_lines(
    title: str, headers: Sequence[str], rows: Sequence[Sequence[str]], width: int
) -> list[str] | None:
    """A table as rich draws ``Table(title=title, title_justify="left")`` with every column
    right-justified, in its default box (heavy head); None when it would not fit in ``width``
    (rich would narrow and wrap its columns) or a cell is not one line of :func:`narrow` text."""
    cells = [list(headers), *(list(r) for r in rows)]
    if not all(narrow(c) for row in cells for c in row) or not narrow(title):
        return None
    widths = [max(len(row[k]) for row in cells) for k in range(len(headers))]
    total = sum(widths) + 3 * len(widths) + 1
    if total > width or len(title) > total:
        return None

    def row(values: Sequence[str], bar: str) -> str:
        inner = bar.join(f" {v.rjust(w)} " for v, w in zip(values, widths, strict=True))
        return bar + inner + bar

    def rule(left: str, line: str, cross: str, right: str) -> str:
        return left + cross.join(line * (w + 2) for w in widths) + right

    lines = [title.ljust(total), rule("┏", "━", "┳", "┓"), row(headers, "┃")]
    lines.append(rule("┡", "━", "╇", "┩"))
    lines += [row(r, "│") for r in rows]
    lines.append(rule("└", "─", "┴", "┘"))
    return lines
