"""Speed of open/short/load correction against bare numpy doing the same work.

Run ``python benchmarks/bench_compensation.py`` (full sizes) or ``--quick`` (a fast look).

Goals (issue "speed where the user waits"):

=====================================================================  =========
what                                                                   goal
=====================================================================  =========
open/short/load: build and apply vs bare numpy recomputing everything  <= 2x
correction of a sweep applied in pieces (as run_sweep does) vs numpy   <= 2x
=====================================================================  =========

The baseline (:func:`numpy_correct`) is written out here with numpy alone and does, for the
same inputs, everything the tool does: it places the sweep's frequencies on the reference grid
(``searchsorted``, linear weights in log frequency), carries each standard to them in the form
``acquire.compensation.interpolation`` uses (short as R and X/f; open as the admittance of
``Zo - Zs`` in G and B/f, short added back; load after open-short correction on the grid, in R
and X/f, put back through the carried open and short; the load's true value in R and X/f; grid
points bit for bit), then applies ``Zx = Zt*(Zo - Zl)*(Zm - Zs)/((Zl - Zs)*(Zo - Zm))``.

Like with like:

- build and apply: each timed call makes a new ``ReferenceSet`` from the arrays and corrects
  one whole sweep; the baseline computes its per-grid forms (log of the grid, the standards'
  smooth forms) inside the timed call too. Neither keeps anything between calls. The sweep's
  frequencies lie between the grid points ("between") or on them ("on grid"); sizes 201, 1,601
  and 20,001 points (``--quick``: 201 and 1,601), grid and sweep of the same size. The figure is
  the worst ratio.
- in pieces (the goal): the set is built once, as ``run_sweep`` receives it (open, short, load
  with Type A from 3 repeats), and each chunk goes through ``acquire.sweep._Sink`` with the
  default ``PointUncertainty.for_meter`` of a meter speaking the simulated dialect (its stated
  accuracy, no settings given): correction, uncertainty and flags, exactly the calls
  ``run_sweep`` makes per chunk by default. The chunks are the ones ``acquire.sweep._blocks``
  makes (its own code, its clock advanced as a meter at 5 ms a point and one that answers at
  once would). The baseline (:func:`numpy_with_uncertainty`) does the same mathematics per
  chunk in plain vectorised numpy: standards and their Type A carried to the chunk's
  frequencies, each reading's variance from the stated accuracy, the correction, its
  derivatives, ``Σ |g|²σ²``, U with k = 2, the flags of Ls, Rs, Q, |Z| and theta. Like with
  like in the flags too: the tool computes only the quantities it judges (``quantities`` and
  ``quantity_uncertainty`` asked for those five names) and so does the baseline. Both sides
  keep only what depends on the frozen set and the accuracy (the baseline: log grid, carried
  forms, the accuracy's constants; the tool: its ``PreparedCorrection``, made on the first
  chunk). The figure is the worst ratio over chunkings and sizes.
- for information, the plain correction in the same pieces (``references.correct``, what
  ``run_sweep`` does with ``uncertainty=None``) against ``numpy_apply``.

Before anything is timed each tool result is compared with the baseline's: impedances and
expanded uncertainties within 1e-12 relative, covariances within 1e-10 of each point's largest
element, flags equal; so the benchmark never times a wrong path. Each time is the best of
15 rounds (5 with ``--quick``), the tool's rounds and the baseline's interleaved (which goes
first alternating), as the machine is shared and its load drifts.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import goals  # noqa: E402

import acquire.sweep as sweep_module  # noqa: E402
from acquire.compensation import ReferenceSet  # noqa: E402
from acquire.plan import FrequencyPlan  # noqa: E402
from acquire.sweep_uncertainty import PointUncertainty  # noqa: E402
from acquire.uncertainty import expanded  # noqa: E402
from drivers.dialect_file import load_dialect  # noqa: E402

Z_LOAD = 100.0
TOLERANCE = 1e-12
COV_TOLERANCE = 1e-10
#: The standards' Type A (relative to |Z|, plus 10 µΩ), as from a capture with repeats.
TYPE_A, REPEATS = 1e-4, 3


def fixture_case(n: int, seed: int = 0):
    """A grid of ``n`` points, the standards read through a random T-section fixture, and a
    function giving the meter's reading of a 47 uH coil at any frequencies."""
    rng = np.random.default_rng(seed)
    grid = np.logspace(2, math.log10(3e7), n)
    r1, l1 = rng.uniform(0.01, 0.5), rng.uniform(10e-9, 100e-9)
    g, c = rng.uniform(1e-9, 1e-7), rng.uniform(2e-12, 10e-12)
    r2, l2 = rng.uniform(0.001, 0.05), rng.uniform(1e-9, 10e-9)

    def read(freq, zx):
        w = 2 * np.pi * freq
        z1, y, z2 = r1 + 1j * w * l1, g + 1j * w * c, r2 + 1j * w * l2
        a, b, cc, d = 1 + z1 * y, z1 + z2 + z1 * y * z2, y, 1 + y * z2
        return a / cc if zx is None else (a * zx + b) / (cc * zx + d)

    def dut(freq):
        w = 2 * np.pi * freq
        return read(freq, 1 / (1 / (0.8 + 1j * w * 47e-6) + 1j * w * 2e-12))

    zo, zs, zl = read(grid, None), read(grid, 0.0), read(grid, np.full(n, Z_LOAD + 0j))
    return grid, zo, zs, zl, np.full(n, Z_LOAD + 0j), dut


