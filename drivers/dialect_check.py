"""Checking a dialect file key by key: every mistake names the file, the key and the reason.

:func:`check_dialect` turns the parsed TOML table of a dialect file into a
:class:`~drivers.dialect.Dialect` (:func:`check_source_dialect`, a current source's into a
:class:`~drivers.dialect.SourceDialect`), refusing unknown keys, wrong types, impossible limits,
operations the driver does not know, queries that do not say what they return, placeholders an
operation cannot fill, and sequences that would never tell the meter its frequency or never
return a reading. :func:`drivers.dialect_file.load_dialect` is the way in.
"""

from __future__ import annotations

import math
import string
from pathlib import Path
from typing import Any

from drivers.accuracy_check import MISSING, check_accuracy
from drivers.dialect import (
    OPERATIONS,
    OWN_PLACEHOLDERS,
    PLACEHOLDERS,
    REPLIES,
    REPLY_KINDS,
    REQUIRED,
    SCHEMA,
    SEQUENCE_PLACEHOLDERS,
    Dialect,
    Operation,
    SourceDialect,
)
from drivers.dialect_bias import check_bias, check_kind, check_source, unknown_operation
from drivers.dialect_connection import check_connection
from drivers.errors import DialectError
from drivers.readings import QD_SIGNS, QUANTITIES, is_supported, supported_pairs
from drivers.renamed import dialect_problems


def check_dialect(path: Path, data: dict[str, Any]) -> Dialect:
    """The validated dialect of the TOML table ``data`` read from ``path``."""
    return _Checker(path, data).dialect()


def check_source_dialect(path: Path, data: dict[str, Any]) -> SourceDialect:
    """The validated current-source dialect of the TOML table ``data`` read from ``path``."""
    return check_source(_Checker(path, data))


