"""Large letters for the station screen: our own font, five rows high, drawn with █.

A verdict has to be read from a metre away, past the fixture, by someone holding the next
unit. Each glyph is a small bitmap written below with ``#`` for ink; :func:`banner` joins the
glyphs of a word into five strings of █ and spaces, and :func:`fit` picks the largest drawing
of a word that fits a width: every cell doubled across (the letters come out about square on
a terminal whose cells are twice as tall as wide), else single cells, else one word per band.
"""

from __future__ import annotations

#: Rows of every glyph.
HEIGHT = 5
#: The ink of a drawing.
INK = "█"

_FONT = {
    "A": (" ### ", "#   #", "#####", "#   #", "#   #"),
    "B": ("#### ", "#   #", "#### ", "#   #", "#### "),
    "C": (" ####", "#    ", "#    ", "#    ", " ####"),
    "D": ("#### ", "#   #", "#   #", "#   #", "#### "),
    "E": ("#####", "#    ", "#### ", "#    ", "#####"),
    "F": ("#####", "#    ", "#### ", "#    ", "#    "),
    "G": (" ####", "#    ", "#  ##", "#   #", " ####"),
    "H": ("#   #", "#   #", "#####", "#   #", "#   #"),
    "I": ("###", " # ", " # ", " # ", "###"),
    "J": ("  ###", "    #", "    #", "#   #", " ### "),
    "K": ("#   #", "#  # ", "###  ", "#  # ", "#   #"),
    "L": ("#    ", "#    ", "#    ", "#    ", "#####"),
    "M": ("#   #", "## ##", "# # #", "#   #", "#   #"),
    "N": ("#   #", "##  #", "# # #", "#  ##", "#   #"),
    "O": (" ### ", "#   #", "#   #", "#   #", " ### "),
    "P": ("#### ", "#   #", "#### ", "#    ", "#    "),
    "Q": (" ### ", "#   #", "# # #", "#  # ", " ## #"),
    "R": ("#### ", "#   #", "#### ", "#  # ", "#   #"),
    "S": (" ####", "#    ", " ### ", "    #", "#### "),
    "T": ("#####", "  #  ", "  #  ", "  #  ", "  #  "),
    "U": ("#   #", "#   #", "#   #", "#   #", " ### "),
    "V": ("#   #", "#   #", "#   #", " # # ", "  #  "),
    "W": ("#   #", "#   #", "# # #", "## ##", "#   #"),
    "X": ("#   #", " # # ", "  #  ", " # # ", "#   #"),
    "Y": ("#   #", " # # ", "  #  ", "  #  ", "  #  "),
    "Z": ("#####", "   # ", "  #  ", " #   ", "#####"),
    "0": (" ### ", "#  ##", "# # #", "##  #", " ### "),
    "1": (" # ", "## ", " # ", " # ", "###"),
    "2": (" ### ", "#   #", "  ## ", " #   ", "#####"),
    "3": ("#### ", "    #", " ### ", "    #", "#### "),
    "4": ("#   #", "#   #", "#####", "    #", "    #"),
    "5": ("#####", "#    ", "#### ", "    #", "#### "),
    "6": (" ### ", "#    ", "#### ", "#   #", " ### "),
    "7": ("#####", "    #", "   # ", "  #  ", "  #  "),
    "8": (" ### ", "#   #", " ### ", "#   #", " ### "),
    "9": (" ### ", "#   #", " ####", "    #", " ### "),
    "%": ("#   #", "   # ", "  #  ", " #   ", "#   #"),
    "-": ("    ", "    ", "####", "    ", "    "),
    ".": (" ", " ", " ", " ", "#"),
    " ": ("  ", "  ", "  ", "  ", "  "),
}  # fmt: skip

#: Every character the font draws, with its rows (█ for ink).
GLYPHS: dict[str, tuple[str, ...]] = {
    c: tuple(row.replace("#", INK) for row in rows) for c, rows in _FONT.items()
}


def can_draw(text: str) -> bool:
    """Whether every character of ``text`` (upper-cased) has a glyph."""
    return all(c in GLYPHS for c in text.upper())


def banner(text: str, scale: int = 1, gap: int = 1) -> list[str]:
    """``text`` (upper-cased) in large letters: :data:`HEIGHT` strings of equal length.

    ``scale`` repeats each cell across (1 or 2); ``gap`` blank cells separate the glyphs (before
    scaling). A character without a glyph raises ValueError: only the station's own words are
    drawn, never what a user typed.
    """
    word = text.upper()
    missing = sorted({c for c in word if c not in GLYPHS})
    if missing:
        raise ValueError(f"the large font has no glyph for {''.join(missing)!r}")
    rows = []
    for r in range(HEIGHT):
        row = (" " * gap).join(GLYPHS[c][r] for c in word)
        rows.append("".join(c * scale for c in row))
    return rows


def banner_width(text: str, scale: int = 1, gap: int = 1) -> int:
    """Cells across of :func:`banner` of the same arguments."""
    word = text.upper()
    if not word:
        return 0
    return scale * (sum(len(GLYPHS[c][0]) for c in word) + gap * (len(word) - 1))


def fit(text: str, width: int, split: bool = True) -> list[str] | None:
    """The largest drawing of ``text`` no wider than ``width``, as lines; None when none fits.

    Tried in turn: doubled cells on one band, single cells on one band, then (with ``split``)
    one band per word (doubled, then single), bands separated by a blank line.
    """
    words = text.split()
    for scale in (2, 1):
        if banner_width(text, scale) <= width:
            return banner(text, scale)
    if split and len(words) > 1:
        for scale in (2, 1):
            if all(banner_width(w, scale) <= width for w in words):
                lines: list[str] = []
                for k, w in enumerate(words):
                    lines += ([""] if k else []) + banner(w, scale)
                return lines
    return None