def sweep_frequencies(grid: np.ndarray, where: str) -> np.ndarray:
    if where == "on grid":
        return grid.copy()
    # the same number of log-spaced points over the span, shifted off the grid inside it
    lo, hi = np.log(grid[0]), np.log(grid[-1])
    step = (hi - lo) / (grid.size - 1)
    return np.exp(np.linspace(lo + step / 3, hi - step / 3, grid.size))


# -- the bare numpy baseline -------------------------------------------------------------------


def numpy_forms(grid, zo, zs, zl, zt):
    """Per-grid arrays the baseline needs: log grid and each standard's smooth form."""
    shunt = 1.0 / (zo - zs)
    bare_load = (zo - zs) * (zl - zs) / (zo - zl)
    return (
        grid,
        np.log(grid),
        (zo, zs, zl, zt),
        zs.real + 1j * (zs.imag / grid),
        shunt.real + 1j * (shunt.imag / grid),
        bare_load.real + 1j * (bare_load.imag / grid),
        zt.real + 1j * (zt.imag / grid),
    )


def numpy_standards(forms, f):
    """The standards carried to ``f`` (bare numpy), with the placement (index, weight, exact)."""
    grid, log_grid, (zo, zs, zl, zt), s_flat, o_flat, l_flat, t_flat = forms
    n = grid.size
    i = np.searchsorted(grid, f, side="right") - 1
    np.clip(i, 0, n - 2, out=i)
    exact = grid[i] == f
    top = f == grid[-1]
    i[top] = n - 1
    exact |= top
    j = np.minimum(i + 1, n - 1)
    with np.errstate(invalid="ignore"):
        w = (np.log(f) - log_grid[i]) / (log_grid[j] - log_grid[i])
    w[exact] = 0.0

    def carry(flat):
        a = flat[i]
        mid = a + w * (flat[j] - a)
        return mid.real + 1j * (mid.imag * f)

    s = carry(s_flat)
    o = 1.0 / carry(o_flat) + s
    b = carry(l_flat)
    k = o - s
    ld = (b * o + k * s) / (b + k)
    t = carry(t_flat)
    s = np.where(exact, zs[i], s)
    o = np.where(exact, zo[i], o)
    ld = np.where(exact, zl[i], ld)
    t = np.where(exact, zt[i], t)
    return (o, s, ld, t), (i, j, w, exact)


def numpy_apply(forms, f, zm):
    """Carry the standards to ``f`` and apply the open/short/load formula (bare numpy)."""
    (o, s, ld, t), _ = numpy_standards(forms, f)
    return t * (o - ld) / (ld - s) * ((zm - s) / (o - zm))


