"""One exchange with the meter: a dialect's steps sent as one message, the replies checked.

:class:`Exchange` joins the formatted commands of a sequence with the dialect's separator
(or sends them one by one for a meter without compound messages), reads the one reply line
(or a binary block with the other queries' replies around it), splits it into one reply per
query, checks that every acknowledgement is ``1`` and that the readings have exactly two
numbers per point. Anything else is a :class:`~drivers.errors.ReplyError`, so a garbled,
truncated, stale or mis-shaped reply never becomes a reading.
"""

from __future__ import annotations

import re
import time
from dataclasses import dataclass

import numpy as np

from drivers import point_message, scpi
from drivers.dialect import Dialect, Operation
from drivers.errors import ReplyError
from drivers.session import Session

Steps = list[tuple[Operation, dict]]


@dataclass(frozen=True)
class PreparedPoint:
    """A point sequence made ready once for a sweep (:meth:`Exchange.prepare_point`)."""

    #: The message's text around each frequency (:func:`drivers.point_message.message_parts`).
    parts: tuple[str, ...]
    #: The sequence's queries, in order, and which of them are acknowledgements.
    queries: tuple[Operation, ...]
    acks: tuple[int, ...]
    #: Which reply holds the readings, and the pattern of a plain reading pair
    #: (:func:`drivers.point_message.pair_pattern`).
    at: int
    pattern: re.Pattern[str]


