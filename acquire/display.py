"""Numbers and durations for people: SI prefixes, plain digits for Q and D, short durations.

Used by the live view, the plain progress lines, the end summary and the commands' tables;
values come in SI units and leave as text, so nothing here changes a number.
"""

from __future__ import annotations

import math

from acquire.units import format_si, si_prefix

#: What is shown in place of a value past the tool's accuracy (never a number).
BEYOND = "beyond accuracy"

#: The SI unit of each quantity of :func:`acquire.impedance.quantities`.
UNITS = {
    "Ls": "H", "Lp": "H", "Rs": "Ω", "Rp": "Ω", "Cs": "F", "Cp": "F", "Q": "", "D": "",
    "Z": "Ω", "theta": "°", "X": "Ω", "G": "S", "B": "S",
}  # fmt: skip


def format_value(name: str, value: float) -> str:
    """One quantity for people: SI prefixes for dimensioned values, plain digits for Q, D, θ."""
    if name == "theta":
        return "—" if not math.isfinite(value) else f"{value:.2f}°"
    if name in ("Q", "D"):
        if math.isnan(value):
            return "—"
        if math.isinf(value):
            return "∞"
        return f"{value:.0f}" if abs(value) >= 1e4 else f"{value:.4g}"
    return format_si(value, UNITS.get(name, ""))


def format_duration(seconds: float | None) -> str:
    """``0.4 s``, ``12 s``, ``3 min 20 s``, ``2.0 h``, ``3.5 days``; ``—`` for None."""
    if seconds is None:
        return "—"
    s = max(float(seconds), 0.0)
    if s < 10:
        return f"{s:.1f} s"
    if s < 60:
        return f"{s:.0f} s"
    if s < 3600:
        return f"{int(s // 60)} min {int(s % 60)} s"
    if s < 86400 * 2:
        return f"{s / 3600:.1f} h"
    return f"{s / 86400:.1f} days"


def format_measured(name: str, value: float, u: float | None = None, beyond: bool = False) -> str:
    """A value for people with its expanded uncertainty: ``344.12 µH ± 0.31 µH``, ``85.3 ± 1.2``.

    ``beyond`` (a value past the tool's accuracy) gives :data:`BEYOND`, never a number. The
    uncertainty is rounded to two significant digits and the value to the same decimal place
    (JCGM 100:2008 7.2.6); both share the value's SI prefix. Without a finite ``u`` the value is
    formatted as :func:`format_value` does.
    """
    if beyond:
        return BEYOND
    if u is None or not (math.isfinite(u) and math.isfinite(value)) or u < 0:
        return format_value(name, value)
    unit = UNITS.get(name, "")
    if name in ("Q", "D", "theta") or value == 0:
        scale, prefix = 1.0, ""
    else:
        scale, prefix = si_prefix(value)
    scaled_u = u / scale
    if scaled_u == 0:
        return f"{format_value(name, value)} ± 0"
    decimals = min(max(1 - math.floor(math.log10(scaled_u)), 0), 12)
    if name == "theta":
        return f"{value:.{decimals}f}° ± {scaled_u:.{decimals}f}°"
    suffix = f" {prefix}{unit}".rstrip()
    return f"{value / scale:.{decimals}f}{suffix} ± {scaled_u:.{decimals}f}{suffix}"


def text_console(**options):
    """A rich console that prints strings as given: no markup, no emoji codes.

    What the commands print holds names the user typed (fixture, DUT, reference set, file
    paths); ``[red]`` or ``:x:`` in them is text, not a style or an emoji. Renderables (tables,
    :class:`rich.text.Text`) draw as usual."""
    from rich.console import Console

    return Console(markup=False, emoji=False, **options)


def lines_taken(part, width: int) -> int:
    """How many lines the rich renderable ``part`` takes on a terminal ``width`` cells wide."""
    import io

    from rich.console import Console

    ruler = Console(file=io.StringIO(), width=width, color_system=None)
    return len(ruler.render_lines(part, ruler.options, pad=False))


#: How the symbols this tool prints are spelled on a terminal that cannot show them (an ASCII
#: or Latin-1 one): a value stays readable, ``344.1 uH +/- 0.3 uH``.
PLAIN_SPELLING = {
    "µ": "u", "μ": "u", "Ω": "ohm", "±": "+/-", "°": " deg", "θ": "theta", "δ": "delta",
    "σ": "sigma", "≈": "~", "∞": "inf", "—": "-", "–": "-", "…": "...", "≤": "<=", "≥": ">=",
    "≠": "!=", "·": "-", "×": "x", "²": "^2", "√": "sqrt", "→": "->", "┊": ":", "│": "|",
    "━": "-", "‘": "'", "’": "'", "“": '"', "”": '"',
}  # fmt: skip

#: The name of the codec error handler :func:`keep_output_readable` installs.
OUTPUT_ERRORS = "acquire-plain"


def spell_plainly(exc: UnicodeError) -> tuple[str | bytes, int]:
    """Codec error handler for output: a character the stream's encoding cannot hold is spelled
    as :data:`PLAIN_SPELLING` says, else as a backslash escape; a byte of the command line that
    was not text (a lone surrogate U+DC80..U+DCFF, PEP 383) is written back as that byte."""
    if not isinstance(exc, UnicodeEncodeError):
        raise exc
    char = exc.object[exc.start]
    if "\udc80" <= char <= "\udcff":
        return bytes([ord(char) - 0xDC00]), exc.start + 1
    plain = PLAIN_SPELLING.get(char)
    if plain is None:
        plain = char.encode("ascii", "backslashreplace").decode("ascii")
    return plain, exc.start + 1


def keep_output_readable(*streams) -> None:
    """Make writing to ``streams`` (text streams such as ``sys.stdout``) never fail on a
    character their encoding cannot hold: :func:`spell_plainly` writes it instead. A UTF-8
    stream writes exactly as before, except the bytes of a file name that is not UTF-8."""
    import codecs

    try:
        codecs.lookup_error(OUTPUT_ERRORS)
    except LookupError:
        codecs.register_error(OUTPUT_ERRORS, spell_plainly)
    for stream in streams:
        reconfigure = getattr(stream, "reconfigure", None)
        if reconfigure is None:
            continue
        try:
            reconfigure(errors=OUTPUT_ERRORS)
        except (OSError, ValueError):  # a closed or detached stream: nothing to do
            continue
