"""A stored sweep read back and written out: CSV, JSON and Touchstone.

:func:`load_sweep` gathers one sweep from the store (header, meter, fixture, reference set,
points) into a :class:`StoredSweep`; the writers turn it into files that say what they hold:

- CSV (:func:`write_csv`) through :mod:`acquire.csvout`, the same columns and ``# key: value``
  head (dut, meter, fixture, reference set, time, status, ...) as ``acquire sweep --csv``;
- JSON (:func:`write_json`): the same head under ``"about"`` and the points as arrays in SI
  units (non-finite numbers as the strings ``"nan"``, ``"inf"``, ``"-inf"``, since JSON has none);
- Touchstone (:func:`write_touchstone`): corrected Z as S11 (:mod:`acquire.report.touchstone`),
  or the raw readings when asked, and said so in the comments.

The store keeps each point's expanded uncertainty of R and of X (k = 2) but not their
correlation: the quantities' uncertainties in the CSV file are worked out from those two taken
as uncorrelated, and the head says so.
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from acquire.errors import InputError, StoreError

#: The quantities a CSV file shows when the sweep's settings name none.
DEFAULT_NAMES = ("Ls", "Rs", "Q")
JSON_FORMAT = "coil-acquire sweep"
JSON_VERSION = 1
UNCORRELATED = (
    "U(R) and U(X) as stored (expanded, k = 2); the quantities' U from them taken as "
    "uncorrelated (the store keeps no correlation)"
)


@dataclass(frozen=True, eq=False)
class StoredSweep:
    """One stored sweep: its header (a ``SweepInfo``), the names of its meter, fixture and
    reference set ('' when none), and its points (Hz, complex ohm; ``corrected`` None when no
    reference set was used; ``u`` the (n, 2) expanded U of R and X, NaN where unknown)."""

    info: Any
    meter: str
    fixture: str
    reference: str
    frequency: np.ndarray
    raw: np.ndarray
    corrected: np.ndarray | None
    u: np.ndarray
    flags: np.ndarray
    url: str = ""

    @property
    def settings(self) -> dict[str, Any]:
        return dict(self.info.settings or {})

    @property
    def names(self) -> tuple[str, ...]:
        """The quantities the sweep showed (from its settings), known ones only."""
        from acquire.csvout import CSV_UNITS

        shown = self.settings.get("show")
        names = tuple(n for n in shown if n in CSV_UNITS) if isinstance(shown, list) else ()
        return names or DEFAULT_NAMES

    @property
    def cov(self) -> np.ndarray:
        """(n, 2, 2) covariance of R and X from the stored U (k = 2), correlation taken as 0."""
        cov = np.zeros((self.frequency.size, 2, 2))
        cov[:, 0, 0] = (self.u[:, 0] / 2) ** 2
        cov[:, 1, 1] = (self.u[:, 1] / 2) ** 2
        return cov

    @property
    def uncertainty_known(self) -> bool:
        return bool(np.isfinite(self.u).any())


def load_sweep(store: Any, sweep_id: int) -> StoredSweep:
    """Sweep ``sweep_id`` of ``store`` with its names and points."""
    info = store.sweep_info(sweep_id)
    points = store.sweep_points(sweep_id)
    meter = fixture = reference = ""
    if info.meter_id is not None:
        m = store.meter(info.meter_id)
        meter = (
            f"{m.manufacturer} {m.model}, serial {m.serial or '-'}, firmware {m.firmware or '-'}"
        )
    if info.fixture_id is not None:
        fixture = store.fixture(info.fixture_id).name
    if info.reference_set_id is not None:
        reference = reference_description(store, info.reference_set_id)
    f = points["frequency"].to_numpy(dtype=float)
    raw = points["raw_r"].to_numpy(dtype=float) + 1j * points["raw_x"].to_numpy(dtype=float)
    corrected = None
    if info.reference_set_id is not None:
        corrected = points["corrected_r"].to_numpy(dtype=float) + 1j * points[
            "corrected_x"
        ].to_numpy(dtype=float)
    u = points[["u_r", "u_x"]].to_numpy(dtype=float).reshape(-1, 2)
    flags = np.array([str(x) for x in points["flags"]], dtype=object)
    return StoredSweep(info, meter, fixture, reference, f, raw, corrected, u, flags, store.url)


def reference_description(store: Any, ref_id: int) -> str:
    """``#3 on bench-leads (open-short-load, 101 points)``, as the sweep's view said it."""
    try:
        ref = store.reference_set_info(ref_id)
    except StoreError:
        return f"#{ref_id} (no longer in the store)"
    where = f" on {ref.fixture}" if ref.fixture else ""
    return f"#{ref_id}{where} ({ref.method}, {ref.points} points)"