def numpy_correct(grid, zo, zs, zl, zt, f, zm):
    return numpy_apply(numpy_forms(grid, zo, zs, zl, zt), f, zm)


# -- the benchmark -----------------------------------------------------------------------------


def same(got, want, what: str) -> None:
    worst = float(np.max(np.abs(got - want) / np.abs(want)))
    if not worst <= TOLERANCE:
        raise SystemExit(f"{what}: the tool and numpy differ by {worst:.2e} relative; not timed")


def build_and_apply(n: int, where: str, repeat: int) -> tuple[float, float]:
    grid, zo, zs, zl, zt, dut = fixture_case(n)
    f = sweep_frequencies(grid, where)
    zm = dut(f)

    def tool():
        return ReferenceSet(grid, open=zo, short=zs, load=zl, load_true=zt).correct(f, zm)

    def bare():
        return numpy_correct(grid, zo, zs, zl, zt, f, zm)

    same(tool(), bare(), f"build and apply, {n} points {where}")
    return best_times_interleaved(tool, bare, repeat)


def best_times_interleaved(
    a: Callable[[], object], b: Callable[[], object], repeat: int, min_round: float = 0.05
) -> tuple[float, float]:
    """Best seconds per call of ``a`` and of ``b`` over ``repeat`` rounds each of enough calls
    to last ``min_round``, their rounds interleaved (which goes first alternating), so that a
    change in the shared machine's load falls on both sides."""
    loops = []
    for fn in (a, b):
        fn()
        start = time.perf_counter()
        fn()
        loops.append(max(1, math.ceil(min_round / max(time.perf_counter() - start, 1e-9))))
    best = [math.inf, math.inf]
    for r in range(repeat):
        for k in (0, 1) if r % 2 == 0 else (1, 0):
            fn = (a, b)[k]
            start = time.perf_counter()
            for _ in range(loops[k]):
                fn()
            best[k] = min(best[k], (time.perf_counter() - start) / loops[k])
    return best[0], best[1]


def chunk_sizes(n: int, seconds_per_point: float) -> list[int]:
    """The block sizes ``acquire.sweep._blocks`` makes for ``n`` points from a meter that takes
    ``seconds_per_point`` (its own code; only its clock is advanced as the meter would)."""
    plan = FrequencyPlan(np.logspace(2, 7, n), "log")
    clock = [0.0]
    sizes: list[int] = []

    class Clock:
        @staticmethod
        def monotonic() -> float:
            return clock[0]

    real_time = sweep_module.time
    sweep_module.time = Clock  # type: ignore[assignment]
    try:
        for part in sweep_module._blocks(plan, "auto", 0.25):
            sizes.append(part.size)
            clock[0] += max(seconds_per_point, 1e-9) * part.size
    finally:
        sweep_module.time = real_time
    return sizes


def numpy_noise_constants(acc):
    """What the bare baseline keeps of the stated accuracy at the sweep's settings (none set:
    the reference level, one reading, no speed word)."""
    return (
        acc.relative,
        acc.low_impedance,
        acc.high_impedance,
        acc.frequency_corner,
        acc.repeatability,
    )


