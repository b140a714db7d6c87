"""The generic impedance-meter driver: one class, command strings from a dialect.

:class:`ImpedanceMeter` knows an LCR meter's abstract operations (identify, configure, measure,
list sweep, DC resistance, error queue) and takes every command, reply meaning and limit from a
:class:`~drivers.dialect.Dialect`. Each point or list chunk is one compound message (one round
trip, no TCP delayed-ACK stall); readings become complex Z in ohm. Values outside the dialect's
limits are refused before sending; settings the meter refuses are reported from its error queue;
a dropped connection or missing reply is retried after a reconnect (see :mod:`drivers.session`).
"""

from __future__ import annotations

import functools
import logging
from collections.abc import Callable
from typing import TYPE_CHECKING, Any, TypeVar

import numpy as np

from drivers import readings, scpi
from drivers.dialect import Dialect
from drivers.dialect_file import load_dialect
from drivers.error_queue import ErrorQueue
from drivers.errors import DialectError, OutOfRange, SettingRefused
from drivers.exchange import Exchange
from drivers.point_message import Position
from drivers.retry import Described
from drivers.scpi import ErrorEntry, Identity
from drivers.session import TRANSIENT, Session
from drivers.settings import setting_step, transfer_steps

if TYPE_CHECKING:
    from drivers.bias import MeterBias

__all__ = ["ImpedanceMeter", "Identity", "ErrorEntry"]

log = logging.getLogger(__name__)
T = TypeVar("T")
OnPoints = Callable[[np.ndarray, np.ndarray], None]


