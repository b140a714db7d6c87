"""Fixture compensation: open, short and load references, checked, interpolated and applied.

``from acquire.compensation import ReferenceSet, Finding``. A :class:`ReferenceSet` holds a
fixture's references on a frequency grid; ``refs.correct(f, z)`` removes the fixture from
readings, ``refs.check()`` judges the references (and a DUT measured with them), ``refs.save``
and ``ReferenceSet.load`` keep them in a file.

Modules: :mod:`.formulas` (the corrections and the fixture model behind each),
:mod:`.interpolation` (between grid points), :mod:`.checks` (the findings and their rules),
:mod:`.refs_file` (the file format), :mod:`.reference_set` (the data class).
"""

from acquire.compensation.checks import Finding
from acquire.compensation.formulas import (
    Correction,
    correct_open_short,
    correct_open_short_load,
    correct_short,
)
from acquire.compensation.reference_set import IMPEDANCE_FIELDS, STANDARDS, ReferenceSet
from acquire.compensation.refs_file import FORMAT, FORMAT_VERSION

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "IMPEDANCE_FIELDS",
    "STANDARDS",
    "Correction",
    "Finding",
    "ReferenceSet",
    "correct_open_short",
    "correct_open_short_load",
    "correct_short",
]
