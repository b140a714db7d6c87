"""Simulator profiles: what is in the fixture (a DUT or a standard), the fixture, and the meter.

Profiles are TOML files (``sim_profiles/<name>.toml`` for the shipped ones) with a ``kind`` key;
every value is a plain number in SI units (henry, ohm, farad, hertz, metre, second, volt). They
are validated on load: an unknown key, a missing value or an impossible one (a negative
inductance) raises :class:`~drivers.errors.ProfileError` naming the file and the key.

Kinds and their keys (``?`` marks an optional key, with its default):

- ``coil``: ``inductance`` H (external, at DC), ``capacitance?`` F = 0 (parallel
  self-capacitance), ``core_loss_tangent?`` = 0 and ``core_relaxation_frequency?`` Hz (none:
  a constant loss tangent), and the winding either as a round wire, ``wire_diameter`` m,
  ``resistivity?`` ohm·m = 1.7241e-8 (annealed copper at 20 °C, IEC 60028), ``proximity_factor?``
  = 1, and ``wire_length`` m or ``dc_resistance`` ohm (one of the two), or as a resistance law,
  ``dc_resistance`` ohm, ``ac_corner_frequency?`` Hz (none: R stays at its DC value),
  ``ac_exponent?`` = 0.5 (see :mod:`drivers.simulator.physics`); a saturating core,
  ``saturation_current?`` A and ``saturation_sharpness?`` (both or neither; none: no
  saturation; :mod:`drivers.simulator.saturation`); a warming winding, ``thermal_resistance?``
  K/W and ``thermal_time_constant?`` s (both or neither), ``reference_temperature?`` °C = 20
  where ``dc_resistance`` holds (:mod:`drivers.simulator.thermal`). With a wire length the DC
  resistance is ``ρ·l/(πa²)``; ``values["dc_resistance"]`` always holds it, and the physics
  uses it (a drawn unit's resistance stands for a longer or shorter wire). A drifting
  standard, ``drift_per_day?`` (a fraction of L per simulated day, not negative; none: no drift;
  :mod:`drivers.simulator.drift`).
- ``resistor`` and ``load`` (a load standard): ``resistance`` ohm, ``series_inductance?`` H = 0,
  ``parallel_capacitance?`` F = 0.
- ``capacitor``: ``capacitance`` F, ``series_resistance?`` ohm = 0, ``series_inductance?`` H = 0.
- ``open``, ``short``: ideal standards, no values.
- ``fixture``: ``series_resistance`` ohm, ``series_inductance`` H, ``shunt_capacitance`` F,
  ``shunt_conductance`` S, and an optional ``[line]`` table with ``impedance`` ohm, ``length`` m,
  ``velocity_factor?`` = 0.66 (a lossless line between the meter and the leads); how operators
  seat a part: ``seating_spread?`` = 0, ``seating_contact?`` ohm = 0, ``seating_repeat?`` = 0
  (:mod:`drivers.simulator.seating`).
- ``meter``: identity and noise of the simulated meter, its bias limit, the DC source's limit
  and the ambient temperature (see :class:`MeterProfile`).

DUT and standard profiles may have a ``[spread]`` table (one-sigma relative spread of any of their
values, for production units drawn by :func:`draw_unit`) and ``[[faults]]`` entries (armed when the
profile is put in the fixture; see :mod:`drivers.simulator.faults`). Every profile may have a
``description``.
"""

from __future__ import annotations

import dataclasses
import math
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

import sim_profiles
from drivers.errors import ProfileError
from drivers.simulator.faults import FAULT_KINDS, FaultSpec, shown
from drivers.simulator.profile_schema import (
    DUT_SCHEMA,
    FIXTURE_SCHEMA,
    LINE_SCHEMA,
    METER_SCHEMA,
    METER_TEXT,
    Key,
    coil_winding,
)
from drivers.simulator.profile_types import (
    NOTHING,
    DutProfile,
    FixtureProfile,
    LineSpec,
    MeterProfile,
)

__all__ = [
    "NOTHING",
    "DutProfile",
    "FixtureProfile",
    "LineSpec",
    "MeterProfile",
    "draw_unit",
    "list_profiles",
    "load_dut",
    "load_fixture",
    "load_meter",
]

DUT_KINDS = ("coil", "resistor", "capacitor")
STANDARD_KINDS = ("open", "short", "load")
GROUPS = {
    "dut": DUT_KINDS,
    "standard": STANDARD_KINDS,
    "fixture": ("fixture",),
    "meter": ("meter",),
}


def _shipped(name: str) -> Path:
    return sim_profiles.path(f"{name}.toml")


def _resolve(name_or_path: str | Path) -> Path:
    text = str(name_or_path)
    path = Path(text)
    if text.endswith(".toml") or path.parent != Path(".") or path.is_file():
        if not path.is_file():
            raise ProfileError(f"{path}: no such profile file")
        return path
    shipped = _shipped(text.lower())
    if not shipped.is_file():
        names = ", ".join(list_profiles())
        raise ProfileError(f"no shipped profile named {text!r} (shipped: {names}; or give a path)")
    return shipped


