"""Example bias sweeps and temperature-rise runs for the store, export and picture tests.

The chokes are our own invention: a soft-saturating inductor whose inductance falls as
L(I) = L0 / (1 + (I/I1)²), measured at 100 kHz with a series resistance, and a winding whose
resistance rises toward a settled value with one time constant. The rise of each reading is
the resistance method of IEC 60076-2 with copper's 234.5 °C (from memory), computed here from
that formula, not by the program.
"""

from __future__ import annotations

import numpy as np

from acquire.bias.records import (
    COMPLETE,
    BiasCurve,
    BiasSettings,
    BiasSweepResult,
    RiseResult,
    RiseSettings,
)
from acquire.bias.saturation import DropCurrent, drop_currents

L0, I1, R_SERIES, FREQUENCY = 47e-6, 4.0, 0.35, 100e3
#: A DUT name meant to break a CSV file, a markup parser or a terminal if handled carelessly.
HOSTILE = 'choke, "7"\n# status: forged\r\n[bold red]x[/] <b>&amp;</b> $L_0$ \u2028end'


def bias_settings(dut: str = "choke 7", reference_set_id: int | None = None) -> BiasSettings:
    return BiasSettings(
        currents=np.linspace(0.0, 6.0, 13),
        frequency=FREQUENCY,
        drops=(0.1, 0.2, 0.3, 0.7),
        maximum=6.5,
        step=0.25,
        dwell=0.05,
        energy=0.5 * L0 * 6.0**2,
        confirmed="unattended",
        supply="simulated source SN 12",
        dut=dut,
        fixture="bias fixture A",
        meter="simulated meter 1.0",
        reference_set_id=reference_set_id,
    )


def bias_curve(corrected: bool = True) -> BiasCurve:
    """The invented choke's curve: 13 steps from 0 to 6 A, applied 0.2 % below the setpoint."""
    setpoint = np.linspace(0.0, 6.0, 13)
    applied = setpoint * 0.998
    ls = L0 / (1.0 + (applied / I1) ** 2)
    w = 2 * np.pi * FREQUENCY
    z = R_SERIES + 1j * w * ls
    raw = z + (0.012 + 1j * w * 25e-9)
    rs = z.real.copy()
    q = w * ls / rs
    return BiasCurve(setpoint, applied, raw, z if corrected else None, ls, rs, q)


def bias_result(dut: str = "choke 7", corrected: bool = True) -> BiasSweepResult:
    settings = bias_settings(dut)
    curve = bias_curve(corrected)
    drops = drop_currents(curve.applied, curve.ls, settings.drops)
    return BiasSweepResult(settings, curve, drops, COMPLETE, note="", started="", ended="")


def expected_drop(drop: float) -> float:
    """The invented curve's own current at ``drop``: L0/(1 + (I/I1)²) = (1 − d)·L0 solved for I
    (computed)."""
    return I1 * float(np.sqrt(1.0 / (1.0 - drop) - 1.0))


def rise_result(dut: str = "choke 7", readings: int = 12) -> RiseResult:
    """A run holding 3 A: R = Rc·(1 + a·(1 − e^(−t/τ))), rise by the resistance method."""
    r_cold, t_cold, ambient = 0.0825, 23.0, 23.0
    t = np.arange(readings) * 30.0
    resistance = r_cold * (1.0 + 0.155 * (1.0 - np.exp(-t / 90.0)))
    rise = resistance / r_cold * (234.5 + t_cold) - 234.5 - ambient
    settings = RiseSettings(
        current=3.0,
        ambient=ambient,
        time_limit=900.0,
        settle_window=60.0,
        settle_tolerance=0.5,
        target_rise=40.0,
        dut=dut,
        meter="simulated meter 1.0",
        supply="meter's own bias",
    )
    return RiseResult(
        settings=settings,
        r_cold=r_cold,
        t_cold=t_cold,
        current=3.1,
        times=t,
        resistance=resistance,
        rise=rise,
        settled=True,
        status=COMPLETE,
        steps=((3.0, 37.6), (3.1, 39.9)),
        note="",
    )


__all__ = ["DropCurrent", "HOSTILE", "bias_result", "expected_drop", "rise_result"]
