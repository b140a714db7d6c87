"""Seeded random draws that depend only on the seed and on which reading is drawn.

The simulated meter numbers the points it measures, from 0 after each (re)seed, and separately
its DC resistance readings. The draws for point ``k`` come from a counter-based generator
(Philox, keyed by the seed and the kind of reading) started at counter ``k``, so they are the
same whether the point was measured alone, in a list of seven or in one list of all, in point
or list mode, slowly or at once, and whatever else was measured in between.

Each counter step of Philox gives four 64-bit words; a point uses one step: two uniform numbers
become two independent standard normal numbers by the Box-Muller transform (G. E. P. Box and
M. E. Muller, Ann. Math. Statist. 29 (1958) 610), the other two are left unused.
"""

from __future__ import annotations

import numpy as np

#: The kinds of reading, each with a stream of its own.
POINTS = 0
DC = 1
#: Not a stream of draws: the key of the meter's systematic errors for a seed.
SYSTEMATIC = 2


def _key(seed: int, stream: int) -> np.ndarray:
    return np.random.SeedSequence([seed, stream]).generate_state(2, np.uint64)


def normal_pairs(seed: int, stream: int, first: int, count: int) -> np.ndarray:
    """Standard normal pairs, shape ``(count, 2)``, for readings ``first .. first+count-1``."""
    bits = np.random.Philox(key=_key(seed, stream), counter=first)
    u = np.random.Generator(bits).random((count, 4))
    radius = np.sqrt(-2.0 * np.log1p(-u[:, 0]))
    angle = 2.0 * np.pi * u[:, 1]
    return np.column_stack([radius * np.cos(angle), radius * np.sin(angle)])


class ReadingCounter:
    """Counts the readings drawn since the last seed, per kind, and hands out their draws."""

    def __init__(self, seed: int) -> None:
        self.seed = seed
        self._next = {POINTS: 0, DC: 0}

    def draw(self, stream: int, count: int) -> np.ndarray:
        """The normal pairs of the next ``count`` readings of ``stream``; counts them."""
        pairs = self.peek(stream, count)
        self.count(stream, count)
        return pairs

    def peek(self, stream: int, count: int) -> np.ndarray:
        """The normal pairs of the next ``count`` readings of ``stream``, not yet counted."""
        return normal_pairs(self.seed, stream, self._next[stream], count)

    def count(self, stream: int, count: int) -> None:
        """Count ``count`` readings of ``stream`` as completed (their draws were peeked)."""
        self._next[stream] += count
