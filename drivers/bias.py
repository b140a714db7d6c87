"""DC bias for inductance under current: supplied by the meter itself or by a DC current source.

A :class:`BiasSupply` sets a DC current (ampere), switches it on and off, reads back what flows,
and ramps it in steps. Two kinds are driven from dialect operations:

- :class:`MeterBias`: the meter's own bias (``set_bias``, ``bias_on``, ``bias_off``,
  ``read_bias`` and optionally ``bias_limit`` in its dialect), on the meter's session;
  :meth:`drivers.meter.ImpedanceMeter.bias` hands one out;
- :class:`CurrentSource`: a second instrument with a ``kind = "current-source"`` dialect,
  opened by its own resource (:meth:`CurrentSource.open`); closing it ramps the output to zero
  and switches it off before the connection closes.

A value above :attr:`BiasSupply.limit` (the dialect's ``max``, or the instrument's own smaller
report), negative or not finite is refused before anything is sent. After every command the
error queue is read, so a current the instrument refused is reported, never assumed.

An inductor carrying DC stores ½·L·I²; breaking that current arcs and can destroy the meter's
input and hurt the operator. Hence :meth:`~BiasSupply.ramp_to`: it changes the current in steps
and, on the way down to zero (what a ``finally`` block does), keeps going when one step fails,
switches off at the end, and only then raises.
"""

from __future__ import annotations

import logging
from pathlib import Path
from typing import Protocol

from drivers import scpi
from drivers.dialect import Dialect, SourceDialect
from drivers.dialect_file import load_source_dialect
from drivers.errors import DialectError
from drivers.scpi import Identity
from drivers.session import Session
from drivers.supply import METER, SOURCE, DialectSupply, Link

__all__ = ["BiasSupply", "CurrentSource", "MeterBias"]

log = logging.getLogger(__name__)

NO_BIAS = (
    "this meter's dialect declares no bias operations; give a DC current source with "
    "--bias-source RESOURCE"
)


class BiasSupply(Protocol):
    """Something that drives a DC current through the part: currents in ampere, times in s."""

    @property
    def limit(self) -> float:
        """The largest current that will be sent (A)."""
        ...

    def set_current(self, amps: float) -> None:
        """Set the current; above :attr:`limit`, negative or not finite raises
        :class:`~drivers.errors.OutOfRange` before anything is sent."""
        ...

    def switch(self, on: bool) -> None:
        """Switch the current on or off (off at once: ramp to zero first)."""
        ...

    def applied(self) -> float:
        """The current actually flowing, as the instrument reads it back (A)."""
        ...

    def ramp_to(self, amps: float, step: float, dwell: float = 0.0) -> float:
        """Move to ``amps`` in steps of at most ``step``, waiting ``dwell`` after each; return
        the last read-back current. ``ramp_to(0, ...)`` ends with the current switched off."""
        ...


class MeterBias(DialectSupply):
    """The meter's own DC bias, on the meter's session (see
    :meth:`drivers.meter.ImpedanceMeter.bias`, whose ``close`` calls :meth:`shutdown`).
    ``ramp_step`` (A; a tenth of the limit unless given) and ``ramp_dwell`` (s) are the steps
    of :meth:`shutdown`."""

    def __init__(
        self,
        link: Link,
        dialect: Dialect,
        *,
        ramp_step: float | None = None,
        ramp_dwell: float = 0.0,
    ) -> None:
        if not dialect.has_bias:
            raise DialectError(NO_BIAS)
        super().__init__(
            link,
            dialect.operations,
            dialect.warning_codes,
            METER,
            dialect.name,
            ramp_step,
            ramp_dwell,
        )


class CurrentSource(DialectSupply):
    """A DC current source reached by its own resource; a context manager whose exit ramps the
    output to zero (steps of ``ramp_step``, a tenth of the limit unless given, ``ramp_dwell``
    seconds apart) and switches it off before closing the connection."""

    def __init__(
        self,
        link: Link,
        dialect: SourceDialect,
        *,
        ramp_step: float | None = None,
        ramp_dwell: float = 0.0,
    ) -> None:
        self._dialect = dialect
        super().__init__(
            link,
            dialect.operations,
            dialect.warning_codes,
            SOURCE,
            dialect.name,
            ramp_step,
            ramp_dwell,
        )
        self._open = True

    @classmethod
    def open(
        cls,
        resource: str,
        dialect: str | Path | SourceDialect = "simulated-source",
        backend: str = "@py",
        timeout: float | None = None,
        *,
        ramp_step: float | None = None,
        ramp_dwell: float = 0.0,
    ) -> CurrentSource:
        """Connect to the source at ``resource``; ``dialect`` is a shipped name, a path or a
        loaded :class:`SourceDialect`. The source is not reset (a reset could break a current
        already flowing); its status is cleared and the dialect's ``setup`` sent."""
        d = dialect if isinstance(dialect, SourceDialect) else load_source_dialect(dialect)
        session = Session(
            resource,
            backend,
            write_termination=d.write_termination,
            read_termination=d.read_termination,
            encoding=d.encoding,
            timeout=d.timeout if timeout is None else timeout,
            open_timeout=d.open_timeout,
            retries=d.retries,
            retry_wait=d.retry_wait,
        )
        session.open()
        try:
            session.call("preparing the current source", lambda: prepare(session, d))
            session.on_reopen = lambda: prepare(session, d)
            return cls(session, d, ramp_step=ramp_step, ramp_dwell=ramp_dwell)
        except BaseException:
            session.close()
            raise

    @property
    def dialect(self) -> SourceDialect:
        return self._dialect

    def identify(self) -> Identity:
        """The source's ``*IDN?`` fields."""
        op = self._dialect.operations["identify"]
        return self._link.call(
            "identify", lambda: scpi.parse_identity(self._link.query(op.format()))
        )

    def close(self) -> None:
        """Ramp to 0 A and switch off, then close the connection (safe to call twice); a
        failure of the ramp is raised after the connection is closed."""
        if not self._open:
            return
        self._open = False
        try:
            self.shutdown()
        finally:
            self._link.close()

    def __enter__(self) -> CurrentSource:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    #: The source's dialect.
    _dialect: SourceDialect
    #: False once :meth:`close` has run.
    _open: bool


def prepare(link: Link, dialect: SourceDialect) -> None:
    """Log what the source's error queue held, clear its status, send the dialect's setup
    and check the source accepted it (on opening and after every reconnect)."""
    ops = dialect.operations

    def ask() -> str:
        return link.query(ops["next_error"].format())

    old = scpi.drain_errors(ask, dialect.warning_codes)
    if old:
        listed = "; ".join(map(str, old))
        log.info("%s: errors queued before this session: %s", link.resource_name, listed)
    for name in ("clear_status", "setup"):
        if name in ops:
            link.write(ops[name].format())
    entries = scpi.drain_errors(ask, dialect.warning_codes)
    scpi.raise_for_errors(entries, f"{link.resource_name}: the source dialect's setup commands")
