"""Speed of open-short-load correction: this tool, bare numpy, and scikit-rf's OnePort.

Run ``python benchmarks/bench_compensation.py [--points 2000 100000] [--repeat 5]`` (by default
one full list of the simulated meter, ``drivers.simulator.LIST_MAX``, and a long sweep). For each
size, one run measures, on the same readings:

- ``tool correct (grid)``: ``ReferenceSet.correct`` at the grid frequencies (the set is built
  once; its correction is computed on the first call and reused, as in a production run);
- ``tool build + correct``: a new ``ReferenceSet`` from the arrays, then one ``correct``;
- ``tool correct (between)``: ``correct`` at frequencies between the grid points (interpolation);
- ``numpy closed form``: ``Zt*(Zo - Zl)*(Zm - Zs)/((Zl - Zs)*(Zo - Zm))`` written out by hand;
- ``scikit-rf OnePort``: ``OnePort(measured, ideals)``, ``run()`` and ``apply_cal(dut)`` on
  networks built beforehand (building them and converting Z to reflection is not timed).

Each time is the best of ``--repeat`` rounds, each round long enough (at least 0.1 s) to time
reliably. Ratios are against the numpy closed form and, for scikit-rf, how many times slower
it is than the tool. The error column is the largest relative error against the DUT's true
impedance; the fixture is a random T section (series R-L, shunt G-C, series R-L) with a 100 ohm
load standard, and the DUT a 47 uH coil with 2 pF of winding capacitance (self-resonant near
16 MHz, where it reaches megohms, far above the fixture's open). Between grid points a T section
is not exactly interpolated, and that small error is amplified where the DUT breaks the 10x rule
(common practice, no published source) at its resonance; the last line of each table gives the
error between grid points where the rule holds.
"""

from __future__ import annotations

import argparse
import math
import time
import warnings
from collections.abc import Callable

import numpy as np

from acquire.compensation import ReferenceSet
from drivers.simulator import LIST_MAX

Z0 = 50.0
Z_LOAD = 100.0


def best_time(fn: Callable[[], object], repeat: int, min_round: float = 0.1) -> float:
    """Best seconds per call over ``repeat`` rounds of enough calls to last ``min_round``."""
    fn()
    loops, start = 1, time.perf_counter()
    fn()
    once = time.perf_counter() - start
    loops = max(1, math.ceil(min_round / max(once, 1e-9)))
    best = math.inf
    for _ in range(repeat):
        start = time.perf_counter()
        for _ in range(loops):
            fn()
        best = min(best, (time.perf_counter() - start) / loops)
    return best


def bench_case(n: int, seed: int = 0):
    """Grid, standards' readings, DUT readings (on and between grid points) and the truth."""
    rng = np.random.default_rng(seed)
    f = np.logspace(2, math.log10(3e7), n)
    mid = np.sqrt(f[1:] * f[:-1])
    r1, l1 = rng.uniform(0.01, 0.5), rng.uniform(10e-9, 100e-9)
    g, c = rng.uniform(1e-9, 1e-7), rng.uniform(2e-12, 10e-12)
    r2, l2 = rng.uniform(0.001, 0.05), rng.uniform(1e-9, 10e-9)

    def chain(freq):
        w = 2 * np.pi * freq
        z1, y, z2 = r1 + 1j * w * l1, g + 1j * w * c, r2 + 1j * w * l2
        return 1 + z1 * y, z1 + z2 + z1 * y * z2, y, 1 + y * z2

    def read(freq, zx):
        a, b, cc, d = chain(freq)
        return a / cc if zx is None else (a * zx + b) / (cc * zx + d)

    def coil(freq):
        w = 2 * np.pi * freq
        return 1 / (1 / (0.8 + 1j * w * 47e-6) + 1j * w * 2e-12)

    standards = {
        "open": read(f, None),
        "short": read(f, 0.0),
        "load": read(f, np.full(n, Z_LOAD + 0j)),
    }
    return f, mid, standards, read(f, coil(f)), read(mid, coil(mid)), coil(f), coil(mid)


