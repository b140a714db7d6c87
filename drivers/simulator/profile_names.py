"""Which profiles a client of the simulator may put in: shipped ones and the operator's own.

A client (``SIMulate:DUT``, ``SIMulate:FIXTure``) names a profile; it never gives a path, so it
can neither make the simulator open a file of the host nor learn from the reply whether a file
exists or where its parsing failed. A name is looked up among the shipped profiles
(``sim_profiles/``, names compared without regard to case), then in the directory the operator
gave to ``acquire sim --profile-dir``. A named profile that cannot be loaded is refused with a
reply that says only that; the reason goes to the simulator's log on standard error, where the
operator reads it.

The operator, who starts the simulator, may still give paths (``acquire sim --profile PATH``,
:class:`~drivers.simulator.instrument.Instrument`); :func:`operator_choice` also finds a plain
name in the profile directory.
"""

from __future__ import annotations

import logging
import re
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

import sim_profiles
from drivers.errors import ProfileError
from drivers.simulator.profiles import NOTHING, list_profiles

T = TypeVar("T")
LOG = logging.getLogger("drivers.simulator")
#: What a client may name: letters, digits, '.', '_' and '-', starting with a letter or digit.
NAME = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]{0,63}")
#: The groups of shipped profiles each kind of insertion offers.
GROUPS = {"DUT": ("dut", "standard"), "fixture": ("fixture",)}


def _stem(name: str) -> str:
    return name[:-5] if name.lower().endswith(".toml") else name


def offered(name: str, what: str, directory: Path | None) -> str | Path:
    """The shipped name or the file in ``directory`` that the client's ``name`` stands for.

    ``what`` is ``"DUT"`` or ``"fixture"``. Raises :class:`ProfileError` with a message that
    names no file of the host: for a path or any other text that is no plain name, and for a
    name that is neither shipped nor in ``directory``.
    """
    text = name.strip()
    if what == "DUT" and text.lower() == NOTHING.name:
        return NOTHING.name
    if not NAME.fullmatch(text):
        raise ProfileError(
            f"{what} profiles are named, not given as paths: use a shipped name or one in the "
            "directory given to acquire sim --profile-dir"
        )
    stem = _stem(text)
    if sim_profiles.path(f"{stem.lower()}.toml").is_file():
        return stem.lower()
    if directory is not None:
        for candidate in (stem, stem.lower()):
            path = directory / f"{candidate}.toml"
            if path.is_file():
                return path
    shipped = ", ".join(n for group in GROUPS[what] for n in list_profiles(group))
    raise ProfileError(
        f"no {what} profile named {text!r} (shipped: {shipped}; others from acquire sim "
        "--profile-dir)"
    )


def load_offered(
    load: Callable[[str | Path], T], name: str, what: str, directory: Path | None
) -> T:
    """``load`` the profile the client's ``name`` stands for (see :func:`offered`).

    A profile that cannot be loaded is refused in words that do not say why; the reason is
    logged for the operator.
    """
    choice = offered(name, what, directory)
    try:
        return load(choice)
    except ProfileError as exc:
        LOG.warning("a client named the %s profile %r, which cannot be loaded: %s", what, name, exc)
        raise ProfileError(
            f"the {what} profile {_stem(name.strip())!r} cannot be loaded; the simulator's log "
            "says why"
        ) from None


def operator_choice(name_or_path: str | Path | T, directory: Path | None) -> str | Path | T:
    """What the operator gave: a plain name that is not shipped but is in ``directory`` becomes
    that file; anything else (a shipped name, a path, a profile object) is returned as is."""
    if directory is None or not isinstance(name_or_path, str):
        return name_or_path
    stem = _stem(name_or_path)
    if not NAME.fullmatch(name_or_path) or sim_profiles.path(f"{stem.lower()}.toml").is_file():
        return name_or_path
    path = directory / f"{stem}.toml"
    return path if path.is_file() else name_or_path
