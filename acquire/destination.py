"""Where the tool may write a file the user named: never over the results store.

Every output path a command takes (a CSV, JSON or Touchstone file, a report folder) passes
through :func:`check_destination` once the store is open, so a typo or a tab completion that
names the store's own SQLite file (or its journal) is refused instead of destroying every
record in it.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from acquire.errors import InputError


def check_destination(path: str | Path, store: Any, what: str = "export") -> Path:
    """Refuse a destination that is the store's own file (or its journal), a folder, or in a
    missing folder; returns the path."""
    p = Path(path).expanduser()
    if p.is_dir():
        raise InputError(f"{what} {path}: that is a folder; give a file name")
    if not p.parent.is_dir():
        raise InputError(f"{what} {path}: the folder {p.parent} does not exist; create it first")
    own = getattr(store, "path", None)
    if own is not None and _is_store_file(p, Path(own)):
        raise InputError(
            f"{what} {path}: that is the results store's own file; choose another name"
        )
    return p


def _is_store_file(p: Path, store_file: Path) -> bool:
    """True when ``p`` is the SQLite file or one of its journals (by path or, existing, by
    identity: a hard or symbolic link to it)."""
    base = store_file.resolve()
    names = {base.name + s for s in ("", "-wal", "-shm", "-journal")}
    target = p.resolve()
    if target.parent == base.parent and target.name in names:
        return True
    return p.exists() and base.exists() and os.path.samefile(p, base)


def check_folder(path: str | Path, store: Any, what: str) -> Path:
    """Refuse an output folder that is an existing file (the store's own, or any other)."""
    p = Path(path).expanduser()
    if p.exists() and not p.is_dir():
        own = getattr(store, "path", None)
        if own is not None and _is_store_file(p, Path(own)):
            raise InputError(f"{what} {path}: that is the results store's own file; name a folder")
        raise InputError(f"{what} {path}: that is a file; name a folder (it is made if missing)")
    return p
