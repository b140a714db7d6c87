"""Faults the simulated meter can be told to commit, for the driver's reliability tests.

Each fault is armed from a profile's ``[[faults]]`` entries, the ``SIMulate:FAULt`` command or the
Python handle, and counts events from the moment it is armed. With ``n`` it fires once, at the
n-th event, and is disarmed; with ``rate`` it fires at each event with that probability, drawn
from the simulator's seeded fault generator, until cleared. Either way it is deterministic under
the seed.

Kinds (and the event each counts):

- ``drop``: the connection is closed when the n-th message arrives, before it runs (messages).
- ``stall``: the n-th reply is never sent; the session goes on working (reply lines).
- ``garble``: the n-th reply has its first byte and a seeded few others replaced by junk
  characters that are never valid in a number (reply lines).
- ``truncate``: the n-th reply is cut short at a seeded position (reply lines).
- ``count``: the n-th reading (``FETCh?``/``READ?``) has its last value missing (readings).
- ``error``: error ``code`` is pushed onto the queue of the client whose message comes next.
- ``overrange``: readings within 0.1 % of ``frequency`` report overrange, until cleared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

FAULT_KINDS = ("drop", "stall", "garble", "truncate", "count", "error", "overrange")
_COUNTED = ("drop", "stall", "garble", "truncate", "count")
_JUNK = b"@$%&?~!^"
#: SCPI error and event numbers lie in this range (SCPI-99 volume 1, 21.8).
CODE_MIN, CODE_MAX = -32768, 32767
#: The most events a counted fault may wait for (the SCPI command's integer range).
COUNT_MAX = 2**31 - 1
#: Relative distance from an overrange fault's frequency within which readings overrange.
OVERRANGE_TOLERANCE = 1e-3


@dataclass(frozen=True)
class FaultSpec:
    """One fault to arm: its kind and what it needs (``n`` or ``rate``, ``code``, ``frequency``)."""

    kind: str
    n: int | None = None
    rate: float | None = None
    code: int | None = None
    frequency: float | None = None

    @classmethod
    def build(
        cls,
        kind: str,
        n: int | float | None = None,
        rate: float | None = None,
        code: int | None = None,
        frequency: float | None = None,
    ) -> FaultSpec:
        """Validate and fill in defaults (``n = 1`` for a counted fault without a rate).

        For ``error`` a lone ``n`` is taken as the code, for ``overrange`` as the frequency, so
        ``build("error", -222)`` and ``build("overrange", 1e6)`` read like the SCPI command.
        Raises :class:`ValueError` with a plain message.
        """
        kind = kind.lower()
        if kind not in FAULT_KINDS:
            raise ValueError(f"unknown fault {kind!r} (one of {', '.join(FAULT_KINDS)})")
        if kind == "error":
            code = _integer("code", n if code is None else code)
            if code == 0 or not CODE_MIN <= code <= CODE_MAX:
                raise ValueError(
                    f"an error fault needs a non-zero SCPI code from {CODE_MIN} to {CODE_MAX}, "
                    f"e.g. -222; got {shown(code)}"
                )
            return cls(kind, code=code)
        if kind == "overrange":
            value = n if frequency is None else frequency
            if value is None or isinstance(value, bool) or not isinstance(value, int | float):
                raise ValueError("an overrange fault needs a frequency in Hz")
            try:
                hertz = float(value)
            except OverflowError:
                hertz = math.inf
            if not (math.isfinite(hertz) and hertz > 0):
                raise ValueError(
                    f"overrange frequency must be finite and positive, got {shown(value)}"
                )
            return cls(kind, frequency=hertz)
        if rate is not None:
            if n is not None:
                raise ValueError("give either n or rate, not both")
            if isinstance(rate, bool) or not isinstance(rate, int | float) or not 0 < rate <= 1:
                raise ValueError(f"rate must be a probability in (0, 1], got {shown(rate)}")
            return cls(kind, rate=float(rate))
        count = 1 if n is None else _integer("n", n)
        if not 1 <= count <= COUNT_MAX:
            raise ValueError(
                f"n counts events from now and must be at least 1 (at most {COUNT_MAX}), "
                f"got {shown(count)}"
            )
        return cls(kind, n=count)


def _integer(name: str, value: object) -> int:
    """``value`` as an int if it is a whole number (an int, or a float with no fraction)."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        raise ValueError(f"{name} must be a whole number, got {shown(value)}")
    if isinstance(value, float) and not (math.isfinite(value) and value.is_integer()):
        raise ValueError(f"{name} must be a whole number, got {shown(value)}")
    return int(value)


