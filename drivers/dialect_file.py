"""Reading a dialect file: find it by name or path, parse its TOML, hand it to the checker.

:func:`load_dialect` is the way in for a meter, :func:`load_source_dialect` for a DC current
source (``kind = "current-source"``); :mod:`drivers.dialect` says what a dialect is and
:mod:`drivers.dialect_check` checks every key.
"""

from __future__ import annotations

import tomllib
from pathlib import Path
from typing import Any

from drivers.dialect import DIRECTORY, Dialect, SourceDialect
from drivers.dialect_bias import kind_of
from drivers.dialect_check import check_dialect, check_source_dialect
from drivers.errors import DialectError


def list_dialects(kind: str = "meter") -> list[str]:
    """Names of the shipped dialects of ``kind`` (``"meter"`` or ``"current-source"``; the
    template excluded)."""
    return sorted(
        p.stem
        for p in DIRECTORY.glob("*.toml")
        if p.stem != "template" and kind_of(_read(p)) == kind
    )


def load_dialect(name_or_path: str | Path) -> Dialect:
    """Load a shipped meter dialect by name, or a dialect file by path, and validate every key."""
    path = _resolve(name_or_path, "meter")
    return check_dialect(path, _read(path))


def load_source_dialect(name_or_path: str | Path) -> SourceDialect:
    """Load a shipped current-source dialect by name, or one by path, and validate every key."""
    path = _resolve(name_or_path, "current-source")
    return check_source_dialect(path, _read(path))


def _read(path: Path) -> dict[str, Any]:
    try:
        return tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise DialectError(f"{path}: cannot read the dialect file: {exc.strerror}") from None
    except tomllib.TOMLDecodeError as exc:
        raise DialectError(f"{path}: not valid TOML: {exc}") from None
    except UnicodeDecodeError:
        raise DialectError(f"{path}: not a UTF-8 text file") from None
    except ValueError:  # Python's limit on the digits of an integer (4300 by default)
        raise DialectError(
            f"{path}: not valid TOML: an integer of thousands of digits; TOML integers fit "
            "in 64 bits"
        ) from None


def _resolve(name_or_path: str | Path, kind: str) -> Path:
    text = str(name_or_path)
    candidate = Path(text)
    if candidate.suffix == ".toml" or "/" in text or "\\" in text:
        if not candidate.is_file():
            raise DialectError(f"{candidate}: no such dialect file")
        return candidate
    shipped = DIRECTORY / f"{text}.toml"
    if not shipped.is_file():
        what = "dialect" if kind == "meter" else "current-source dialect"
        raise DialectError(
            f"no shipped {what} named {text!r}; shipped: {', '.join(list_dialects(kind))} "
            "(or give the path to your own .toml file)"
        )
    return shipped