class Exchange:
    """Sends steps of ``dialect`` through ``session`` and checks what comes back."""

    def __init__(self, session: Session, dialect: Dialect) -> None:
        self._session = session
        self._dialect = dialect

    def readings(
        self,
        steps: Steps,
        points: int,
        timeout: float,
        binary: bool = False,
        settle: bool = False,
    ) -> np.ndarray:
        """Run a point or list sequence; return the flat reading values (2 per point).

        With ``settle`` (single points) and a dialect ``sequence.settle`` time, the steps up to
        the frequency change are sent first and the rest after the settling time."""
        d = self._dialect
        if settle and d.settle > 0:
            cut = max(i for i, (op, _) in enumerate(steps) if "frequency" in op.placeholders) + 1
            self.run(steps[:cut])
            time.sleep(d.settle)
            steps = steps[cut:]
        replies = self.run(steps, timeout=timeout, binary=binary)
        queries = [op for op, _ in steps if op.query]
        reply = next(r for r, op in zip(replies, queries, strict=True) if op.reply == "readings")
        if binary:
            raw, offset, length = reply
            values = scpi.block_values(raw, offset, length, d.datatype, d.big_endian)
            if values.size != 2 * points:
                raise ReplyError(
                    f"expected {2 * points} numbers in the binary block, got {values.size}"
                )
            return values
        return scpi.parse_numbers(reply, expected=2 * points)

    def prepare_point(self, operations: list[Operation]) -> PreparedPoint | None:
        """``operations`` (a point sequence) made ready for :meth:`point`; None when the dialect
        sends them one by one or settles after the frequency change, or a command has a
        placeholder other than a plain ``{frequency}`` (then use :meth:`readings`)."""
        d = self._dialect
        parts = point_message.message_parts(operations, d.separator)
        queries = tuple(op for op in operations if op.query)
        readings = [k for k, op in enumerate(queries) if op.reply == "readings"]
        if not d.compound or d.settle > 0 or parts is None or not readings:
            return None
        acks = tuple(k for k, op in enumerate(queries) if op.reply == "ack")
        return PreparedPoint(parts, queries, acks, readings[0], point_message.pair_pattern())

    def point_at(
        self,
        operations: list[Operation],
        prepared: PreparedPoint | None,
        frequency: str,
        timeout: float,
        binary: bool,
    ) -> tuple[float, float] | np.ndarray:
        """One point of a sweep at ``frequency`` (its text): :meth:`point` when the sequence
        was prepared and readings come as text, else :meth:`readings` (settling if asked)."""
        if prepared is not None and not binary:
            return self.point(prepared, frequency, timeout)
        context = {"frequency": frequency}
        return self.readings([(op, context) for op in operations], 1, timeout, binary, settle=True)

    def point(self, prepared: PreparedPoint, frequency: str, timeout: float) -> tuple[float, float]:
        """One point of an ASCII sweep: what :meth:`readings` does for the prepared sequence
        with ``frequency`` (its text) and one point, the same message sent and the reply
        checked and refused alike."""
        queries = prepared.queries
        reply = self._session.query(frequency.join(prepared.parts), timeout)
        parts = reply.split(self._dialect.reply_separator) if len(queries) > 1 else [reply]
        if len(parts) != len(queries):
            raise self._miscounted(parts, len(queries))
        for k in prepared.acks:
            if parts[k] != "1":
                self._acknowledged(parts, list(queries))
        return point_message.reading_pair(parts[prepared.at], prepared.pattern)

    def guarded(self, op: Operation, timeout: float) -> str:
        """The reply text of the single query ``op``, followed by the dialect's ``wait`` when its
        point sequence ends with one: a reply cut short then loses the final ``1`` and is refused
        instead of a shortened number being taken for the answer."""
        steps: Steps = [(op, {})]
        if self._dialect.point_sequence[-1] == "wait":
            steps.append((self._dialect.operations["wait"], {}))
        return self.run(steps, timeout=timeout)[0]

    def run(
        self,
        steps: Steps,
        timeout: float | None = None,
        binary: bool = False,
    ) -> list:
        """Send the steps (as one compound message when the dialect allows) and return the
        replies of the queries in order, acknowledgements checked. With ``binary`` the reply
        of the readings query is ``(raw, offset, length)`` of its block."""
        d = self._dialect
        texts = [op.format(**values) for op, values in steps]
        queries = [op for op, _ in steps if op.query]
        blocks = binary and any(op.reply == "readings" for op in queries)
        if not d.compound:
            replies: list = []
            for (op, _), text in zip(steps, texts, strict=True):
                if not op.query:
                    self._session.write(text)
                elif blocks and op.reply == "readings":
                    replies.append(self._block(text, timeout, 1, 1))
                else:
                    replies.append(self._session.query(text, timeout))
            return self._acknowledged(replies, queries)
        message = d.separator.join(texts)
        if not queries:
            self._session.write(message)
            return []
        if blocks:
            at = [op.reply for op in queries].index("readings")
            parts = self._block(message, timeout, at + 1, len(queries) - at)
        else:
            reply = self._session.query(message, timeout)
            parts = reply.split(d.reply_separator) if len(queries) > 1 else [reply]
        if len(parts) != len(queries):
            raise self._miscounted(parts, len(queries))
        return self._acknowledged(parts, queries)

    def _miscounted(self, parts: list, count: int) -> ReplyError:
        return ReplyError(
            f"expected {count} replies joined by {self._dialect.reply_separator!r}, "
            f"got {len(parts)} (starting {str(parts[0])[:40]!r}); a meter that answers each "
            "query of a message on a line of its own needs sequences with one query each"
        )

    def _block(self, message: str, timeout: float | None, before: int, after: int) -> list:
        """The replies around a binary block: ``before - 1`` texts, the block, ``after - 1``."""
        sep = self._dialect.reply_separator
        prefix, raw, offset, length, suffix = self._session.query_block(message, timeout)
        head = prefix.split(sep) if before > 1 else [prefix]
        tail = suffix.split(sep) if after > 1 else [suffix]
        if len(head) != before or head[-1] != "" or len(tail) != after or tail[0] != "":
            raise ReplyError(
                f"unexpected text around the binary block: {prefix[:30]!r} before, "
                f"{suffix[:30]!r} after"
            )
        return head[:-1] + [(raw, offset, length)] + tail[1:]

    @staticmethod
    def _acknowledged(replies: list, queries: list[Operation]) -> list:
        for reply, op in zip(replies, queries, strict=True):
            if (
                op.reply == "ack"
                and reply != "1"
                and not (scpi.is_number(reply) and scpi.parse_number(reply) == 1.0)
            ):
                raise ReplyError(
                    f"expected the acknowledgement 1 to {op.command!r}, got {reply[:40]!r}"
                )
        return replies
