"""The correction against an independent numpy implementation, and applied in pieces.

Source of the formula: the open/short/load correction of an impedance-measurement fixture,
``Zx = Zstd*(Zo - Zsm)*(Zxm - Zs)/((Zsm - Zs)*(Zo - Zxm))`` with ``Zsm`` the reading of the load
standard and ``Zstd`` its true value, as given in impedance-measurement handbooks (from memory).
"""

from __future__ import annotations

import numpy as np
import pytest

from acquire.compensation import ReferenceSet
from acquire.errors import CompensationError


def random_set(seed: int, n: int = 41):
    rng = np.random.default_rng(seed)
    grid = np.sort(rng.uniform(1e2, 1e7, n))

    def z(scale):
        return scale * (rng.uniform(0.1, 2, n) + 1j * rng.uniform(-2, 2, n))

    zo, zs, zl, zt = z(1e6), z(0.1), z(100.0), z(100.0)
    return grid, zo, zs, zl, zt, z(50.0)


@pytest.mark.parametrize("seed", range(40))
def test_open_short_load_equals_the_published_formula(seed):
    grid, zo, zs, zl, zt, zm = random_set(seed)
    refs = ReferenceSet(grid, open=zo, short=zs, load=zl, load_true=zt)
    want = zt * (zo - zl) * (zm - zs) / ((zl - zs) * (zo - zm))
    np.testing.assert_allclose(refs.correct(grid, zm), want, rtol=1e-14, atol=0)
    # the same points given in another order take the gathered path: same numbers
    order = np.random.default_rng(seed).permutation(grid.size)
    np.testing.assert_allclose(refs.correct(grid[order], zm[order]), want[order], rtol=1e-14)


@pytest.mark.parametrize("seed", range(10))
def test_pieces_give_the_same_bits_as_one_call(seed):
    # run_sweep corrects each chunk with the set's kept forms: the result must not depend on
    # how the sweep was cut, on or between grid points
    grid, zo, zs, zl, zt, _ = random_set(seed)
    rng = np.random.default_rng(seed + 100)
    f = np.sort(np.concatenate([rng.uniform(grid[0], grid[-1], 300), grid[::3]]))
    zm = 50 * (rng.uniform(0.1, 2, f.size) + 1j * rng.uniform(-2, 2, f.size))
    whole = ReferenceSet(grid, open=zo, short=zs, load=zl, load_true=zt).correct(f, zm)
    refs = ReferenceSet(grid, open=zo, short=zs, load=zl, load_true=zt)
    cuts = np.cumsum([0, 8, 50, 50, 1, 4096])
    parts = [refs.correct(f[a:b], zm[a:b]) for a, b in zip(cuts[:-1], cuts[1:], strict=True)]
    np.testing.assert_array_equal(np.concatenate(parts), whole)


def test_a_chunk_with_nan_or_outside_frequencies_is_refused_after_earlier_chunks():
    grid, zo, zs, zl, zt, zm = random_set(0)
    refs = ReferenceSet(grid, open=zo, short=zs, load=zl, load_true=zt)
    mid = np.sqrt(grid[1:3] * grid[0:2])
    refs.correct(mid, zm[:2])  # the set now keeps its forms
    with pytest.raises(CompensationError, match="finite"):
        refs.correct(np.array([mid[0], np.nan]), zm[:2])
    with pytest.raises(CompensationError, match="never"):
        refs.correct(np.array([mid[0], grid[-1] * 1.001]), zm[:2])
