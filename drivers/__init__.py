"""Instrument layer: VISA sessions, SCPI helpers, the generic impedance-meter driver, the simulator.

Nothing in this package knows about coils or production; it never imports :mod:`acquire`.
"""