def numpy_with_uncertainty(forms, u_grid, repeats, consts, f, zm):
    """Bare numpy, one chunk: standards and their Type A carried to ``f``, each reading's
    variance from the stated accuracy (Type B ``a/√3`` plus Type A or the stated repeatability
    of the mean), the open/short/load correction, its complex derivatives, ``Σ |g|²·σ²`` (each
    reading's R and X independent with equal variance, so ``J·σ²I·Jᵀ = |g|²σ²·I``), the
    expanded U (k = 2) and the flags of Ls, Rs, Q, |Z| and theta (U ≥ |value|, or Rs, Q below
    −U; overrange and invalid readings marked)."""
    rel, low, high, corner, rep = consts
    (o, s, ld, t), (i, j, w, exact) = numpy_standards(forms, f)
    kf = 1.0 + f / corner

    def variance(z, u, count=1):
        m = np.abs(z)
        floors = low + m**2 / high
        b = rel * kf * (m + floors) / math.sqrt(3.0)
        a = rep * kf * (m + floors) / math.sqrt(count) if u is None else u
        return a**2 + b**2

    def carried_u(u):
        a = u[i]
        return np.where(exact, a, a + w * (u[j] - a))

    v_o, v_s, v_l = (
        variance(z, carried_u(u), repeats) for z, u in zip((o, s, ld), u_grid, strict=True)
    )
    v_m = variance(zm, None)
    span = ld - s
    k = t * (o - ld) / span
    num, den = zm - s, o - zm
    ratio = num / den
    zx = k * ratio
    g_m = k * ((o - s) / den**2)
    g_s = -k / den + ratio * (t * (o - ld) / span**2)
    g_o = -k * num / den**2 + ratio * (t / span)
    g_l = ratio * (-t * (o - s) / span**2)
    var = (
        np.abs(g_m) ** 2 * v_m
        + np.abs(g_s) ** 2 * v_s
        + np.abs(g_o) ** 2 * v_o
        + np.abs(g_l) ** 2 * v_l
    )
    cov = np.zeros(f.shape + (2, 2))
    cov[:, 0, 0] = cov[:, 1, 1] = var
    u2 = 2.0 * np.sqrt(var)
    r, x = zx.real, zx.imag
    mag = np.abs(zx)
    omega = 2.0 * np.pi * f
    q = np.abs(x) / r
    bad = (u2 >= np.abs(r)) | (r < -u2)
    bad |= u2 / omega >= np.abs(x / omega)
    bad |= u2 * mag / r**2 >= q
    bad |= q < -(u2 * mag / r**2)
    bad |= u2 >= mag
    bad |= (180.0 / np.pi) * u2 / mag >= np.abs(np.degrees(np.angle(zx)))
    flags = np.where(bad, "beyond-accuracy", "").astype(object)
    flags[np.isinf(zm.real) | np.isinf(zm.imag)] = "overrange"
    flags[np.isnan(zm.real) | np.isnan(zm.imag)] = "invalid"
    return zx, cov, 2.0 * np.sqrt(np.stack([var, var], axis=-1)), flags


def same_cov(got, want, what: str) -> None:
    scale = np.max(np.abs(want), axis=(-2, -1))[:, None, None]
    worst = float(np.max(np.abs(got - want) / scale))
    if not worst <= COV_TOLERANCE:
        raise SystemExit(f"{what}: covariances differ by {worst:.2e} of their scale; not timed")


def pieces(n: int, where: str, seconds_per_point: float, repeat: int):
    """Times of run_sweep's per-chunk work with uncertainty, its bare baseline, the plain
    correction and its baseline, over the chunks ``_blocks`` makes."""
    grid, zo, zs, zl, zt, dut = fixture_case(n)
    f = sweep_frequencies(grid, where)
    zm = dut(f)
    edges = np.cumsum([0, *chunk_sizes(n, seconds_per_point)])
    chunks = [(f[a:b], zm[a:b]) for a, b in zip(edges[:-1], edges[1:], strict=True)]
    u_grid = tuple(TYPE_A * np.abs(z) + 1e-5 for z in (zo, zs, zl))
    fields = dict(open=zo, short=zs, load=zl, load_true=zt, repeats=REPEATS)
    fields.update(open_u=u_grid[0], short_u=u_grid[1], load_u=u_grid[2])
    refs = ReferenceSet(grid, **fields)
    forms = numpy_forms(grid, zo, zs, zl, zt)
    accuracy = load_dialect("simulated").accuracy
    consts = numpy_noise_constants(accuracy)
    uncertainty = PointUncertainty.for_meter(
        SimpleNamespace(dialect=SimpleNamespace(accuracy=accuracy))
    )
    sink = sweep_module._Sink(RecordingState(), refs, None, uncertainty)

    def tool_u():
        for fc, zc in chunks:
            sink(fc, zc)

    def bare_u():
        for fc, zc in chunks:
            numpy_with_uncertainty(forms, u_grid, REPEATS, consts, fc, zc)

    def tool():
        for fc, zc in chunks:
            with np.errstate(all="ignore"):
                np.asarray(refs.correct(fc, zc), dtype=complex)

    def bare():
        for fc, zc in chunks:
            numpy_apply(forms, fc, zc)

    what = f"pieces, {n} points {where}"
    for fc, zc in chunks:
        same(refs.correct(fc, zc), numpy_apply(forms, fc, zc), what)
        got = uncertainty.evaluate(fc, zc, refs)
        zx, cov, big_u, flags = numpy_with_uncertainty(forms, u_grid, REPEATS, consts, fc, zc)
        same(got.corrected, zx, what + " with U")
        same_cov(got.cov, cov, what + " with U")
        same(expanded(got.cov), big_u, what + " with U (expanded)")
        if not np.array_equal(got.flags, flags):
            raise SystemExit(f"{what}: the flags differ; not timed")
    sink.state.clear()
    return (
        len(chunks),
        *best_times_interleaved(tool_u, bare_u, repeat),
        *best_times_interleaved(tool, bare, repeat),
    )