def shown(value: object) -> str:
    """``repr(value)``, cut short for a huge number so a message stays one short line."""
    text = repr(value) if not isinstance(value, int) or abs(value) < 10**30 else "a huge number"
    return text if len(text) <= 40 else text[:37] + "..."


class _Armed:
    """An armed fault and the events it still waits for."""

    def __init__(self, spec: FaultSpec) -> None:
        self.spec = spec
        #: Events still to count before it fires (None for a fault with a rate).
        self.remaining: int | None = spec.n


class Faults:
    """The faults armed on one simulated meter (shared by all its clients)."""

    def __init__(self, rng: np.random.Generator) -> None:
        self._rng = rng
        self._armed: list[_Armed] = []
        self._deferred: list[_Armed] = []

    @property
    def armed(self) -> tuple[FaultSpec, ...]:
        """What is armed now, in arming order."""
        return tuple(a.spec for a in self._armed + self._deferred)

    def arm(self, spec: FaultSpec, deferred: bool = False) -> None:
        """Arm ``spec``, counting its events from now, or (``deferred``) from :meth:`settle`.

        A fault armed by a SCPI command is deferred, so the arming message's own reply is not
        one of the events it counts.
        """
        (self._deferred if deferred else self._armed).append(_Armed(spec))

    def settle(self) -> None:
        """Start counting for the faults armed by the message that has just finished."""
        self._armed.extend(self._deferred)
        self._deferred.clear()

    def clear(self) -> None:
        """Disarm every fault."""
        self._armed.clear()
        self._deferred.clear()

    def reseed(self, rng: np.random.Generator) -> None:
        """Draw rates and garbling from ``rng`` from now on."""
        self._rng = rng

    def _fire(self, kind: str) -> bool:
        fired = False
        for armed in [a for a in self._armed if a.spec.kind == kind]:
            if armed.spec.rate is not None:
                fired |= bool(self._rng.random() < armed.spec.rate)
                continue
            if armed.remaining is None:
                continue
            armed.remaining -= 1
            if armed.remaining == 0:
                self._armed.remove(armed)
                fired = True
        return fired

    def message_arrived(self) -> tuple[bool, list[int]]:
        """Count a message: (close the connection now?, error codes to push before it runs)."""
        drop = self._fire("drop")
        errors = [
            a.spec.code for a in self._armed if a.spec.kind == "error" and a.spec.code is not None
        ]
        self._armed = [a for a in self._armed if a.spec.kind != "error"]
        return drop, errors

    def reply(self, data: bytes) -> bytes | None:
        """Count a reply line (without its LF): ``None`` to send nothing, else what to send."""
        stall = self._fire("stall")
        truncate = self._fire("truncate")
        garble = self._fire("garble")
        if stall:
            return None
        if truncate:
            data = data[: int(self._rng.integers(1, len(data)))] if len(data) > 1 else b""
        if garble:
            data = self._garble(data)
        return data

    def _garble(self, data: bytes) -> bytes:
        if not data:
            return bytes([_JUNK[0]])
        out = bytearray(data)
        count = 1 + len(out) // 8
        positions = {0, *self._rng.integers(0, len(out), size=count).tolist()}
        for pos in positions:
            out[pos] = _JUNK[int(self._rng.integers(0, len(_JUNK)))]
        return bytes(out)

    def short_reading(self) -> bool:
        """Count a reading: True if it must lose its last value."""
        return self._fire("count")

    def overrange(self, f: np.ndarray) -> np.ndarray:
        """Boolean mask of the frequencies ``f`` an overrange fault covers."""
        f = np.asarray(f, dtype=float)
        mask = np.zeros(f.shape, dtype=bool)
        for armed in self._armed:
            f0 = armed.spec.frequency
            if armed.spec.kind == "overrange" and f0 is not None:
                mask |= np.abs(f - f0) <= OVERRANGE_TOLERANCE * f0
        return mask
