"""Data files for the simulated meter: DUT and fixture profiles (TOML) and pyvisa-sim YAML profiles.

Use :func:`path` to locate a shipped file by name; nothing here is code.
"""

from __future__ import annotations

from pathlib import Path

DIRECTORY = Path(__file__).resolve().parent


def path(name: str) -> Path:
    """Return the path of a shipped profile file (``name`` with its extension)."""
    return DIRECTORY / name