def rel_error(got: np.ndarray, true: np.ndarray) -> float:
    return float(np.max(np.abs(got / true - 1)))


def skrf_setup(f, standards, zm):
    import skrf

    def net(z):
        return skrf.Network(frequency=frequency, s=((z - Z0) / (z + Z0)).reshape(-1, 1, 1), z0=Z0)

    frequency = skrf.Frequency.from_f(f, unit="hz")
    media = skrf.media.DefinedGammaZ0(frequency, z0=Z0)
    ideals = [media.open(), media.short(), media.load((Z_LOAD - Z0) / (Z_LOAD + Z0))]
    measured = [net(standards[name]) for name in ("open", "short", "load")]
    dut = net(zm)

    def run():
        cal = skrf.calibration.OnePort(measured=measured, ideals=ideals)
        cal.run()
        s = cal.apply_cal(dut).s[:, 0, 0]
        return Z0 * (1 + s) / (1 - s)

    return run


def measure(n: int, repeat: int) -> list[tuple[str, float, float]]:
    f, mid, std, zm, zm_mid, true, true_mid = bench_case(n)
    zo, zs, zl = std["open"], std["short"], std["load"]
    zt = np.full(n, Z_LOAD + 0j)
    refs = ReferenceSet(f, open=zo, short=zs, load=zl, load_true=Z_LOAD)

    def bare():
        return zt * (zo - zl) * (zm - zs) / ((zl - zs) * (zo - zm))

    def build_and_correct():
        return ReferenceSet(f, open=zo, short=zs, load=zl, load_true=zt).correct(f, zm)

    moved_open = refs.at(mid).open
    measurable = (np.abs(moved_open) > 10 * np.abs(true_mid)) & (
        np.abs(true_mid) > 10 * np.abs(zs[1:])
    )
    between = np.abs(refs.correct(mid, zm_mid) / true_mid - 1)[measurable]
    rows = [("error between grid points within the 10x rule", math.nan, float(between.max()))]
    cases = [
        ("numpy closed form", bare, true),
        ("tool correct (grid)", lambda: refs.correct(f, zm), true),
        ("tool build + correct", build_and_correct, true),
        ("tool correct (between)", lambda: refs.correct(mid, zm_mid), true_mid),
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cases.append(("scikit-rf OnePort", skrf_setup(f, std, zm), true))
        for name, fn, truth in cases:
            seconds = best_time(fn, repeat if name != "scikit-rf OnePort" else max(2, repeat // 2))
            rows.append((name, seconds, rel_error(fn(), truth)))
    return rows


def table(n: int, rows: list[tuple[str, float, float]]) -> str:
    (note, _, between), *rows = rows
    base = dict((name, t) for name, t, _ in rows)
    bare, tool = base["numpy closed form"], base["tool correct (grid)"]
    lines = [
        f"{n:,} points",
        f"  {'':24}{'time':>12}{'vs numpy':>10}{'vs tool':>10}{'max rel. error':>16}",
    ]
    for name, t, err in rows:
        lines.append(f"  {name:24}{_ms(t):>12}{t / bare:>9.2f}x{t / tool:>9.1f}x{err:>16.2e}")
    lines.append(
        f"  goals: tool/numpy = {tool / bare:.2f} (at most 3), "
        f"scikit-rf/tool = {base['scikit-rf OnePort'] / tool:,.0f} (at least 100)"
    )
    lines.append(f"  {note}: {between:.2e}")
    return "\n".join(lines)


def _ms(seconds: float) -> str:
    return f"{seconds * 1e3:.3f} ms" if seconds < 1 else f"{seconds:.3f} s"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--points", type=int, nargs="+", default=[LIST_MAX, 100_000])
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()
    print(f"numpy {np.__version__}; best of {args.repeat} rounds per entry")
    for n in args.points:
        print()
        print(table(n, measure(n, args.repeat)))


if __name__ == "__main__":
    main()
