"""A simulated impedance meter with real physics, speaking SCPI over a loopback TCP socket.

The driver talks to it through pyvisa exactly as to a bench meter. Start it from Python with
:func:`running` (a background thread, an ephemeral port) or from the shell with ``acquire sim``.
Its command set is in ``COMMANDS.md`` beside this file; the physics in :mod:`.physics`; the
meter's own errors in :mod:`.reading_error`; the profiles (what is in the fixture, the fixture,
the meter) in :mod:`.profiles`; faults in :mod:`.faults`. ``LIST_MAX`` is the most frequencies
one list may hold.
"""

from __future__ import annotations

from drivers.simulator.handle import SimulatorHandle, running
from drivers.simulator.state import LIST_MAX

__all__ = ["LIST_MAX", "SimulatorHandle", "running"]
