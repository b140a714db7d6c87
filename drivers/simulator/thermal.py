"""A warming winding: first-order thermal model with copper's resistance law (SI units, °C).

Copper's resistance follows (the resistance method of IEC 60076-2, inferred zero-resistance
temperature 234.5 °C for copper; from memory)::

    R(T) = R_ref · (234.5 + T) / (234.5 + T_ref)

The winding (temperature ``T``) dissipates ``P = I²·R(T)`` and loses heat to the ambient
``T_a`` through a thermal resistance ``R_th`` (K/W) with a time constant ``τ`` (s)::

    dT/dt = (P·R_th − (T − T_a)) / τ

Because ``R(T)`` is linear in ``T`` the equation is linear, ``dT/dt = a·T + b`` with
``g = I²·R_th·R_ref/(234.5 + T_ref)``, ``a = (g − 1)/τ`` and ``b = (g·234.5 + T_a)/τ``. For a
current held constant it has the exact solution (computed)::

    T(t) = T0 + (a·T0 + b) · (e^(a t) − 1)/a

which :func:`advance` applies between changes of the current: the simulator's integration is
exact up to floating-point rounding (no step error). The steady state (``g < 1``) is
``T_ss = −b/a``; the rise over ambient solves ``ΔT = I²·R_th·R(T_a + ΔT)``, linear in ``ΔT``::

    ΔT_ss = g·(234.5 + T_a) / (1 − g)

At ``g ≥ 1`` the winding would heat without bound (its loss grows faster than its cooling);
the simulator stops it at :data:`RUNAWAY_LIMIT`.
"""

from __future__ import annotations

import math

#: Inferred zero-resistance temperature of copper, °C (IEC 60076-2, resistance method; from
#: memory).
COPPER_ZERO = 234.5
#: Where a runaway winding stops warming in the simulation, °C (its insulation is long gone).
RUNAWAY_LIMIT = 400.0


def copper_resistance(r_ref: float, t_ref: float, t: float) -> float:
    """Resistance (ohm) at ``t`` °C of a copper winding of ``r_ref`` ohm at ``t_ref`` °C."""
    return r_ref * (COPPER_ZERO + t) / (COPPER_ZERO + t_ref)


def heating_ratio(current: float, r_ref: float, t_ref: float, r_th: float) -> float:
    """``g = I²·R_th·R_ref/(234.5 + T_ref)``: the rise per kelvin of (234.5 + T) (1)."""
    return current * current * r_th * r_ref / (COPPER_ZERO + t_ref)


def steady_state_rise(
    current: float, r_ref: float, t_ref: float, t_ambient: float, r_th: float
) -> float:
    """Steady temperature rise (K) over ambient at a constant ``current`` (A).

    ``ΔT = g·(234.5 + T_a)/(1 − g)``; ``inf`` when ``g ≥ 1`` (thermal runaway).
    """
    g = heating_ratio(current, r_ref, t_ref, r_th)
    if g >= 1.0:
        return math.inf
    return g * (COPPER_ZERO + t_ambient) / (1.0 - g)


def advance(
    t0: float,
    seconds: float,
    current: float,
    r_ref: float,
    t_ref: float,
    t_ambient: float,
    r_th: float,
    tau: float,
) -> float:
    """Winding temperature (°C) ``seconds`` after it was ``t0`` with ``current`` held (exact).

    Capped at :data:`RUNAWAY_LIMIT`.
    """
    if seconds <= 0.0:
        return t0
    g = heating_ratio(current, r_ref, t_ref, r_th)
    a = (g - 1.0) / tau
    b = (g * COPPER_ZERO + t_ambient) / tau
    growth = seconds if a == 0.0 else math.expm1(min(a * seconds, 700.0)) / a
    return min(t0 + (a * t0 + b) * growth, RUNAWAY_LIMIT)