class _Checker:
    """Reads the parsed TOML table key by key, failing with file, key and reason."""

    def __init__(self, path: Path, data: dict[str, Any]) -> None:
        self.path = path
        self.data = data

    def fail(self, key: str, reason: str) -> DialectError:
        return DialectError(f"{self.path}: key {key!r}: {reason}")

    def table(self, key: str, required: bool = False) -> dict[str, Any]:
        value = self.data.get(key, MISSING)
        if value is MISSING:
            if required:
                raise self.fail(key, "missing table")
            return {}
        if not isinstance(value, dict):
            raise self.fail(key, "must be a table ([" + key + "])")
        return value

    def get(self, table: dict, key: str, kind: type | tuple, default: Any = MISSING) -> Any:
        section, _, leaf = key.rpartition(".")
        value = table.get(leaf, MISSING)
        if value is MISSING:
            if default is MISSING:
                raise self.fail(key, "missing")
            return default
        kinds = kind if isinstance(kind, tuple) else (kind,)
        if kinds == (float,) or kinds == (float, int):
            kinds = (float, int)
        if isinstance(value, bool) and bool not in kinds:
            raise self.fail(key, f"must be {_kind_name(kinds)}, not a boolean")
        if not isinstance(value, kinds):
            raise self.fail(key, f"must be {_kind_name(kinds)}, not {type(value).__name__}")
        if float in kinds and not isinstance(value, bool):
            try:
                return float(value)
            except OverflowError:
                raise self.fail(key, "is beyond the range of a number (about ±1.8e308)") from None
        return value

    def unknown(self, table: dict, prefix: str, allowed: set[str]) -> None:
        for key in table:
            if key not in allowed:
                hint = ", ".join(sorted(allowed))
                raise self.fail(f"{prefix}{key}", f"unknown key (allowed here: {hint})")

    def positive(self, table: dict, key: str, default: Any, allow_zero: bool = False) -> float:
        """A finite number above 0 (at least 0 with ``allow_zero``): a time, a frequency, a
        factor; NaN and infinity are refused (a timeout of ``inf`` would never end)."""
        value = self.get(table, key, float, default)
        if not math.isfinite(value):
            raise self.fail(key, f"must be a finite number, got {value}")
        if value < 0 or (value == 0 and not allow_zero):
            raise self.fail(key, f"must be {'>= 0' if allow_zero else '> 0'}, got {value}")
        return value

    def dialect(self) -> Dialect:
        top = self.data
        check_kind(self, "meter")
        self.unknown(
            top,
            "",
            {"schema", "kind", "name", "description", "connection", "frequency", "reading"}
            | {"errors", "transfer", "list", "sequence", "operations", "accuracy"},
        )
        name = self.header()
        operations = self.operations()
        check_bias(self, operations)
        conn = check_connection(self)
        fmin, fmax = self.frequency()
        pair, qd_sign = self.reading()
        transfer = self.transfer(operations)
        list_max, list_min = self.list_limits()
        point, lst, settle = self.sequences(operations, list_max > 0)
        codes = self.warning_codes()
        return Dialect(
            name=name,
            path=self.path,
            description=self.get(top, "description", str, ""),
            operations=operations,
            pair=pair,
            qd_sign=qd_sign,
            frequency_min=fmin,
            frequency_max=fmax,
            point_sequence=point,
            list_sequence=lst,
            list_max_points=list_max,
            list_min_points=list_min,
            settle=settle,
            warning_codes=frozenset(codes),
            accuracy=check_accuracy(self, operations),
            **transfer,
            **conn,
        )

    def header(self) -> str:
        """Check ``schema``; return ``name``."""
        schema = self.get(self.data, "schema", int)
        if schema != SCHEMA:
            raise self.fail("schema", f"this driver reads schema {SCHEMA}, the file has {schema}")
        name = self.get(self.data, "name", str)
        if not name.strip():
            raise self.fail("name", "must not be empty")
        return name

    def warning_codes(self) -> list[int]:
        errors = self.table("errors")
        self.unknown(errors, "errors.", {"warning_codes"})
        codes = self.get(errors, "errors.warning_codes", list, [])
        if not all(isinstance(c, int) and not isinstance(c, bool) for c in codes):
            raise self.fail("errors.warning_codes", "must be a list of integer error codes")
        if not all(-32768 <= c <= 32767 for c in codes):
            raise self.fail("errors.warning_codes", "SCPI error codes lie in -32768 to 32767")
        return codes

    def frequency(self) -> tuple[float, float]:
        t = self.table("frequency", required=True)
        self.unknown(t, "frequency.", {"min", "max"})
        fmin = self.positive(t, "frequency.min", MISSING)
        fmax = self.positive(t, "frequency.max", MISSING)
        if fmax <= fmin:
            raise self.fail("frequency.max", f"must be above frequency.min ({fmin} Hz)")
        return fmin, fmax

    def reading(self) -> tuple[tuple[str, str], str]:
        t = self.table("reading", required=True)
        self.unknown(t, "reading.", {"pair", "qd_sign"})
        pair = self.get(t, "reading.pair", list)
        if len(pair) != 2 or not all(isinstance(p, str) for p in pair):
            raise self.fail("reading.pair", "must be a list of two quantity names")
        for p in pair:
            if p not in QUANTITIES:
                raise self.fail(
                    "reading.pair", f"unknown quantity {p!r}; known: {list(QUANTITIES)}"
                )
        if not is_supported((pair[0], pair[1])):
            pairs = ", ".join(f"{a},{b}" for a, b in supported_pairs())
            raise self.fail("reading.pair", f"{pair} cannot be turned into impedance; use {pairs}")
        qd_sign = self.get(t, "reading.qd_sign", str, "signed")
        if qd_sign not in QD_SIGNS:
            raise self.fail("reading.qd_sign", f"must be one of {', '.join(QD_SIGNS)}")
        return (pair[0], pair[1]), qd_sign

    def transfer(self, operations: dict[str, Operation]) -> dict[str, Any]:
        t = self.table("transfer")
        self.unknown(t, "transfer.", {"default", "datatype", "byte_order"})
        default = self.get(t, "transfer.default", str, "ascii")
        if default not in ("ascii", "binary"):
            raise self.fail("transfer.default", f"must be 'ascii' or 'binary', got {default!r}")
        datatype = self.get(t, "transfer.datatype", str, "float64")
        if datatype not in ("float64", "float32"):
            raise self.fail(
                "transfer.datatype", f"must be 'float64' or 'float32', not {datatype!r}"
            )
        order = self.get(t, "transfer.byte_order", str, "big")
        if order not in ("big", "little"):
            raise self.fail("transfer.byte_order", f"must be 'big' or 'little', got {order!r}")
        for mode, other in (("binary", "ascii"), ("ascii", "binary")):
            if default == mode and other in operations and mode not in operations:
                raise self.fail(
                    f"operations.{mode}",
                    f"missing: with transfer.default = {mode!r} and an {other!r} operation, "
                    f"the driver needs {mode!r} to switch back",
                )
        return {
            "transfer": default,
            "datatype": "d" if datatype == "float64" else "f",
            "big_endian": order == "big",
        }

    def list_limits(self) -> tuple[int, int]:
        t = self.table("list")
        self.unknown(t, "list.", {"max_points", "min_points"})
        if not t:
            return 0, 1
        most = self.get(t, "list.max_points", int)
        least = self.get(t, "list.min_points", int, 1)
        if most < 1:
            raise self.fail("list.max_points", f"must be at least 1, got {most}")
        if not 1 <= least <= most:
            raise self.fail("list.min_points", f"must be between 1 and max_points, got {least}")
        return most, least

    def sequences(
        self, operations: dict[str, Operation], has_list: bool
    ) -> tuple[tuple[str, ...], tuple[str, ...], float]:
        t = self.table("sequence", required=True)
        self.unknown(t, "sequence.", {"point", "list", "settle"})
        settle = self.positive(t, "sequence.settle", 0.0, allow_zero=True)
        point = self.check_sequence(t, "point", operations)
        if has_list:
            lst = self.check_sequence(t, "list", operations)
        elif "list" in t:
            raise self.fail("sequence.list", "given without a [list] table with max_points")
        else:
            lst = ()
        used = set(point) | set(lst)
        for op in operations.values():
            if op.name in used:
                continue
            extra = op.placeholders - OWN_PLACEHOLDERS.get(op.name, frozenset())
            if extra:
                raise self.fail(
                    f"operations.{op.name}.command",
                    f"placeholder {{{sorted(extra)[0]}}} is not available to this operation",
                )
        return point, lst, settle

    def check_sequence(self, t: dict, which: str, ops: dict[str, Operation]) -> tuple[str, ...]:
        key = f"sequence.{which}"
        steps = self.get(t, key, list)
        if not steps or not all(isinstance(s, str) for s in steps):
            raise self.fail(key, "must be a non-empty list of operation names")
        for step in steps:
            if step not in ops:
                raise self.fail(key, f"names {step!r}, which has no [operations.{step}] table")
        replies = [ops[s].reply for s in steps if ops[s].query]
        if replies.count("readings") != 1:
            raise self.fail(key, "must hold exactly one query returning readings (read/fetch)")
        if any(r not in ("readings", "ack") for r in replies):
            raise self.fail(key, "its other queries may only be acknowledgements (wait)")
        context = SEQUENCE_PLACEHOLDERS[which]
        seen: set[str] = set()
        for step in steps:
            op = ops[step]
            extra = op.placeholders - context - OWN_PLACEHOLDERS.get(step, frozenset())
            if extra:
                raise self.fail(
                    f"operations.{step}.command",
                    f"placeholder {{{sorted(extra)[0]}}} is not available in sequence.{which}",
                )
            seen |= op.placeholders & context
        need = "frequency" if which == "point" else "frequencies"
        if need not in seen:
            raise self.fail(key, f"no step uses {{{need}}}, so the meter would never be told it")
        return tuple(steps)

    def operations(
        self, known: dict[str, str] = OPERATIONS, required: tuple[str, ...] = REQUIRED
    ) -> dict[str, Operation]:
        """The ``[operations]`` table, each a name of ``known``, every one of ``required``."""
        t = self.table("operations", required=True)
        out: dict[str, Operation] = {}
        for name, spec in t.items():
            key = f"operations.{name}"
            if name not in known:
                raise self.fail(key, unknown_operation(name, known))
            if not isinstance(spec, dict):
                raise self.fail(key, "must be a table with at least 'command'")
            out[name] = self.operation(name, spec)
        for name in required:
            if name not in out:
                raise self.fail(
                    f"operations.{name}", f"missing; the driver needs it to {known[name]}"
                )
        problems = dialect_problems({n: op.command for n, op in out.items()})
        if problems:
            (name, reason), rest = problems[0], [f"operations.{n}.command" for n, _ in problems[1:]]
            also = f"; retired words also in {', '.join(rest)}" if rest else ""
            raise self.fail(f"operations.{name}.command", reason + also)
        return out

    def operation(self, name: str, spec: dict) -> Operation:
        key = f"operations.{name}"
        allowed = {"command", "query", "reply", "idempotent", "min", "max", "choices"}
        self.unknown(spec, key + ".", allowed)
        command = self.get(spec, f"{key}.command", str)
        if not command.strip():
            raise self.fail(f"{key}.command", "must not be empty")
        placeholders = self.placeholders(f"{key}.command", command)
        query = self.get(spec, f"{key}.query", bool, False)
        reply = self.get(spec, f"{key}.reply", str, None)
        want = REPLIES.get(name)
        if query and reply is None:
            raise self.fail(f"{key}.reply", f"missing; say what the reply is ({want or 'ack'})")
        if not query and reply is not None:
            raise self.fail(f"{key}.reply", "given for a command that is not a query")
        if want and not query:
            raise self.fail(f"{key}.query", f"must be true: this operation returns {want}")
        if query and reply not in REPLY_KINDS:
            raise self.fail(f"{key}.reply", f"must be one of {', '.join(REPLY_KINDS)}")
        if query and reply != (want or "ack"):
            raise self.fail(f"{key}.reply", f"must be {want or 'ack'!r} for {name}")
        lo, hi = self.limit(spec, f"{key}.min"), self.limit(spec, f"{key}.max")
        if lo is not None and hi is not None and hi < lo:
            raise self.fail(f"{key}.max", f"must not be below min ({lo})")
        choices = self.get(spec, f"{key}.choices", dict, {})
        if not all(isinstance(v, str) and v for v in choices.values()):
            raise self.fail(f"{key}.choices", "must map each speed word to the meter's word")
        if name == "set_speed" and not choices:
            raise self.fail(f"{key}.choices", "missing; map speed words to the meter's, e.g. fast")
        return Operation(
            name=name,
            command=command,
            query=query,
            reply=reply,
            placeholders=placeholders,
            minimum=lo,
            maximum=hi,
            choices=dict(choices),
            idempotent=self.get(spec, f"{key}.idempotent", bool, name != "next_error"),
        )

    def limit(self, spec: dict, key: str) -> float | None:
        """An operation's optional ``min`` or ``max``: a finite number (NaN would let every
        value through, infinity is no limit: leave the key out instead)."""
        value = self.get(spec, key, float, None)
        if value is not None and not math.isfinite(value):
            raise self.fail(key, f"must be a finite number (or left out), got {value}")
        return value

    def placeholders(self, key: str, command: str) -> frozenset[str]:
        names = set()
        try:
            for _, field_name, spec, conv in string.Formatter().parse(command):
                if field_name is None:
                    continue
                if not field_name.isidentifier() or spec or conv:
                    raise self.fail(key, f"placeholder {{{field_name}}} must be a plain {{name}}")
                names.add(field_name)
        except ValueError as exc:
            raise self.fail(
                key, f"bad template ({exc}); write a literal brace as {{{{ or }}}}"
            ) from None
        for n in names:
            if n not in PLACEHOLDERS:
                raise self.fail(
                    key, f"unknown placeholder {{{n}}} (known: {', '.join(sorted(PLACEHOLDERS))})"
                )
        return frozenset(names)


def _kind_name(kinds: tuple) -> str:
    if float in kinds:
        return "a number"
    names = {str: "a string", int: "an integer", bool: "true or false"}
    names |= {list: "a list", dict: "a table"}
    return " or ".join(names.get(k, k.__name__) for k in kinds)
