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

The names below are loaded on first use, so that a module that needs only the formulas or the
interpolation (a sweep without a reference set) does not load the checks, the file format and
the data class.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
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

_HOMES = {
    "Finding": "findings",
    **dict.fromkeys(
        ("Correction", "correct_open_short", "correct_open_short_load", "correct_short"),
        "formulas",
    ),
    **dict.fromkeys(
        ("GRID_SPACINGS", "IMPEDANCE_FIELDS", "STANDARDS", "UNCERTAINTY_FIELDS", "References"),
        "protocol",
    ),
    "ReferenceSet": "reference_set",
    **dict.fromkeys(("FORMAT", "FORMAT_VERSION"), "refs_file"),
}


def __getattr__(name: str) -> Any:
    home = _HOMES.get(name)
    value: Any
    if home == "findings":
        from acquire.compensation import findings

        value = getattr(findings, name)
    elif home == "formulas":
        from acquire.compensation import formulas

        value = getattr(formulas, name)
    elif home == "protocol":
        from acquire.compensation import protocol

        value = getattr(protocol, name)
    elif home == "reference_set":
        from acquire.compensation import reference_set

        value = getattr(reference_set, name)
    elif home == "refs_file":
        from acquire.compensation import refs_file

        value = getattr(refs_file, name)
    else:
        raise AttributeError(f"module 'acquire.compensation' has no attribute {name!r}")
    globals()[name] = value
    return value
