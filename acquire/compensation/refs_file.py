"""The reference-set file: self-describing JSON that round-trips exactly.

Layout (format version 2), one JSON object::

    {
      "format": "coil-acquire reference set",
      "format_version": 2,
      "about": "<one sentence saying what the fields mean>",
      "captured_at": "2024-05-02T09:30:00+00:00" | null,
      "fixture": "...", "meter": "...", "temperature_c": 23.0 | null, "notes": "...",
      "frequency_hz": [100.0, 125.89254117941675, ...],
      "impedance_ohm": {
        "open":  {"real": [...], "imag": [...]},
        "short": {...}, "load": {...}, "load_true": {...}      (only those present)
      },
      "repeats": 3,
      "grid_spacing": "log" | "linear" | "list" | "",
      "uncertainty_ohm": {"open": [...], ...}                   (only those present)
      "sha256": "<hex digest>"                                  (in files only)
    }

Version 2 added ``repeats``, ``grid_spacing`` and ``uncertainty_ohm`` (the Type A standard
uncertainty of each mean standard reading, ohm per component, one per frequency). A version 1
file (without them) is still read: its standards were read once (``repeats`` 1, no
uncertainties) and its grid spacing is not recorded (``""``). Files are always written as
version 2.

Numbers are JSON numbers written with Python's shortest round-tripping ``repr``, so every float
reads back bit for bit; values that are not finite (a meter's overrange or invalid reading) are
the strings ``"inf"``, ``"-inf"`` and ``"nan"``, which keeps the file strict JSON. A number
beyond the range of a float (about ±1.8e308), nesting deeper than Python's parser goes, or a file
larger than :data:`MAX_FILE_BYTES` (64 MiB, some 200 000 points with every standard and its
uncertainty) is refused as a damaged file, as RFC 8259, section 9 allows a reader to. ``sha256`` is
the digest of the canonical form of everything else (keys sorted, no spaces, UTF-8), so a
damaged or hand-edited file is refused rather than read with a changed number.

:func:`to_dict` and :func:`fields_from_dict` give the same object without the digest, for
anything that stores a reference set somewhere other than a file.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import sys
import tempfile
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import numpy as np

from acquire.compensation.protocol import GRID_SPACINGS, STANDARDS, References
from acquire.errors import CompensationError

FORMAT = "coil-acquire reference set"
FORMAT_VERSION = 2
ABOUT = (
    "Readings of a test fixture taken open, shorted and with a load standard, for removing the "
    "fixture from later readings. frequency_hz lists the grid in hertz; impedance_ohm holds, per "
    "standard, the real and imaginary parts in ohm, one per frequency; load_true is the load "
    "standard's true impedance; non-finite values are the strings inf, -inf and nan; "
    "temperature_c is in degrees Celsius; uncertainty_ohm holds, per standard, the standard "
    "uncertainty of its mean reading in ohm (for the real and the imaginary part alike), from "
    "repeats readings; grid_spacing says how the grid was made (log, linear, list, or empty if "
    "not recorded); sha256 is the digest of the canonical JSON of all other fields."
)
_NAMES = ("open", "short", "load", "load_true")
_KEYS = {"format", "format_version", "about", "captured_at", "fixture", "meter",
         "temperature_c", "notes", "frequency_hz", "impedance_ohm"}  # fmt: skip
_KEYS_V2 = _KEYS | {"repeats", "grid_spacing", "uncertainty_ohm"}
_SPECIAL = {"inf": math.inf, "-inf": -math.inf, "nan": math.nan}
#: The largest reference-set file :func:`read` reads, in bytes.
MAX_FILE_BYTES = 64 * 2**20
_FLOAT_MAX = sys.float_info.max


def to_dict(refs: References) -> dict[str, Any]:
    """The JSON-ready object for ``refs`` (the file's content without ``sha256``)."""
    standards = {
        name: {"real": _encode(z.real), "imag": _encode(z.imag)}
        for name in _NAMES
        if (z := getattr(refs, name)) is not None
    }
    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "about": ABOUT,
        "captured_at": None if refs.captured_at is None else refs.captured_at.isoformat(),
        "fixture": refs.fixture,
        "meter": refs.meter,
        "temperature_c": refs.temperature,
        "notes": refs.notes,
        "frequency_hz": _encode(refs.frequency),
        "impedance_ohm": standards,
        "repeats": refs.repeats,
        "grid_spacing": refs.grid_spacing,
        "uncertainty_ohm": {
            name: _encode(u) for name in STANDARDS if (u := getattr(refs, f"{name}_u")) is not None
        },
    }