def _read(path: Path) -> dict[str, Any]:
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh)
    except tomllib.TOMLDecodeError as exc:
        raise ProfileError(f"{path}: not valid TOML: {exc}") from exc
    except UnicodeDecodeError:
        raise ProfileError(f"{path}: not a UTF-8 text file, as TOML files are") from None
    except ValueError:  # Python's limit on the digits of an integer (4300 by default)
        raise ProfileError(
            f"{path}: not valid TOML: an integer of thousands of digits; TOML integers fit "
            "in 64 bits"
        ) from None
    except OSError as exc:
        raise ProfileError(f"{path}: cannot read: {exc.strerror or exc}") from exc


def _number(path: Path, where: str, key: str, value: Any, spec: Key) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ProfileError(
            f"{path}: {where}{key!r} must be a number in {spec.unit or 'SI units'}, "
            f"got {shown(value)}"
        )
    try:
        value = float(value)
    except OverflowError:
        value = math.inf
    if not math.isfinite(value):
        raise ProfileError(f"{path}: {where}{key!r} must be finite (at most about 1.8e308)")
    if spec.positive and value <= 0:
        raise ProfileError(f"{path}: {where}{key!r} must be greater than 0, got {value!r}")
    if value < 0:
        raise ProfileError(f"{path}: {where}{key!r} must not be negative, got {value!r}")
    return value


def _values(
    path: Path,
    table: Mapping[str, Any],
    schema: Mapping[str, Key],
    where: str = "",
    extra: tuple[str, ...] = (),
) -> dict[str, float | None]:
    unknown = sorted(set(table) - set(schema) - set(extra))
    if unknown:
        allowed = ", ".join(sorted(set(schema) | set(extra)))
        raise ProfileError(f"{path}: unknown key {where}{unknown[0]!r} (allowed: {allowed})")
    out: dict[str, float | None] = {}
    for key, spec in schema.items():
        default = spec.default
        if key in table:
            out[key] = _number(path, where, key, table[key], spec)
        elif isinstance(default, str):  # the marker of a required key
            unit = f" ({spec.unit})" if spec.unit else ""
            raise ProfileError(f"{path}: missing key {where}{key!r}{unit}")
        else:
            out[key] = default
    return out


def _numbers(
    path: Path,
    table: Mapping[str, Any],
    schema: Mapping[str, Key],
    where: str = "",
    extra: tuple[str, ...] = (),
) -> dict[str, float]:
    """:func:`_values` for a schema whose every key is required or has a numeric default."""
    out: dict[str, float] = {}
    for key, value in _values(path, table, schema, where, extra).items():
        if value is None:
            raise ProfileError(f"{path}: {where}{key!r} has no default; give it a value")
        out[key] = value
    return out


def _text(path: Path, data: Mapping[str, Any], key: str, default: str | None = None) -> str:
    value = data.get(key, default)
    if value is None:
        raise ProfileError(f"{path}: missing key {key!r} (text)")
    if not isinstance(value, str):
        raise ProfileError(f"{path}: {key!r} must be text, got {shown(value)}")
    return value


def _kind(path: Path, data: Mapping[str, Any], allowed: tuple[str, ...]) -> str:
    kind = _text(path, data, "kind")
    if kind not in allowed:
        raise ProfileError(f"{path}: kind {kind!r} is not one of {', '.join(allowed)} here")
    return kind


def dut_from_dict(data: Mapping[str, Any], name: str, path: Path | None = None) -> DutProfile:
    """Build and validate a DUT or standard profile from parsed TOML ``data``."""
    where_path = path or Path(f"<{name}>")
    kind = _kind(where_path, data, DUT_KINDS + STANDARD_KINDS)
    schema = DUT_SCHEMA[kind]
    values = _values(where_path, data, schema, extra=("kind", "description", "spread", "faults"))
    if kind == "coil":
        coil_winding(where_path, values)
    spread_table = data.get("spread", {})
    if not isinstance(spread_table, dict):
        raise ProfileError(f"{where_path}: 'spread' must be a table of relative spreads")
    spread_schema = {key: Key("") for key in schema if values[key] is not None}
    spread = {}
    for key, value in spread_table.items():
        if key not in spread_schema:
            _unknown(where_path, "spread.", key, spread_schema)
        spread[key] = _number(where_path, "spread.", key, value, spread_schema[key])
    faults = _faults(where_path, data.get("faults", []))
    return DutProfile(
        name=name,
        kind=kind,
        values=values,
        description=_text(where_path, data, "description", ""),
        spread=spread,
        faults=faults,
        path=path,
    )


def _unknown(path: Path, where: str, key: str, schema: Mapping[str, Any]) -> None:
    allowed = ", ".join(schema) or "nothing"
    raise ProfileError(f"{path}: unknown key {where}{key!r} (allowed: {allowed})")


