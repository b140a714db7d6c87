"""Checking what a dialect says about DC current: a meter's bias operations, a source dialect.

Split from :mod:`drivers.dialect_check`, whose checker every function here takes, so that every
mistake names the file, the key and the reason in the same words:

- :func:`check_kind`: the top-level ``kind`` is the one the caller loads (a meter's dialect
  given where a current source's belongs, or the reverse, says so);
- :func:`check_bias`: a meter dialect declares all of :data:`~drivers.dialect.BIAS_REQUIRED`
  or none, ``bias_limit`` only beside them, and ``set_bias`` holds ``{current}`` and a ``max``;
- :func:`check_source`: a ``kind = "current-source"`` file, which has no frequency, reading,
  list, sequence, transfer or accuracy tables, becomes a :class:`~drivers.dialect.SourceDialect`.
"""

from __future__ import annotations

from typing import Any

from drivers.dialect import (
    BIAS_OPERATIONS,
    BIAS_REQUIRED,
    KINDS,
    OPERATIONS,
    OWN_PLACEHOLDERS,
    SOURCE_OPERATIONS,
    SOURCE_REQUIRED,
    Operation,
    SourceDialect,
)
from drivers.dialect_connection import check_connection

#: The tables only a meter's dialect has.
METER_TABLES = ("frequency", "reading", "list", "sequence", "transfer", "accuracy")
#: ``[connection]`` keys about compound messages and per-point time, which a source lacks.
METER_CONNECTION = ("per_point_timeout", "compound", "separator", "reply_separator")


def kind_of(data: dict[str, Any]) -> Any:
    """The ``kind`` a parsed dialect file declares (``"meter"`` when it declares none)."""
    return data.get("kind", "meter")


def check_kind(checker: Any, wanted: str) -> None:
    """Refuse a file whose ``kind`` is unknown or not ``wanted``."""
    kind = kind_of(checker.data)
    if kind not in KINDS:
        listed = ", ".join(repr(k) for k in KINDS)
        raise checker.fail("kind", f"must be one of {listed}, got {kind!r}")
    if kind == wanted:
        return
    if kind == "current-source":
        raise checker.fail(
            "kind",
            "this is a current source's dialect, not a meter's; give it as the bias source's "
            "dialect (with the source's own resource), and a meter dialect for the meter",
        )
    raise checker.fail(
        "kind",
        "this is a meter's dialect, not a current source's; a source's dialect says "
        'kind = "current-source" (see drivers/dialects/simulated-source.toml)',
    )


def unknown_operation(name: str, known: dict[str, str]) -> str:
    """The reason an operation name is refused, pointing to the other kind where it belongs."""
    if known is OPERATIONS and name in SOURCE_OPERATIONS:
        where = ' (it belongs in a kind = "current-source" dialect; a meter says set_bias, ...)'
    elif known is SOURCE_OPERATIONS and name in OPERATIONS:
        where = " (it belongs in a meter's dialect; a current source says set_current, ...)"
    else:
        where = ""
    return f"unknown operation{where} (known: {', '.join(known)})"


def check_bias(checker: Any, operations: dict[str, Operation]) -> None:
    """A meter's bias operations: all four of ``set_bias``, ``bias_on``, ``bias_off`` and
    ``read_bias``, or none (then ``bias_limit`` neither); ``set_bias`` as :func:`_setter`."""
    given = [name for name in BIAS_OPERATIONS if name in operations]
    if not given:
        return
    missing = [name for name in BIAS_REQUIRED if name not in operations]
    if missing:
        listed = ", ".join(missing)
        raise checker.fail(
            f"operations.{missing[0]}",
            f"missing: a dialect with bias operations needs all of {', '.join(BIAS_REQUIRED)} "
            f"(missing {listed}); add them, or delete {', '.join(given)} if the meter has no "
            "DC bias of its own",
        )
    _setter(checker, operations["set_bias"], "meter")


def check_source(checker: Any) -> SourceDialect:
    """The :class:`SourceDialect` of a ``kind = "current-source"`` file."""
    top = checker.data
    check_kind(checker, "current-source")
    for table in METER_TABLES:
        if table in top:
            raise checker.fail(table, "not used by a current-source dialect; delete it")
    checker.unknown(
        top, "", {"schema", "kind", "name", "description", "connection", "errors", "operations"}
    )
    name = checker.header()
    operations = checker.operations(SOURCE_OPERATIONS, SOURCE_REQUIRED)
    for op in operations.values():
        extra = op.placeholders - OWN_PLACEHOLDERS.get(op.name, frozenset())
        if extra:
            raise checker.fail(
                f"operations.{op.name}.command",
                f"placeholder {{{sorted(extra)[0]}}} is not available to this operation",
            )
    _setter(checker, operations["set_current"], "source")
    connection = checker.table("connection")
    for key in METER_CONNECTION:
        if key in connection:
            raise checker.fail(
                f"connection.{key}",
                "not used by a current-source dialect (one command per message); delete it",
            )
    conn = check_connection(checker)
    return SourceDialect(
        name=name,
        path=checker.path,
        description=checker.get(top, "description", str, ""),
        operations=operations,
        write_termination=conn["write_termination"],
        read_termination=conn["read_termination"],
        encoding=conn["encoding"],
        timeout=conn["timeout"],
        open_timeout=conn["open_timeout"],
        retries=conn["retries"],
        retry_wait=conn["retry_wait"],
        warning_codes=frozenset(checker.warning_codes()),
    )


def _setter(checker: Any, op: Operation, who: str) -> None:
    """``set_bias``/``set_current``: ``{current}`` in the command, a positive ``max``, no
    ``min`` (the current runs from 0 A up)."""
    key = f"operations.{op.name}"
    if "current" not in op.placeholders:
        raise checker.fail(
            f"{key}.command", "must hold {current}, where the driver writes the current in ampere"
        )
    if op.maximum is None:
        raise checker.fail(
            f"{key}.max", f"missing; give the largest current the {who} allows, in ampere"
        )
    if op.maximum <= 0:
        raise checker.fail(f"{key}.max", f"must be above 0 A, got {op.maximum:g}")
    if op.minimum is not None:
        raise checker.fail(f"{key}.min", "not used: the current runs from 0 A up to max; delete it")