class ImpedanceMeter:
    """An LCR meter driven through a dialect. Open with :meth:`open`; a context manager."""

    def __init__(self, session: Session, dialect: Dialect) -> None:
        self._session = session
        self._dialect = dialect
        self._settings: dict[str, Any] = {}
        self._transfer = dialect.transfer
        self._mode_known = False
        self._io = Exchange(session, dialect)
        self._queue = ErrorQueue(session, dialect)
        session.on_reopen = self._restore
        self._bias: MeterBias | None = None

    @classmethod
    def open(
        cls,
        resource: str,
        dialect: str | Dialect = "simulated",
        backend: str = "@py",
        timeout: float | None = None,
        *,
        retries: int | None = None,
        retry_wait: float | None = None,
    ) -> ImpedanceMeter:
        """Connect to ``resource`` and prepare the meter as the dialect says.

        ``dialect`` is a shipped name, a path or a loaded :class:`Dialect`. ``timeout`` (s)
        replaces the dialect's base timeout; ``retries``/``retry_wait`` its reconnect policy.
        """
        d = dialect if isinstance(dialect, Dialect) else load_dialect(dialect)
        session = Session(
            resource,
            backend,
            write_termination=d.write_termination,
            read_termination=d.read_termination,
            encoding=d.encoding,
            timeout=d.timeout if timeout is None else timeout,
            open_timeout=d.open_timeout,
            retries=d.retries if retries is None else retries,
            retry_wait=d.retry_wait if retry_wait is None else retry_wait,
        )
        session.open()
        meter = cls(session, d)
        try:
            session.call("preparing the meter", meter._prepare)
        except BaseException:
            meter.close()
            raise
        return meter

    def __enter__(self) -> ImpedanceMeter:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def close(self) -> None:
        """Close the connection (safe to call twice); bias handed out by :meth:`bias` is first
        ramped to zero and switched off (its failure is raised after closing)."""
        bias, self._bias = self._bias, None
        try:
            if bias is not None and self._session.is_open:
                bias.shutdown()
        finally:
            self._session.close()

    # -- what the meter is ---------------------------------------------------------------------

    @property
    def dialect(self) -> Dialect:
        return self._dialect

    @property
    def resource(self) -> str:
        return self._session.resource_name

    @property
    def session(self) -> Session:
        return self._session

    @property
    def frequency_range(self) -> tuple[float, float]:
        """Lowest and highest test frequency the dialect allows, in Hz."""
        return self._dialect.frequency_min, self._dialect.frequency_max

    @property
    def transfer(self) -> str:
        """``"ascii"`` or ``"binary"``: how readings travel now."""
        return self._transfer

    @property
    def _binary(self) -> bool:
        return self._transfer == "binary"

    @property
    def settings(self) -> dict[str, Any]:
        """The settings last applied with :meth:`configure` (re-applied after a reconnect)."""
        return dict(self._settings)

    def has(self, operation: str) -> bool:
        """True if the dialect defines ``operation`` (e.g. ``"dc_resistance"``)."""
        return self._dialect.has(operation)

    def bias(self) -> MeterBias:
        """The meter's own DC bias (:class:`~drivers.bias.MeterBias`; the same one every call);
        :class:`DialectError` if its dialect declares no bias operations."""
        if self._bias is None:
            from drivers.bias import MeterBias  # loaded by the first use of bias, not by a sweep

            self._bias = MeterBias(self._session, self._dialect)
        return self._bias

    def identify(self) -> Identity:
        """The meter's ``*IDN?`` fields, asked twice: replies that differ (one garbled or cut
        short) are asked again like any malformed reply."""
        op = self._dialect.operation("identify")

        def ask() -> Identity:
            return scpi.same_identity(
                self._session.query(op.format()), self._session.query(op.format())
            )

        return self._call("identify", ask)

    # -- settings ------------------------------------------------------------------------------

    def reset(self) -> None:
        """Return the meter to its defaults, then re-apply the dialect's setup."""
        op = self._dialect.operation("reset", "reset the meter")

        def action() -> None:
            self._mode_known = False
            self._io.run([(op, {})])
            self._settings.clear()
            self._transfer = self._dialect.transfer
            self._prepare()

        self._session.call("reset", action, op.idempotent)

    def configure(
        self,
        level: float | None = None,
        speed: str | None = None,
        averaging: int | None = None,
        transfer: str | None = None,
    ) -> None:
        """Apply test-signal ``level`` (V rms), ``speed`` (a word of the dialect's choices),
        ``averaging`` (readings per point) and ``transfer`` (``"ascii"``/``"binary"``).

        Values are checked against the dialect first (:class:`OutOfRange`; a setting the dialect
        has no command for raises :class:`DialectError`); then the meter's error queue is read,
        and anything it refused raises :class:`SettingRefused`.
        """
        wanted = {"level": level, "speed": speed, "averaging": averaging}
        wanted = {k: v for k, v in wanted.items() if v is not None}
        steps = [setting_step(self._dialect, name, value) for name, value in wanted.items()]
        if transfer is not None:
            steps += transfer_steps(self._dialect, transfer)
        if not steps:
            return

        def action() -> None:
            self._io.run(steps)
            listed = ", ".join(f"{k}={v!r}" for k, v in wanted.items())
            self._check_queue(f"configure({listed})")

        self._session.call("configure", action, all(op.idempotent for op, _ in steps))
        self._settings.update(wanted)
        if transfer is not None:
            self._transfer = transfer

    def _prepare(self, reopened: bool = False) -> None:
        """Read the error queue (kept as the reason of a failure after a reconnect), clear the
        status, send the dialect's setup and check the meter accepted it."""
        d = self._dialect
        self._queue.before_clear(reopened)
        if d.has("clear_status"):
            self._io.run([(d.operations["clear_status"], {})])
        steps = transfer_steps(self._dialect, self._transfer)
        if d.has("setup"):
            steps.insert(0, (d.operations["setup"], {}))
        if steps:
            self._io.run(steps)
        try:
            self._check_queue("the dialect's setup commands")
        except SettingRefused as exc:
            raise DialectError(f"dialect {d.name!r} ({d.path}): {exc}") from None

    def _restore(self) -> None:
        """After a reconnect: setup again, then the last configuration."""
        self._mode_known = False
        self._prepare(reopened=True)
        steps = [setting_step(self._dialect, k, v) for k, v in self._settings.items()]
        if steps:
            self._io.run(steps)
            self._check_queue("restoring the configuration after a reconnect")

    # -- measuring -----------------------------------------------------------------------------

    def measure(self, frequency: float) -> complex:
        """Complex impedance (ohm) at one ``frequency`` (Hz)."""
        return complex(self.sweep([frequency], mode="points")[0])

    def sweep(
        self,
        frequencies,
        on_points: OnPoints | None = None,
        mode: str = "auto",
    ) -> np.ndarray:
        """Complex impedance (ohm) at each frequency (Hz), in the order given.

        ``mode`` is ``"list"`` (the meter's list mode, in chunks of at most the dialect's
        ``list.max_points``), ``"points"`` (one compound query per point) or ``"auto"`` (list
        when the dialect has it and there is more than one point). ``on_points(f, z)`` is called
        with each point or chunk as it arrives. Overrange points are ``inf+infj``, invalid
        ones ``nan+nanj``. After the sweep the error queue is checked.
        """
        f = np.array(frequencies, dtype=float).ravel()
        self._check_frequencies(f)
        d = self._dialect
        if mode not in ("auto", "list", "points"):
            raise ValueError(f"mode must be 'auto', 'list' or 'points', not {mode!r}")
        if mode == "list" and not d.has_list:
            raise DialectError(
                f"dialect {d.name!r} ({d.path}) has no list mode ([list] and sequence.list); "
                "sweep point by point instead"
            )
        use_list = mode == "list" or (
            mode == "auto" and d.has_list and f.size >= max(2, d.list_min_points)
        )
        out = self._sweep_list(f, on_points) if use_list else self._sweep_points(f, on_points)
        self._call(
            "reading the error queue after the sweep",
            lambda: self._queue.check("the sweep", recovered=True),
        )
        return out

    def _check_frequencies(self, f: np.ndarray) -> None:
        d = self._dialect
        if f.size == 0:
            raise OutOfRange("no frequencies to measure")
        bad = ~np.isfinite(f) | (f < d.frequency_min) | (f > d.frequency_max)
        if bad.any():
            first = f[bad][0]
            count = int(bad.sum())
            what = "1 frequency lies" if count == 1 else f"{count} frequencies lie"
            raise OutOfRange(
                f"{what} outside {d.frequency_min:g} Hz to "
                f"{d.frequency_max:g} Hz allowed by dialect {d.name!r} (first: {first:g} Hz); "
                "nothing was sent to the meter"
            )

    def _timeout(self, points: int) -> float:
        averaging = int(self._settings.get("averaging", 1))
        return self._session.timeout + points * self._dialect.per_point_timeout * averaging

    def _sweep_points(self, f: np.ndarray, on_points: OnPoints | None) -> np.ndarray:
        """One compound query per point. The ``point_mode`` step is sent only while the meter
        may be in list mode (at first, after a list sweep, a reset or a reconnect). Messages are
        made once (:meth:`Exchange.prepare_point`); a point's name only when a failure needs it."""
        d = self._dialect
        full = [d.operations[name] for name in d.point_sequence]
        lean = [op for op in full if op.name != "point_mode"]
        steps = {False: full, True: lean}
        prepared = {known: self._io.prepare_point(steps[known]) for known in steps}
        values = np.empty(2 * f.size)
        timeout = self._timeout(1)
        repeatable = all(o.idempotent for o in full)
        at = Position()

        def point() -> tuple[float, float] | np.ndarray:
            known = self._mode_known
            pair = self._io.point_at(steps[known], prepared[known], at.text, timeout, self._binary)
            self._mode_known = True
            return pair

        attempt = self._queue.explained(at.describe, point)
        for i, fi in enumerate(f.tolist()):
            at.frequency, at.text = fi, repr(fi)
            values[2 * i], values[2 * i + 1] = self._attempt(at.describe, attempt, repeatable)
            if on_points is not None:
                here = f[i : i + 1]
                z = readings.from_flat(d.pair, here, values[2 * i : 2 * i + 2].copy(), d.qd_sign)
                on_points(here.copy(), z)
        return readings.from_flat(d.pair, f, values, d.qd_sign)

    def _sweep_list(self, f: np.ndarray, on_points: OnPoints | None) -> np.ndarray:
        d = self._dialect
        out = np.empty(f.size, dtype=complex)
        steps = [d.operations[name] for name in d.list_sequence]
        for start, stop in _chunks(f.size, d.list_max_points):
            part = f[start:stop]
            # what number_text writes for each value (repr of a float: exact), in one pass
            listed = ",".join(map(repr, part.tolist()))
            context = {"frequencies": listed, "count": str(part.size)}
            sent = [(op, context) for op in steps]
            timeout = self._timeout(part.size)
            self._mode_known = False
            values = self._call(
                f"list sweep of {part.size} points from {part[0]:g} Hz",
                functools.partial(self._io.readings, sent, part.size, timeout, self._binary),
                all(op.idempotent for op in steps),
            )
            z = readings.from_flat(d.pair, part, values, d.qd_sign)
            out[start:stop] = z
            if on_points is not None:
                on_points(part.copy(), z)
        return out

    def dc_resistance(self) -> float:
        """DC resistance (ohm) as the meter measures it; inf if overrange."""
        op = self._dialect.operation("dc_resistance", "measure the DC resistance")
        timeout = self._timeout(1)
        return self._call(
            "DC resistance",
            lambda: scpi.parse_number(self._io.guarded(op, timeout)),
            op.idempotent,
        )

    def next_unit(self) -> None:
        """The next production unit in (simulated meter only: drawn from the DUT's spread)."""
        op, ack = map(self._dialect.operation, ("next_unit", "wait"))
        self._session.call("next unit", lambda: self._io.run([(op, {}), (ack, {})]), op.idempotent)

    def errors(self) -> list[ErrorEntry]:
        """Read and empty the meter's error queue (oldest first); nothing is raised."""
        return self._session.call("reading the error queue", self._queue.drain, idempotent=False)

    # -- exchanges -------------------------------------------------------------------------------

    def _call(self, what: Described, action: Callable[[], T], idempotent: bool = True) -> T:
        """:meth:`Session.call`, with the meter's error queue read first whenever a reply was
        not understood or the connection was reopened; what the meter reported is the error."""
        return self._attempt(what, self._queue.explained(what, action), idempotent)

    def _attempt(self, what: Described, explained: Callable[[], T], idempotent: bool) -> T:
        """:meth:`_call` of an action :meth:`ErrorQueue.explained` wrapped (once per sweep)."""
        self._queue.found = []
        try:
            return self._session.call(what, explained, idempotent)
        except TRANSIENT as exc:
            told = self._queue.with_reason(exc)
            if told is None:
                raise
            raise told from exc

    def _check_queue(self, context: str) -> None:
        self._queue.check(context)


def _chunks(n: int, most: int) -> list[tuple[int, int]]:
    """Split ``n`` points into as few chunks of at most ``most`` as possible, sizes even."""
    count = -(-n // most)
    edges = np.linspace(0, n, count + 1).round().astype(int)
    return list(zip(edges[:-1].tolist(), edges[1:].tolist(), strict=True))