def fields_from_dict(d: Any) -> dict[str, Any]:
    """Keyword arguments for :class:`ReferenceSet` from an object made by :func:`to_dict`.

    Raises :class:`~acquire.errors.CompensationError` for an object that is not a reference set,
    of an unknown format version, or malformed in any field.
    """
    if not isinstance(d, dict) or d.get("format") != FORMAT:
        raise CompensationError(f'this is not a reference set: it lacks "format": "{FORMAT}"')
    version = d.get("format_version")
    if type(version) is not int:
        raise _damaged("format_version is not a whole number")
    if version > FORMAT_VERSION:
        raise CompensationError(
            f"this reference set has format version {version}, newer than this tool reads "
            f"(up to {FORMAT_VERSION}); update coil-acquire to read it"
        )
    if version < 1:
        raise CompensationError(f"unknown reference-set format version {version}")
    d = {k: v for k, v in d.items() if k != "sha256"}
    keys = _KEYS if version == 1 else _KEYS_V2
    missing, extra = keys - d.keys(), d.keys() - keys
    if missing or extra:
        raise _damaged(f"fields missing {sorted(missing)} / unexpected {sorted(extra)}")
    for key in ("about", "fixture", "meter", "notes"):
        if not isinstance(d[key], str):
            raise _damaged(f"{key} is not text")
    temperature = d["temperature_c"]
    if temperature is not None and type(temperature) not in (int, float):
        raise _damaged("temperature_c is not a number")
    if temperature is not None and not _finite(temperature):
        raise _damaged("temperature_c is beyond the range of a number")
    frequency = _decode(d["frequency_hz"], "frequency_hz")
    standards = d["impedance_ohm"]
    if not isinstance(standards, dict) or not set(standards) <= set(_NAMES):
        raise _damaged(f"impedance_ohm must map some of {', '.join(_NAMES)} to values")
    fields: dict[str, Any] = {
        "frequency": frequency,
        "captured_at": _time(d["captured_at"]),
        "fixture": d["fixture"],
        "meter": d["meter"],
        "temperature": temperature,
        "notes": d["notes"],
    }
    for name, parts in standards.items():
        if not isinstance(parts, dict) or set(parts) != {"real", "imag"}:
            raise _damaged(f"impedance_ohm.{name} must hold exactly real and imag")
        real = _decode(parts["real"], f"{name}.real")
        imag = _decode(parts["imag"], f"{name}.imag")
        if real.shape != frequency.shape or imag.shape != frequency.shape:
            raise _damaged(f"{name} does not have one value per frequency")
        z = np.empty(frequency.shape, dtype=complex)
        z.real, z.imag = real, imag
        fields[name] = z
    if version >= 2:
        fields.update(_version_2_fields(d, frequency, standards))
    return fields


def _version_2_fields(d: dict[str, Any], frequency: np.ndarray, standards: dict) -> dict:
    repeats, spacing, spreads = d["repeats"], d["grid_spacing"], d["uncertainty_ohm"]
    if type(repeats) is not int or repeats < 1:
        raise _damaged("repeats is not a whole number of 1 or more")
    if spacing not in GRID_SPACINGS:
        raise _damaged(f"grid_spacing is not one of {', '.join(map(repr, GRID_SPACINGS))}")
    if not isinstance(spreads, dict) or not set(spreads) <= set(standards) - {"load_true"}:
        raise _damaged("uncertainty_ohm must map standards present in impedance_ohm to values")
    fields: dict[str, Any] = {"repeats": repeats, "grid_spacing": spacing}
    for name, values in spreads.items():
        u = _decode(values, f"uncertainty_ohm.{name}")
        if u.shape != frequency.shape:
            raise _damaged(f"uncertainty_ohm.{name} does not have one value per frequency")
        fields[f"{name}_u"] = u
    return fields


def write(path: Path, payload: dict[str, Any]) -> None:
    """Write ``payload`` and its digest to ``path`` atomically (never a half-written file)."""
    try:
        text = _text(payload)
    except UnicodeEncodeError:
        raise CompensationError(
            "the fixture, meter or notes hold characters that are not Unicode text (an argument "
            "in another encoding?); give them again as UTF-8 text"
        ) from None
    temp = None
    try:
        handle, temp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
        with os.fdopen(handle, "w", encoding="utf-8") as out:
            out.write(text)
        os.replace(temp, path)
    except OSError as exc:
        if temp is not None and os.path.exists(temp):
            os.unlink(temp)
        raise CompensationError(
            f"cannot write the reference set to {path}: {exc.strerror}"
        ) from exc


def _text(payload: dict[str, Any]) -> str:
    """The file's text: one field a line, standards one a line, the digest last."""
    lines = []
    for key, value in payload.items():
        if isinstance(value, dict):
            inner = ",\n".join(f"    {json.dumps(k)}: {_dumps(v)}" for k, v in value.items())
            lines.append(
                f"  {json.dumps(key)}: {{\n{inner}\n  }}" if inner else f"  {json.dumps(key)}: {{}}"
            )
        else:
            lines.append(f"  {json.dumps(key)}: {_dumps(value)}")
    lines.append(f'  "sha256": "{_digest(payload)}"')
    return "{\n" + ",\n".join(lines) + "\n}\n"


