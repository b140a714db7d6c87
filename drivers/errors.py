"""Exceptions raised by the instrument layer.

Every error a user can cause (an unreachable meter, a malformed dialect, a refused setting) is an
:class:`InstrumentError` whose message says what happened and what to do next.
"""

from __future__ import annotations


class InstrumentError(Exception):
    """Base of every error raised by :mod:`drivers`."""


class ConnectionLost(InstrumentError):
    """The meter stopped answering or the connection dropped, and reconnecting did not help."""


class MeterTimeout(InstrumentError):
    """A reply did not arrive within the timeout."""


class DialectError(InstrumentError):
    """A dialect file is malformed, or a plan asked for an operation the dialect lacks."""


class SettingRefused(InstrumentError):
    """The meter put an error on its queue after a setting or a command."""


class ReplyError(InstrumentError):
    """A reply could not be understood (garbled, truncated, wrong number of values)."""


class OutOfRange(InstrumentError):
    """A requested value (frequency, level) lies outside what the meter supports."""


class ProfileError(InstrumentError):
    """A simulator profile (DUT, fixture, faults) is malformed."""


class BiasError(InstrumentError):
    """DC bias could not be set, read back or brought down to zero as asked."""