class RecordingState:
    """What ``_Sink`` hands the live view, kept as references only (the state's own cost belongs
    to the live view's row, not this one)."""

    def __init__(self) -> None:
        self.added: list = []

    def add(self, f, z, corrected, values) -> None:
        self.added.append(values)
        if len(self.added) > 64:
            self.added.clear()

    def clear(self) -> None:
        self.added.clear()


def _ms(seconds: float) -> str:
    return f"{seconds * 1e3:9.3f} ms"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, fewer rounds")
    args = parser.parse_args()
    sizes = [201, 1_601] if args.quick else [201, 1_601, 20_001]
    rounds = 5 if args.quick else 15
    print(f"numpy {np.__version__}; best of {rounds} rounds per entry, the tool's and the "
          "baseline's interleaved")  # fmt: skip

    print("\nbuild and apply (a new ReferenceSet, one correct of the whole sweep)")
    print(f"  {'points':>7} {'where':<9}{'tool':>13}{'numpy':>13}{'ratio':>8}")
    worst_build = 0.0
    for n in sizes:
        for where in ("between", "on grid"):
            t_tool, t_bare = build_and_apply(n, where, rounds)
            worst_build = max(worst_build, t_tool / t_bare)
            print(f"  {n:>7,} {where:<9}{_ms(t_tool)}{_ms(t_bare)}{t_tool / t_bare:7.2f}x")

    print("\nin pieces (chunks as run_sweep's _blocks makes them; set built once)")
    print(
        f"  {'points':>7} {'where':<9}{'meter':>9}{'chunks':>7}{'with U':>13}{'numpy':>13}"
        f"{'ratio':>8}{'plain':>13}{'numpy':>13}{'ratio':>8}"
    )
    worst_pieces = worst_plain = 0.0
    for n in sizes:
        for where in ("between", "on grid"):
            for per_point, label in ((0.005, "5 ms/pt"), (0.0, "at once")):
                count, t_u, b_u, t_tool, t_bare = pieces(n, where, per_point, rounds)
                worst_pieces = max(worst_pieces, t_u / b_u)
                worst_plain = max(worst_plain, t_tool / t_bare)
                print(
                    f"  {n:>7,} {where:<9}{label:>9}{count:>7}{_ms(t_u)}{_ms(b_u)}"
                    f"{t_u / b_u:7.2f}x{_ms(t_tool)}{_ms(t_bare)}{t_tool / t_bare:7.2f}x"
                )
    print()
    goals.report(
        goals.Goal(
            what="open/short/load: build and apply (worst size)",
            figure=worst_build,
            target=2.0,
            unit="x",
            baseline="bare numpy recomputing everything",
        )
    )
    goals.report(
        goals.Goal(
            what="correction of a sweep applied in pieces, as run_sweep does (worst case)",
            figure=worst_pieces,
            target=2.0,
            unit="x",
            baseline="numpy on the same pieces (correction, uncertainty and flags)",
        )
    )
    print(
        f"for information: the plain correction in the same pieces (run_sweep without "
        f"uncertainty), worst {worst_plain:.2f}x numpy"
    )


if __name__ == "__main__":
    main()
