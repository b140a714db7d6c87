"""Closed-form fixture compensation: the correction for each set of standards and its inverse.

Notation (complex impedances in ohm, one value per frequency, all arrays of one shape):
``Zm`` the meter's reading of the DUT through the fixture, ``Zx`` the DUT itself, ``Zo``, ``Zs``,
``Zl`` the readings with the fixture open, shorted and holding the load standard, ``Zt`` the load
standard's true impedance.

The fixture model
-----------------
Any linear, passive fixture between the meter's terminals and the DUT is a two-port; the meter
then reads a bilinear (Moebius) function of the DUT's impedance,
``Zm = (A*Zx + B)/(C*Zx + D)`` with the fixture's ABCD (chain) parameters. A bilinear map has
three free complex parameters, so three standards of known impedance fix it exactly
(open-short-load); fewer standards fix it only under an assumption about the fixture, stated
below for each method. Every correction here can be written as

``Zx = K*(Zm - Zs)/(Zo - Zm)``  (with an open reading), or  ``Zx = K*(Zm - Zs)``  (without),

with ``Zs = 0`` when no short was taken. ``K`` is the only thing that depends on the method:

========================  ===========================  ===========================================
method                    K                            assumption about the fixture
========================  ===========================  ===========================================
``open-short-load``       ``Zt*(Zo - Zl)/(Zl - Zs)``   none (exact for any linear two-port)
``open-short``            ``Zo - Zs``                  series residual ``Zs`` at the meter side,
                                                       then shunt stray ``Yo = 1/(Zo - Zs)``
                                                       across the DUT (an "L" section)
``open``                  ``Zo``                       shunt stray only, no series residual
``short-load``            ``Zt/(Zl - Zs)``             an ideal open (no shunt stray), a series
                                                       residual and a gain error
``short``                 ``1``                        series residual only: ``Zx = Zm - Zs``
``open-load``             ``Zt*(Zo - Zl)/Zl``          an ideal short (no series residual)
``load``                  ``Zt/Zl``                    a pure gain error: ``Zx = Zm*Zt/Zl``
========================  ===========================  ===========================================

``open-short-load`` is the one-port three-term error model: the map sends the reading of the
short to 0, of the open to infinity and of the load to ``Zt``, and a Moebius map is fixed by
three points. Each shorter method is the same formula with the missing standard replaced by its
ideal reading (``Zo -> inf``, ``Zs -> 0``) or, for ``open-short``, with the load replaced by the
one the L-section model predicts. ``short`` is the crude "subtract the lead impedance" case,
exact when the fixture is only a series impedance (leads with negligible stray capacitance).

Numerics
--------
A reading that is not finite gives a result that is not finite; a reading equal to the open
reading (an open DUT) has no finite corrected value. No warning is raised for either.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class Correction:
    """The bilinear correction ``Zx = k*(Zm - zs)/(zo - Zm)`` on one frequency grid.

    ``k`` None means 1, ``zs`` None means 0, ``zo`` None means no open (the map is then the affine
    ``Zx = k*(Zm - zs)``). Arrays have the grid's shape; :meth:`take` picks grid points.
    """

    k: np.ndarray | None
    zs: np.ndarray | None
    zo: np.ndarray | None

    def apply(self, zm: np.ndarray) -> np.ndarray:
        """The DUT's impedance from its reading ``zm`` (see the module docstring)."""
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            x = zm if self.zs is None else zm - self.zs
            if self.zo is not None:
                x = x / (self.zo - zm)
            return x if self.k is None else self.k * x

    def reading(self, zx: np.ndarray) -> np.ndarray:
        """What the meter reads through the fixture for a DUT of impedance ``zx``: the inverse map.

        With an open: ``Zm = (Zx*Zo + K*Zs)/(Zx + K)`` (``Zm = Zo`` for an infinite ``Zx``);
        without: ``Zm = Zx/K + Zs``.
        """
        k = 1.0 if self.k is None else self.k
        zs = 0.0 if self.zs is None else self.zs
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            if self.zo is None:
                return zx / k + zs
            zm = (zx * self.zo + k * zs) / (zx + k)
            return np.where(np.isinf(zx), self.zo, zm)

    def take(self, index: np.ndarray) -> Correction:
        """The same correction at grid points ``index``."""
        return Correction(*(None if a is None else a[index] for a in (self.k, self.zs, self.zo)))


def method_name(open_: bool, short: bool, load: bool) -> str:
    """The method's name from the standards present: ``"open-short-load"``, ..., ``"none"``."""
    parts = [name for name, have in (("open", open_), ("short", short), ("load", load)) if have]
    return "-".join(parts) or "none"


def correction(
    open_: np.ndarray | None,
    short: np.ndarray | None,
    load: np.ndarray | None,
    load_true: np.ndarray | None,
) -> Correction:
    """Build the correction for the standards given (None where a standard was not taken).

    ``load`` needs ``load_true``. At least one standard must be given. ``K`` follows the table in
    the module docstring.
    """
    if open_ is None and short is None and load is None:
        raise ValueError("no standard given")
    if load is not None and load_true is None:
        raise ValueError("a load reading needs the load's true impedance")
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if load is not None:
            span = load if short is None else load - short
            k = load_true / span if open_ is None else load_true * (open_ - load) / span
        elif open_ is not None:
            k = open_ if short is None else open_ - short
        else:
            k = None
    return Correction(k=k, zs=short, zo=open_)


def correct_short(zm, zs):
    """Short compensation: ``Zx = Zm - Zs`` (series residual only)."""
    return np.asarray(zm) - zs


def correct_open_short(zm, zo, zs):
    """Open-short compensation: ``Zx = (Zm - Zs)*(Zo - Zs)/(Zo - Zm)``.

    Exact for a fixture that is a series residual ``Zs`` followed, on the DUT side, by a shunt
    admittance ``Yo = 1/(Zo - Zs)``: then ``Zm - Zs = 1/(Yo + 1/Zx)``, which solved for ``Zx`` gives
    ``Zx = (Zm - Zs)/(1 - (Zm - Zs)*Yo)``, the form above.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return (np.asarray(zm) - zs) * (zo - zs) / (zo - zm)


def correct_open_short_load(zm, zo, zs, zl, zt):
    """Open-short-load compensation: ``Zx = Zt*(Zo - Zl)*(Zm - Zs)/((Zl - Zs)*(Zo - Zm))``.

    The unique bilinear map with ``Zs -> 0``, ``Zo -> inf`` and ``Zl -> Zt``, exact for any linear
    two-port fixture (see the module docstring).
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        return zt * (zo - zl) * (np.asarray(zm) - zs) / ((zl - zs) * (zo - zm))
