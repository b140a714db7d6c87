"""What a setting sends: the dialect's command for a level, speed, averaging or transfer format.

Each value is checked against the dialect (its ``min``/``max`` and ``choices``) before anything
is sent, so a value the meter cannot take raises :class:`~drivers.errors.OutOfRange` naming the
allowed range; numbers are written as SCPI decimal numeric data that round-trips exactly.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from drivers.dialect import Dialect, Operation
from drivers.errors import OutOfRange

#: The dialect operation of each setting.
SETTINGS = {"level": "set_level", "speed": "set_speed", "averaging": "set_averaging"}

Step = tuple[Operation, dict[str, Any]]


def number_text(value: float) -> str:
    """A number as SCPI decimal numeric data that round-trips exactly."""
    if isinstance(value, int | np.integer):
        return str(int(value))
    return repr(float(value))


def setting_step(dialect: Dialect, name: str, value: Any) -> Step:
    """The step that applies setting ``name`` (level in V rms, speed word, averaging count)."""
    op = dialect.operation(SETTINGS[name], f"set the {name}")
    if name == "speed":
        choices = {k.lower(): v for k, v in op.choices.items()}
        word = choices.get(str(value).lower())
        if word is None:
            raise OutOfRange(f"speed {value!r} is not one of {', '.join(op.choices)}")
        return op, {"speed": word}
    if name == "averaging":
        if int(value) != value or value < 1:
            raise OutOfRange(f"averaging must be a whole number of readings >= 1, got {value}")
        value = int(value)
    else:
        value = float(value)
        if not np.isfinite(value) or value <= 0:
            raise OutOfRange(f"level must be a positive number of volts, got {value}")
    if (op.minimum is not None and value < op.minimum) or (
        op.maximum is not None and value > op.maximum
    ):
        unit = " V" if name == "level" else ""
        lo = "-" if op.minimum is None else f"{op.minimum:g}{unit}"
        hi = "-" if op.maximum is None else f"{op.maximum:g}{unit}"
        raise OutOfRange(
            f"{name} {value:g}{unit} is outside {lo} to {hi} allowed by dialect {dialect.name!r}"
        )
    return op, {name: number_text(value)}


def transfer_steps(dialect: Dialect, transfer: str) -> list[Step]:
    """The steps that switch readings to ``"ascii"`` or ``"binary"`` (none if already so)."""
    if transfer not in ("ascii", "binary"):
        raise OutOfRange(f"transfer must be 'ascii' or 'binary', got {transfer!r}")
    if transfer == dialect.transfer and not dialect.has(transfer):
        return []
    return [(dialect.operation(transfer, f"switch readings to {transfer}"), {})]
