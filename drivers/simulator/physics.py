"""The simulated meter's physics: a DUT's impedance and the fixture between it and the meter.

Pure functions of numpy arrays in SI units (hertz, henry, ohm, farad, siemens, metre, volt).
Nothing here knows about SCPI, profiles or sockets; the meter's own errors (noise, calibration)
are in :mod:`drivers.simulator.reading_error`.

The coil model is a series branch (the winding and, optionally, its core) in parallel with the
winding's self-capacitance ``C``. Its self-resonance is where the phase crosses zero, near
``1/(2π√(LC))``.

The winding is described in one of two ways:

- **round wire** (``wire_radius`` given): the exact solution for a straight round wire carrying
  alternating current, with the current density ``J(r) ∝ J0(kr)``, ``k = (1 − j)/δ`` and skin
  depth ``δ = √(ρ/(π f µ0))``. The wire's internal impedance over its DC resistance is::

      Z_wire / R_dc = (ka/2) · J0(ka) / J1(ka)

  (S. Ramo, J. R. Whinnery, T. Van Duzer, *Fields and Waves in Communication Electronics*,
  3rd ed., Wiley 1994, section 5.5, "impedance of round wires"). Its real part is the AC
  resistance ratio; its imaginary part is the internal reactance, ``ωL_int`` with
  ``L_int(0) = µ0·l/(8π)`` at DC, falling as the current crowds to the surface. The Bessel
  functions of complex argument are :func:`scipy.special.jve` (exponentially scaled, so the
  ratio does not overflow for thick wires at high frequency).

  Neighbouring turns add loss (proximity effect). We model it, by our own choice, as a
  multiplier ``p`` of the excess resistance: ``R = R_dc·(1 + p·(Re(Z_wire/R_dc) − 1))``, which
  keeps the isolated wire's frequency dependence (``f²`` rise below the corner, ``√f`` above) and
  scales its size; ``p = 1`` is the isolated wire. The internal reactance is not scaled.
- **resistance law** (no wire radius): ``R_ac(f) = R_dc · (1 + (f/f_c)²)^(n/2)``, flat below
  the corner ``f_c`` and growing as ``f^n`` above it; no internal inductance.

The core (optional) turns ``jωL`` into ``jωL·µ(f)`` with the relative complex permeability,
normalised to 1 at DC::

    µ(f) = (1 − j·tan δ0) / (1 + j·f/f_r)

a constant loss tangent ``tan δ0`` (the hysteresis-like part) times a single Debye relaxation
of frequency ``f_r`` (P. Debye, *Polar Molecules*, 1929; for ferrites J. L. Snoek, Physica 14,
207 (1948)): the loss tangent grows with frequency, ``tan δ ≈ tan δ0 + f/f_r`` well below
``f_r``, while ``µ'`` falls as ``1/(1 + (f/f_r)²)``. Without ``f_r`` the tangent is constant.

The fixture is a linear two-port between the meter's terminals and the DUT, built from (meter side
first) an optional lossless transmission line, the leads' series residual ``R_s + jωL_s`` and the
stray shunt ``G_p + jωC_p`` across the DUT's terminals. The meter sees
``Z_in = (A·Z + B)/(C·Z + D)`` of the cascaded ABCD matrix loaded by the DUT.
"""

from __future__ import annotations

import numpy as np

#: Speed of light in vacuum, m/s (exact, SI definition).
SPEED_OF_LIGHT = 299_792_458.0
#: Magnetic constant µ0, H/m (CODATA 2018 recommended value).
MU0 = 1.25663706212e-6


def omega(f: np.ndarray | float) -> np.ndarray:
    """Angular frequency ``2πf`` in rad/s."""
    return 2.0 * np.pi * np.asarray(f, dtype=float)


def ac_resistance(
    f: np.ndarray | float,
    dc_resistance: float,
    corner_frequency: float | None = None,
    exponent: float = 0.5,
) -> np.ndarray:
    """Winding resistance at ``f``: ``R_dc·(1 + (f/f_c)²)^(n/2)``, or ``R_dc`` without a corner."""
    f = np.asarray(f, dtype=float)
    if corner_frequency is None:
        return np.full_like(f, dc_resistance)
    return dc_resistance * (1.0 + (f / corner_frequency) ** 2) ** (exponent / 2.0)


