"""Asking ``quantities`` for some of its keys gives those entries of the full set, bit for bit.

No external source: the property checked is the module's own (a subset is computed by the same
rules as the full set, which tests/test_impedance.py checks against standard circuit theory).
The readings include the special values the module docstring gives rules for: R or X zero, a
perfect short, overrange (inf) and invalid (NaN) readings, and a negative R.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

from acquire.errors import InputError
from acquire.impedance import KEYS, quantities

SPECIAL = np.array([0.0, -0.0, 1.0, -1.0, 1e-300, 1e300, np.inf, -np.inf, np.nan])


def readings(seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies and readings: every pair of special parts, then random R (half of them
    negative) and X over many decades, some parts replaced by a special value."""
    rng = np.random.default_rng(seed)
    pairs = np.array([complex(r, x) for r, x in itertools.product(SPECIAL, SPECIAL)])
    n = 400
    r = rng.choice([-1.0, 1.0], n) * 10.0 ** rng.uniform(-6, 6, n)
    x = rng.choice([-1.0, 1.0], n) * 10.0 ** rng.uniform(-6, 6, n)
    for part in (r, x):
        swap = rng.random(n) < 0.15
        part[swap] = rng.choice(SPECIAL, int(swap.sum()))
    mixed = np.empty(n, dtype=complex)
    mixed.real, mixed.imag = r, x
    z = np.concatenate([pairs, mixed])
    f = 10.0 ** rng.uniform(0, 8, z.size)
    return f, z


def same_bits(a: np.ndarray, b: np.ndarray) -> bool:
    return a.shape == b.shape and a.dtype == b.dtype and a.tobytes() == b.tobytes()


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_every_subset_equals_the_full_computation(seed):
    f, z = readings(seed)
    full = quantities(f, z)
    rng = np.random.default_rng(100 + seed)
    subsets = [(name,) for name in KEYS]
    subsets += [("Ls", "Rs", "Q", "Z", "theta"), tuple(reversed(KEYS)), ()]
    subsets += [tuple(rng.permutation(KEYS)[: rng.integers(1, 13)]) for _ in range(40)]
    for names in subsets:
        part = quantities(f, z, names)
        assert tuple(part) == names
        for name in names:
            assert same_bits(part[name], full[name]), (names, name)


def test_subset_keeps_broadcasting_and_the_special_values():
    # One frequency for many readings; the values are the module docstring's rules.
    z = np.array([0.0, 5.0, 5j, complex(np.inf, np.inf), complex(np.nan, np.nan), -2 + 1j])
    q = quantities(1e3, z, ("Q", "D", "theta"))
    np.testing.assert_array_equal(q["Q"], [np.nan, 0.0, np.inf, np.nan, np.nan, -0.5])
    np.testing.assert_array_equal(q["D"], [np.nan, np.inf, 0.0, np.nan, np.nan, -2.0])
    assert np.isnan(q["theta"][[0, 3, 4]]).all()
    assert q["theta"][1] == 0.0 and q["theta"][2] == 90.0


def test_unknown_name_refused():
    with pytest.raises(InputError, match="unknown quantity 'L'"):
        quantities([1e3], [1 + 1j], ("Ls", "L"))
