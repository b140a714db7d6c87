"""A sweep's result must not depend on how it was cut into chunks, bit for bit.

Small chunks carry the standards (and their Type A and variances) side by side, a long sweep
carries them one by one; both are the same operations point by point, so the corrected
impedance, its covariance and the flags agree exactly. The check value is the tool's own result
for the whole sweep in one call (an equality of two paths, no published source needed).
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pytest

from acquire.compensation import ReferenceSet
from acquire.compensation.interpolation import SIDE_BY_SIDE_UP_TO
from acquire.sweep_uncertainty import PointUncertainty
from drivers.dialect_file import load_dialect


def make_set(seed: int, n: int = 41):
    rng = np.random.default_rng(seed)
    grid = np.sort(rng.uniform(1e2, 1e7, n))

    def z(scale):
        return scale * (rng.uniform(0.1, 2, n) + 1j * rng.uniform(-2, 2, n))

    zo, zs, zl, zt = z(1e6), z(0.1), z(100.0), z(100.0)
    fields = dict(open=zo, short=zs, load=zl, load_true=zt, repeats=3)
    fields.update(open_u=1e-4 * abs(zo), short_u=1e-4 * abs(zs) + 1e-5, load_u=1e-4 * abs(zl))
    return grid, fields


@pytest.mark.parametrize("seed", range(5))
def test_small_chunks_and_one_long_call_agree_bit_for_bit(seed):
    grid, fields = make_set(seed)
    rng = np.random.default_rng(seed + 7)
    count = SIDE_BY_SIDE_UP_TO + 300
    f = np.sort(np.concatenate([rng.uniform(grid[0], grid[-1], count), grid[::4]]))
    zm = 50 * (rng.uniform(0.1, 2, f.size) + 1j * rng.uniform(-2, 2, f.size))
    accuracy = load_dialect("simulated").accuracy
    meter = SimpleNamespace(dialect=SimpleNamespace(accuracy=accuracy))

    whole_refs = ReferenceSet(grid, **fields)
    whole = PointUncertainty.for_meter(meter).evaluate(f, zm, whole_refs)
    np.testing.assert_array_equal(whole_refs.correct(f, zm), whole.corrected)

    refs = ReferenceSet(grid, **fields)
    unc = PointUncertainty.for_meter(meter)
    cuts = np.cumsum([0, 8, 40, 47, 1, f.size])
    cuts[-1] = f.size
    parts = [unc.evaluate(f[a:b], zm[a:b], refs) for a, b in zip(cuts[:-1], cuts[1:], strict=True)]
    np.testing.assert_array_equal(np.concatenate([p.corrected for p in parts]), whole.corrected)
    np.testing.assert_array_equal(np.concatenate([p.cov for p in parts]), whole.cov)
    np.testing.assert_array_equal(np.concatenate([p.flags for p in parts]), whole.flags)
    plain = [refs.correct(f[a:b], zm[a:b]) for a, b in zip(cuts[:-1], cuts[1:], strict=True)]
    np.testing.assert_array_equal(np.concatenate(plain), whole.corrected)