def round_wire_ratio(f: np.ndarray | float, radius: float, resistivity: float) -> np.ndarray:
    """``Z_wire/R_dc = (ka/2)·J0(ka)/J1(ka)`` of a round wire, ``k = (1 − j)/δ`` (complex)."""
    from scipy.special import jve  # imported here: most readings need no scipy at start-up

    f = np.asarray(f, dtype=float)
    x = radius * np.sqrt(np.pi * f * MU0 / resistivity)
    ka = (1.0 - 1.0j) * x
    small = x < 1e-3
    safe = np.where(small, 1.0, ka)
    exact = safe / 2.0 * jve(0, safe) / jve(1, safe)
    return np.where(small, 1.0 + 0.25j * x**2, exact)


def core_permeability(
    f: np.ndarray | float, loss_tangent: float = 0.0, relaxation_frequency: float | None = None
) -> np.ndarray:
    """Relative complex permeability of the core, 1 at DC: ``(1 − j tanδ0)/(1 + j f/f_r)``."""
    f = np.asarray(f, dtype=float)
    mu = np.full(f.shape, 1.0 - 1j * loss_tangent)
    if relaxation_frequency is not None:
        mu = mu / (1.0 + 1j * f / relaxation_frequency)
    return mu


def winding_impedance(
    f: np.ndarray | float,
    dc_resistance: float,
    corner_frequency: float | None = None,
    exponent: float = 0.5,
    wire_radius: float | None = None,
    resistivity: float | None = None,
    proximity_factor: float = 1.0,
) -> np.ndarray:
    """The wire's own impedance (ohm): resistance and internal reactance (see the module doc)."""
    f = np.asarray(f, dtype=float)
    if wire_radius is None:
        return ac_resistance(f, dc_resistance, corner_frequency, exponent).astype(complex)
    if resistivity is None:
        raise ValueError("a round wire (wire_radius) needs its resistivity")
    ratio = round_wire_ratio(f, wire_radius, resistivity)
    return dc_resistance * (1.0 + proximity_factor * (ratio.real - 1.0) + 1j * ratio.imag)


def coil_impedance(
    f: np.ndarray | float,
    inductance: float,
    dc_resistance: float,
    capacitance: float = 0.0,
    corner_frequency: float | None = None,
    exponent: float = 0.5,
    core_loss_tangent: float = 0.0,
    *,
    wire_radius: float | None = None,
    resistivity: float | None = None,
    proximity_factor: float = 1.0,
    core_relaxation_frequency: float | None = None,
) -> np.ndarray:
    """Impedance of a coil: ``(Z_wire(f) + jωL·µ(f)) ∥ 1/(jωC)``.

    ``inductance`` is the external inductance (the flux outside the wire) at DC; with a round
    wire the low-frequency inductance is ``L + µ0·l/(8π)`` (see :func:`internal_inductance`).
    """
    w = omega(f)
    series = winding_impedance(
        f, dc_resistance, corner_frequency, exponent, wire_radius, resistivity, proximity_factor
    ) + 1j * w * inductance * core_permeability(f, core_loss_tangent, core_relaxation_frequency)
    return series / (1.0 + 1j * w * capacitance * series)


def internal_inductance(dc_resistance: float, wire_radius: float, resistivity: float) -> float:
    """DC internal inductance ``µ0·l/(8π)`` of a round wire of length ``l = R_dc·πa²/ρ`` (H)."""
    length = dc_resistance * np.pi * wire_radius**2 / resistivity
    return float(MU0 * length / (8.0 * np.pi))


def phase_zero(impedance, f_low: float, f_high: float, points: int = 4000) -> float | None:
    """Lowest frequency in ``[f_low, f_high]`` where ``impedance(f)``'s reactance turns from
    positive to negative (the self-resonance), to 1e-12 relative; None if it does not."""
    from scipy.optimize import brentq  # imported here: only the true values need it

    grid = np.geomspace(f_low, f_high, points)
    x = impedance(grid).imag
    change = np.flatnonzero((x[:-1] > 0) & (x[1:] <= 0))
    if change.size == 0:
        return None
    i = int(change[0])
    return float(
        brentq(
            lambda v: float(impedance(np.array([v]))[0].imag),
            grid[i],
            grid[i + 1],
            xtol=1e-12 * grid[i],
            rtol=1e-13,
        )
    )


def resistor_impedance(
    f: np.ndarray | float,
    resistance: float,
    series_inductance: float = 0.0,
    parallel_capacitance: float = 0.0,
) -> np.ndarray:
    """Impedance of a resistor with a series inductance, both shunted by a capacitance."""
    w = omega(f)
    series = resistance + 1j * w * series_inductance
    return series / (1.0 + 1j * w * parallel_capacitance * series)


