"""What the checks and the file format need to see of a reference set: plain arrays and metadata.

:mod:`.checks` and :mod:`.refs_file` work on any object with these attributes, so neither needs
:class:`~acquire.compensation.reference_set.ReferenceSet` (which imports both): the package's
imports run one way, ``reference_set -> checks, refs_file -> protocol``.
"""

from __future__ import annotations

from datetime import datetime
from typing import Protocol

import numpy as np

#: The standards a fixture can be measured with, in the order methods are named.
STANDARDS: tuple[str, ...] = ("open", "short", "load")
#: Every complex array a reference set may hold: the standards and the load's true value.
IMPEDANCE_FIELDS: tuple[str, ...] = (*STANDARDS, "load_true")
#: The per-standard Type A fields: standard uncertainty of the mean reading, ohm per component.
UNCERTAINTY_FIELDS: tuple[str, ...] = tuple(f"{name}_u" for name in STANDARDS)
#: How a grid was made: ``log`` or ``linear`` (evenly spaced, so a gap is a fault), ``list``
#: (any spacing), or ``""`` (not recorded: a gap is inferred from the grid itself).
GRID_SPACINGS: tuple[str, ...] = ("log", "linear", "list", "")


class References(Protocol):
    """Read-only view of a reference set (see :class:`ReferenceSet` for the meaning of each)."""

    @property
    def frequency(self) -> np.ndarray: ...
    @property
    def open(self) -> np.ndarray | None: ...
    @property
    def short(self) -> np.ndarray | None: ...
    @property
    def load(self) -> np.ndarray | None: ...
    @property
    def load_true(self) -> np.ndarray | None: ...
    @property
    def open_u(self) -> np.ndarray | None: ...
    @property
    def short_u(self) -> np.ndarray | None: ...
    @property
    def load_u(self) -> np.ndarray | None: ...
    @property
    def repeats(self) -> int: ...
    @property
    def grid_spacing(self) -> str: ...
    @property
    def captured_at(self) -> datetime | None: ...
    @property
    def fixture(self) -> str: ...
    @property
    def meter(self) -> str: ...
    @property
    def temperature(self) -> float | None: ...
    @property
    def notes(self) -> str: ...
