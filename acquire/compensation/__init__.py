"""Fixture compensation: open, short and load references, checked, interpolated and applied.

``from acquire.compensation import ReferenceSet, Finding``. A :class:`ReferenceSet` holds a
fixture's references on a frequency grid; ``refs.correct(f, z)`` removes the fixture from
readings, ``refs.check()`` judges the references (and a DUT measured with them), ``refs.save``
and ``ReferenceSet.read`` keep them in a file.

Modules: :mod:`.formulas` (the corrections and the fixture model behind each),
:mod:`.interpolation` (between grid points), :mod:`.checks` (the findings and their rules),
:mod:`.refs_file` (the file format), :mod:`.reference_set` (the data class). Imports run one
way: :mod:`.reference_set` uses :mod:`.checks` and :mod:`.refs_file`, which see a set only
through the attributes of :class:`.protocol.References`; :mod:`.dut_checks` (rules on a DUT),
:mod:`.grid` (gaps in a grid) and :mod:`.findings` (the finding type) serve :mod:`.checks`.
"""

from acquire.compensation.findings import Finding
from acquire.compensation.formulas import (
    Correction,
    correct_open_short,
    correct_open_short_load,
    correct_short,
)
from acquire.compensation.protocol import (
    GRID_SPACINGS,
    IMPEDANCE_FIELDS,
    STANDARDS,
    UNCERTAINTY_FIELDS,
    References,
)
from acquire.compensation.reference_set import ReferenceSet
from acquire.compensation.refs_file import FORMAT, FORMAT_VERSION

__all__ = [
    "FORMAT",
    "FORMAT_VERSION",
    "GRID_SPACINGS",
    "IMPEDANCE_FIELDS",
    "STANDARDS",
    "Correction",
    "Finding",
    "ReferenceSet",
    "References",
    "UNCERTAINTY_FIELDS",
    "correct_open_short",
    "correct_open_short_load",
    "correct_short",
]