def capacitor_impedance(
    f: np.ndarray | float,
    capacitance: float,
    series_resistance: float = 0.0,
    series_inductance: float = 0.0,
) -> np.ndarray:
    """Impedance of a capacitor with its series resistance (ESR) and series inductance (ESL)."""
    w = omega(f)
    return series_resistance + 1j * w * series_inductance + 1.0 / (1j * w * capacitance)


def open_impedance(f: np.ndarray | float) -> np.ndarray:
    """An ideal open: infinite impedance at every frequency."""
    return np.full(np.shape(f), complex(np.inf, 0.0))


def short_impedance(f: np.ndarray | float) -> np.ndarray:
    """An ideal short: zero impedance at every frequency."""
    return np.zeros(np.shape(f), dtype=complex)


def series_abcd(z: np.ndarray) -> np.ndarray:
    """ABCD matrices (shape ``(N, 2, 2)``) of a series impedance ``z``."""
    z = np.asarray(z, dtype=complex)
    m = np.zeros(z.shape + (2, 2), dtype=complex)
    m[..., 0, 0] = 1.0
    m[..., 0, 1] = z
    m[..., 1, 1] = 1.0
    return m


def shunt_abcd(y: np.ndarray) -> np.ndarray:
    """ABCD matrices of a shunt admittance ``y``."""
    y = np.asarray(y, dtype=complex)
    m = np.zeros(y.shape + (2, 2), dtype=complex)
    m[..., 0, 0] = 1.0
    m[..., 1, 0] = y
    m[..., 1, 1] = 1.0
    return m


def line_abcd(
    f: np.ndarray | float, impedance: float, length: float, velocity_factor: float
) -> np.ndarray:
    """ABCD matrices of a lossless line: ``[[cos βl, jZ0 sin βl], [j sin βl / Z0, cos βl]]``."""
    beta_l = omega(f) * length / (velocity_factor * SPEED_OF_LIGHT)
    m = np.empty(beta_l.shape + (2, 2), dtype=complex)
    m[..., 0, 0] = np.cos(beta_l)
    m[..., 0, 1] = 1j * impedance * np.sin(beta_l)
    m[..., 1, 0] = 1j * np.sin(beta_l) / impedance
    m[..., 1, 1] = np.cos(beta_l)
    return m


def fixture_abcd(
    f: np.ndarray | float,
    series_resistance: float = 0.0,
    series_inductance: float = 0.0,
    shunt_capacitance: float = 0.0,
    shunt_conductance: float = 0.0,
    line: tuple[float, float, float] | None = None,
) -> np.ndarray:
    """The fixture's two-port, meter side first: line, series residual, shunt stray.

    ``line`` is ``(Z0, length, velocity factor)`` or None.
    """
    f = np.atleast_1d(np.asarray(f, dtype=float))
    w = omega(f)
    m = series_abcd(series_resistance + 1j * w * series_inductance) @ shunt_abcd(
        shunt_conductance + 1j * w * shunt_capacitance
    )
    if line is not None:
        m = line_abcd(f, *line) @ m
    return m


def input_impedance(abcd: np.ndarray, z_load: np.ndarray) -> np.ndarray:
    """Impedance seen at port 1 of ``abcd`` loaded by ``z_load`` (which may be ``inf`` or 0).

    ``(A·Z + B)/(C·Z + D)``; for an infinite load the limit ``A/C``. Where the result has no
    finite value (an open seen through a fixture with no shunt path) it is ``inf``; a ``nan``
    load (nothing connected) stays ``nan``.
    """
    a, b, c, d = abcd[..., 0, 0], abcd[..., 0, 1], abcd[..., 1, 0], abcd[..., 1, 1]
    z = np.broadcast_to(np.asarray(z_load, dtype=complex), a.shape)
    is_open = np.isinf(z)
    finite = np.where(is_open, 0.0, z)
    with np.errstate(divide="ignore", invalid="ignore"):
        loaded = (a * finite + b) / (c * finite + d)
        opened = a / c
    out = np.where(is_open, opened, loaded)
    return np.where(np.isfinite(out) | np.isnan(z), out, complex(np.inf, np.inf))


def dc_resistance_seen(
    dut_dc_resistance: float, series_resistance: float, shunt_conductance: float
) -> float:
    """DC resistance at the meter: leads in series with the DUT, shunted by the stray conductance.

    The fixture's line is lossless, so at DC it is a plain wire. ``inf`` for an open DUT with no
    shunt conductance.
    """
    if np.isinf(dut_dc_resistance):
        return np.inf if shunt_conductance == 0.0 else series_resistance + 1.0 / shunt_conductance
    return series_resistance + dut_dc_resistance / (1.0 + shunt_conductance * dut_dc_resistance)