def _faults(path: Path, entries: Any) -> tuple[FaultSpec, ...]:
    if not isinstance(entries, list):
        raise ProfileError(f"{path}: 'faults' must be an array of tables ([[faults]])")
    out = []
    for i, entry in enumerate(entries):
        where = f"faults[{i}]."
        if not isinstance(entry, dict):
            raise ProfileError(f"{path}: {where[:-1]} must be a table")
        allowed = {"kind", "n", "rate", "code", "frequency"}
        for key in entry:
            if key not in allowed:
                _unknown(path, where, key, dict.fromkeys(sorted(allowed)))
        kind = entry.get("kind")
        if kind not in FAULT_KINDS:
            raise ProfileError(
                f"{path}: {where}'kind' must be one of {', '.join(FAULT_KINDS)}, got {shown(kind)}"
            )
        try:
            out.append(FaultSpec.build(kind, **{k: v for k, v in entry.items() if k != "kind"}))
        except ValueError as exc:
            raise ProfileError(f"{path}: {where[:-1]}: {exc}") from exc
    return tuple(out)


def fixture_from_dict(
    data: Mapping[str, Any], name: str, path: Path | None = None
) -> FixtureProfile:
    """Build and validate a fixture profile from parsed TOML ``data``."""
    where_path = path or Path(f"<{name}>")
    _kind(where_path, data, ("fixture",))
    values = _numbers(where_path, data, FIXTURE_SCHEMA, extra=("kind", "description", "line"))
    line = None
    if "line" in data:
        if not isinstance(data["line"], dict):
            raise ProfileError(f"{where_path}: 'line' must be a table")
        line = LineSpec(**_numbers(where_path, data["line"], LINE_SCHEMA, where="line."))
    return FixtureProfile(
        name=name,
        line=line,
        description=_text(where_path, data, "description", ""),
        path=path,
        **values,
    )


def meter_from_dict(data: Mapping[str, Any], name: str, path: Path | None = None) -> MeterProfile:
    """Build and validate a meter profile from parsed TOML ``data``."""
    where_path = path or Path(f"<{name}>")
    _kind(where_path, data, ("meter",))
    extra = ("kind", "description", *METER_TEXT)
    values = _numbers(where_path, data, METER_SCHEMA, extra=extra)
    identity = {key: _text(where_path, data, key) for key in METER_TEXT}
    for key, value in identity.items():
        if any(c in value for c in ',;"\n'):
            raise ProfileError(f'{where_path}: {key!r} must not contain , ; " or a line break')
    return MeterProfile(
        name=name,
        description=_text(where_path, data, "description", ""),
        path=path,
        manufacturer=identity["manufacturer"],
        model=identity["model"],
        serial=identity["serial"],
        firmware=identity["firmware"],
        **values,
    )


def _load(name_or_path: str | Path, build):
    path = _resolve(name_or_path)
    return build(_read(path), path.stem, path)


def load_dut(name_or_path: str | Path | DutProfile) -> DutProfile:
    """A DUT or standard profile by shipped name (``air-core-coil``, ``open``), path, or as is.

    ``"none"`` is the empty fixture.
    """
    if isinstance(name_or_path, DutProfile):
        return name_or_path
    if str(name_or_path).lower() == "none":
        return NOTHING
    return _load(name_or_path, dut_from_dict)


def load_fixture(name_or_path: str | Path | FixtureProfile) -> FixtureProfile:
    """A fixture profile by shipped name (``bench-leads``), path, or as is."""
    if isinstance(name_or_path, FixtureProfile):
        return name_or_path
    return _load(name_or_path, fixture_from_dict)


def load_meter(name_or_path: str | Path | MeterProfile = "simulated-meter") -> MeterProfile:
    """A meter profile by shipped name (``simulated-meter``), path, or as is."""
    if isinstance(name_or_path, MeterProfile):
        return name_or_path
    return _load(name_or_path, meter_from_dict)


def list_profiles(group: str | None = None) -> list[str]:
    """Names of the shipped profiles, sorted; ``group`` is one of dut, standard, fixture, meter."""
    if group is not None and group not in GROUPS:
        raise ProfileError(f"unknown profile group {group!r} (one of {', '.join(GROUPS)})")
    kinds = GROUPS[group] if group else sum(GROUPS.values(), ())
    names = []
    for path in sorted(sim_profiles.DIRECTORY.glob("*.toml")):
        try:
            kind = _read(path).get("kind")
        except ProfileError:
            continue
        if kind in kinds:
            names.append(path.stem)
    return names


def draw_unit(profile: DutProfile, rng: np.random.Generator) -> DutProfile:
    """A production unit: each value with a spread multiplied by ``1 + σ·N(0, 1)``.

    Values are drawn in the order of the profile's keys; a draw that would make a value negative
    (possible only for spreads near or above 100 %) is drawn again, at most 100 times.
    """
    values = dict(profile.values)
    for key in values:
        value = values[key]
        sigma = profile.spread.get(key, 0.0)
        if sigma == 0.0 or value is None:
            continue
        for _ in range(100):
            candidate = value * (1.0 + sigma * rng.standard_normal())
            if candidate > 0:
                values[key] = candidate
                break
        else:
            raise ProfileError(
                f"{profile.name}: spread of {key!r} ({sigma}) keeps drawing negative values"
            )
    return dataclasses.replace(profile, values=values)