def heading(sweep: StoredSweep) -> dict[str, str]:
    """What an exported file says about the sweep (``# key: value`` lines in a CSV file)."""
    info = sweep.info
    status = info.status + (f" ({info.note})" if info.note else "")
    about = {
        "dut": info.dut or "(not named)",
        "meter": sweep.meter or "(not recorded)",
        "fixture": sweep.fixture or "(not named)",
        "reference set": sweep.reference or "none (raw readings, fixture not removed)",
        "time": info.started_at.isoformat(timespec="seconds"),
        "status": status,
        "points": f"{sweep.frequency.size} of {sweep.settings.get('points', sweep.frequency.size)}",
    }
    override = sweep.settings.get("reference_override")
    if override:
        about["reference override"] = str(override)
    if sweep.uncertainty_known:
        about["uncertainty"] = UNCORRELATED
    about["stored as"] = f"sweep {info.id} in {sweep.url}" if sweep.url else f"sweep {info.id}"
    return about


def write_csv(sweep: StoredSweep, path: str | Path, names: Sequence[str] | None = None) -> Path:
    """The sweep as CSV (:mod:`acquire.csvout`): corrected (else raw) quantities ``names``
    (default: those the sweep showed), with U columns and flags when its uncertainty is known."""
    from acquire.csvout import write_sweep_csv

    known = sweep.uncertainty_known
    return write_sweep_csv(
        path,
        sweep.frequency,
        sweep.raw,
        sweep.corrected,
        tuple(names or sweep.names),
        heading(sweep),
        cov=sweep.cov if known else None,
        flags=sweep.flags if known else None,
    )


def to_json(sweep: StoredSweep) -> dict[str, Any]:
    """The JSON-ready object :func:`write_json` writes."""
    info = sweep.info
    points: dict[str, Any] = {
        "frequency_hz": _numbers(sweep.frequency),
        "raw_r_ohm": _numbers(sweep.raw.real),
        "raw_x_ohm": _numbers(sweep.raw.imag),
    }
    if sweep.corrected is not None:
        points["corrected_r_ohm"] = _numbers(sweep.corrected.real)
        points["corrected_x_ohm"] = _numbers(sweep.corrected.imag)
    points["u_r_ohm"] = _numbers(sweep.u[:, 0])
    points["u_x_ohm"] = _numbers(sweep.u[:, 1])
    points["flags"] = [str(x) for x in sweep.flags]
    return {
        "format": JSON_FORMAT,
        "format_version": JSON_VERSION,
        "about": heading(sweep),
        "sweep": {
            "id": info.id,
            "dut": info.dut,
            "status": info.status,
            "note": info.note,
            "started_at": info.started_at.isoformat(),
            "finished_at": None if info.finished_at is None else info.finished_at.isoformat(),
            "reference_set_id": info.reference_set_id,
            "settings": sweep.settings,
        },
        "units": "frequency in Hz; R, X and their expanded uncertainty U (k = 2) in ohm; "
        "non-finite values as the strings nan, inf, -inf",
        "points": points,
    }


def write_json(sweep: StoredSweep, path: str | Path) -> Path:
    """The sweep as JSON (:func:`to_json`), written to ``path``; returns the path."""
    p = Path(path)
    text = json.dumps(to_json(sweep), ensure_ascii=False, allow_nan=False, indent=1)
    p.write_text(text + "\n", encoding="utf-8")
    return p