def read(path: Path) -> dict[str, Any]:
    """The checked object in the file at ``path``, ready for :func:`fields_from_dict`.

    Reads at most :data:`MAX_FILE_BYTES` (64 MiB) and refuses a larger file, saying so.
    """
    try:
        with path.open("rb") as handle:
            raw = handle.read(MAX_FILE_BYTES + 1)
        text = raw.decode("utf-8")
    except FileNotFoundError as exc:
        raise CompensationError(f"no reference-set file at {path}") from exc
    except UnicodeDecodeError as exc:
        raise CompensationError(f"{path} is not a reference-set file (not UTF-8 text)") from exc
    except OSError as exc:
        raise CompensationError(f"cannot read {path}: {exc.strerror}") from exc
    if len(raw) > MAX_FILE_BYTES:
        raise CompensationError(
            f"{path} is larger than the {MAX_FILE_BYTES // 2**20} MiB a reference-set file may "
            "be; it is not one, or capture the references on a shorter grid"
        )
    try:
        d = json.loads(text, parse_constant=_refuse_constant, parse_float=_float, parse_int=_int)
    except (json.JSONDecodeError, ValueError) as exc:
        raise CompensationError(
            f"{path} is damaged or not a reference-set file ({exc}); restore a copy or capture "
            "the references again"
        ) from None
    except RecursionError:
        raise CompensationError(
            f"{path} is damaged or not a reference-set file (nested too deeply)"
        ) from None
    if not isinstance(d, dict) or d.get("format") != FORMAT:
        raise CompensationError(f"{path} is not a reference-set file")
    fields_from_dict(d)
    try:
        expected = _digest({k: v for k, v in d.items() if k != "sha256"})
    except UnicodeEncodeError:
        raise _damaged("a text holds an unpaired surrogate, which is not Unicode") from None
    if d.get("sha256") != expected:
        raise CompensationError(
            f"{path} does not match its checksum: it was damaged or edited by hand; restore a "
            "copy or capture the references again"
        )
    return d


def _digest(payload: dict[str, Any]) -> str:
    canonical = json.dumps(
        payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )
    return hashlib.sha256(canonical.encode("utf-8")).hexdigest()


def _dumps(value: Any) -> str:
    return json.dumps(value, ensure_ascii=False, allow_nan=False)


def _encode(a: np.ndarray) -> list[float | str]:
    values = a.tolist()
    if np.all(np.isfinite(a)):
        return values
    return [v if math.isfinite(v) else ("nan" if math.isnan(v) else repr(v)) for v in values]


def _decode(values: Any, what: str) -> np.ndarray:
    if not isinstance(values, list):
        raise _damaged(f"{what} is not a list of numbers")
    kinds = set(map(type, values))
    if not kinds <= {float, int, str}:
        raise _damaged(f"{what} holds something other than numbers")
    if str in kinds:
        try:
            values = [_SPECIAL[v] if type(v) is str else v for v in values]
        except KeyError as exc:
            raise _damaged(
                f"{what} holds the text {_short(exc.args[0])} instead of a number"
            ) from None
    if int in kinds and not all(_finite(v) for v in values if type(v) is int):
        raise _damaged(f"{what} holds a number beyond the range of a float (about ±1.8e308)")
    return np.array(values, dtype=float).reshape(-1)


def _finite(value: int | float) -> bool:
    """True for a number a float holds as a finite value."""
    return abs(value) <= _FLOAT_MAX if type(value) is int else math.isfinite(value)


def _short(text: str) -> str:
    return repr(text) if len(text) <= 40 else repr(text[:37] + "...")


def _float(text: str) -> float:
    """A JSON number with a fraction or exponent, refused beyond the range of a float."""
    value = float(text)
    if not math.isfinite(value):
        raise ValueError(_too_large(text))
    return value


def _int(text: str) -> int:
    """A JSON integer, refused beyond the range of a float (before Python's digit limit)."""
    if len(text) > 310 or abs(value := int(text)) > _FLOAT_MAX:
        raise ValueError(_too_large(text))
    return value


def _too_large(text: str) -> str:
    shown = text if len(text) <= 24 else text[:21] + "..."
    return f"the number {shown} is beyond the range of a float (about ±1.8e308)"


def _time(text: Any) -> datetime | None:
    if text is None:
        return None
    try:
        when = datetime.fromisoformat(text)
    except (TypeError, ValueError) as exc:
        raise _damaged("captured_at is not an ISO 8601 time") from exc
    if when.tzinfo is None:
        raise _damaged("captured_at has no time zone")
    try:
        return when.astimezone(UTC)
    except OverflowError:
        raise _damaged("captured_at lies outside the years 1 to 9999 in UTC") from None


def _refuse_constant(name: str) -> float:
    raise ValueError(f"bare {name} is not allowed; non-finite values are written as strings")


def _damaged(what: str) -> CompensationError:
    return CompensationError(
        f"the reference set is damaged: {what}; restore a copy or capture the references again"
    )
