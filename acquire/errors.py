"""Exceptions raised by the measurement layer.

Each is an :class:`AcquireError` whose message says what went wrong and what the user can do.
Errors from the instrument layer stay :class:`drivers.errors.InstrumentError`; the command line
catches both.
"""

from __future__ import annotations


class AcquireError(Exception):
    """Base of every error raised by :mod:`acquire`."""


class InputError(AcquireError):
    """A value given by the user (a quantity, a file, an option) is malformed or out of range."""


class CompensationError(AcquireError):
    """A reference set is malformed, cannot be used at the requested frequencies, or is corrupt."""


class StoreError(AcquireError):
    """The results store cannot be opened, migrated or written."""


class ModelError(AcquireError):
    """A coil model cannot be computed or fitted from the data given."""


class BiasError(AcquireError):
    """A DC-bias measurement cannot be done as asked (a bias above a limit, a curve unusable)."""


class PublishError(AcquireError):
    """Results cannot be published: a malformed broker URL, or a broker that cannot be reached."""
