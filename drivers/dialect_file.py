"""Reading a dialect file: find it by name or path, parse its TOML, hand it to the checker.

:func:`load_dialect` is the way in; :mod:`drivers.dialect` says what a dialect is and
:mod:`drivers.dialect_check` checks every key.
"""

from __future__ import annotations

import tomllib
from pathlib import Path

from drivers.dialect import DIRECTORY, Dialect
from drivers.dialect_check import check_dialect
from drivers.errors import DialectError


def list_dialects() -> list[str]:
    """Names of the shipped dialects (the template excluded)."""
    return sorted(p.stem for p in DIRECTORY.glob("*.toml") if p.stem != "template")


def load_dialect(name_or_path: str | Path) -> Dialect:
    """Load a shipped dialect by name, or a dialect file by path, and validate every key."""
    path = _resolve(name_or_path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
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
    return check_dialect(path, data)


def _resolve(name_or_path: str | Path) -> Path:
    text = str(name_or_path)
    candidate = Path(text)
    if candidate.suffix == ".toml" or "/" in text or "\\" in text:
        if not candidate.is_file():
            raise DialectError(f"{candidate}: no such dialect file")
        return candidate
    shipped = DIRECTORY / f"{text}.toml"
    if not shipped.is_file():
        raise DialectError(
            f"no shipped dialect named {text!r}; shipped: {', '.join(list_dialects())} "
            "(or give the path to your own .toml file)"
        )
    return shipped