def write_touchstone(sweep: StoredSweep, path: str | Path, raw: bool = False) -> Path:
    """The corrected impedance (or the raw readings with ``raw``) as a one-port Touchstone file;
    points that are not finite (invalid or overrange) are left out and counted in a comment."""
    from acquire.report.touchstone import write_s1p

    if raw:
        z, how = sweep.raw, "raw readings: not corrected, the fixture is still in them"
    elif sweep.corrected is None:
        raise InputError(
            f"sweep {sweep.info.id} has no corrected points (no reference set was used); "
            "add --raw to export its raw readings"
        )
    else:
        z, how = sweep.corrected, f"corrected with reference set {sweep.reference}"
    keep = np.isfinite(sweep.frequency) & np.isfinite(z.real) & np.isfinite(z.imag)
    if not keep.any():
        raise InputError(f"sweep {sweep.info.id} has no finite points to export")
    lines = [f"{key}: {value}" for key, value in heading(sweep).items() if key != "uncertainty"]
    lines.append(how)
    if not keep.all():
        lines.append(f"{int((~keep).sum())} points left out: not finite (invalid or overrange)")
    return write_s1p(path, sweep.frequency[keep], z[keep], comment_lines=lines)


def _numbers(values: np.ndarray) -> list[float | str]:
    return [
        v if math.isfinite(v) else ("nan" if math.isnan(v) else repr(v)) for v in values.tolist()
    ]


def to_state(sweep: StoredSweep, references: Any = None) -> Any:
    """A :class:`acquire.sweep_state.SweepState` holding the stored sweep as it ended, for
    :func:`acquire.sweep_summary.summary` (the same table the sweep printed at its end).

    Flags come from the store; which quantity a flagged point hides is judged again from the
    stored U of R and X taken as uncorrelated. With ``references`` (the sweep's reference set)
    the readings are reviewed again (an empty fixture, where the fixture limits accuracy); the
    age of the set at the time of the sweep is not repeated.
    """
    from acquire.plan import FrequencyPlan
    from acquire.sweep_setup import review_readings
    from acquire.sweep_state import SweepState
    from acquire.sweep_uncertainty import PointValues
    from acquire.uncertainty import beyond_accuracy

    info, settings, n = sweep.info, sweep.settings, sweep.frequency.size
    planned = settings.get("points")
    planned = planned if type(planned) is int and planned >= max(n, 1) else max(n, 1)
    # Only the plan's length is shown: the measured frequencies, then placeholders for the rest.
    grid = np.concatenate([sweep.frequency, np.nanmax(sweep.frequency, initial=0.0) + 1.0 +
                           np.arange(planned - n, dtype=float)])  # fmt: skip
    note = settings.get("uncertainty")
    state = SweepState(
        FrequencyPlan(grid if np.all(np.diff(grid) > 0) else np.arange(1.0, planned + 1)),
        dut=info.dut,
        meter=sweep.meter,
        reference=sweep.reference,
        reference_override=str(settings.get("reference_override") or ""),
        destination=f"sweep {info.id} in {sweep.url}" if sweep.url else "",
        quantities=sweep.names,
        corrected_too=sweep.corrected is not None,
        uncertainty_note=str(note.get("note", "")) if isinstance(note, dict) else "",
    )
    state.start()
    if n:
        values = None
        if sweep.uncertainty_known:
            z = sweep.raw if sweep.corrected is None else sweep.corrected
            cov = sweep.cov
            with np.errstate(all="ignore"):
                judge = np.where(np.isfinite(cov), cov, 0.0)
                beyond = beyond_accuracy(sweep.frequency, z, judge, sweep.names)
            values = PointValues(sweep.corrected, cov, sweep.flags, beyond)
        state.add(sweep.frequency, sweep.raw, sweep.corrected, values)
    state.finish(info.status, info.note)
    with np.errstate(all="ignore"):
        review_readings(state, references)
    return state
