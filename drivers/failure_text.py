"""What went wrong reaching or talking to a meter, said once, on one line, with one piece of advice.

:func:`open_failure` explains a resource that cannot be opened by what is wrong with it (not a
VISA resource string, a bus whose driver is missing, a LAN address without ``::SOCKET``, a
pyvisa-sim profile without that resource). :class:`Attempts` collects the failures of a
repeated operation and tells them as one short line: the same failure three times is said once
with its count, and each failure keeps only its first sentence (the advice is given once, at
the end, by the caller).
"""

from __future__ import annotations

import re

from pyvisa import rname

#: How a resource string looks, for a user who typed something else.
FORMS = (
    "a meter on the LAN is TCPIP0::<address>::<port>::SOCKET (e.g. "
    "TCPIP0::192.168.1.20::5025::SOCKET), on USB USB0::<vendor>::<product>::<serial>::INSTR, "
    "on GPIB GPIB0::<address>::INSTR"
)
ADVICE_OPEN = (
    "Check that the meter is on and reachable and that the resource string (address, port) is right"
)
_SENTENCE_END = r"\.\s+(?=[A-Z])"  # compiled by the re module on first use


def one_line(text: str) -> str:
    """``text`` with its line breaks and runs of blanks as single spaces."""
    return " ".join(str(text).split())


def first_sentence(text: str) -> str:
    """The first sentence of a message (its advice, if any, dropped), on one line."""
    return re.split(_SENTENCE_END, one_line(text), maxsplit=1)[0].rstrip(".")


def resource_problem(resource: str) -> str | None:
    """Why ``resource`` cannot be a VISA resource string, or None if it parses."""
    try:
        rname.parse_resource_name(resource)
    except rname.InvalidResourceName:
        return f"{resource!r} is not a VISA resource string: {FORMS}"
    return None


def socket_hint(resource: str) -> str:
    """A hint for ``TCPIP0::host::5025``: a raw socket needs ``::SOCKET`` (else VXI-11)."""
    try:
        parsed = rname.parse_resource_name(resource)
    except rname.InvalidResourceName:
        return ""
    device = getattr(parsed, "lan_device_name", "")
    if isinstance(parsed, rname.TCPIPInstr) and str(device).isdigit():
        return (
            f"; {device} looks like a port: a raw socket is "
            f"{parsed.interface_type}{parsed.board}::{parsed.host_address}::{device}::SOCKET "
            "(without ::SOCKET VISA speaks VXI-11 to the address)"
        )
    return ""


def missing_driver(resource: str, exc: BaseException) -> str | None:
    """The message for a bus whose Python driver pyvisa-py did not find, or None."""
    text = one_line(str(exc))
    if "Please install" not in text and "No module named" not in text:
        return None
    bus = resource.split("::", 1)[0].rstrip("0123456789").upper() or resource
    return (
        f"cannot open {resource}: the {bus} interface needs a driver that is not installed "
        f"({first_sentence(text)}). Install it, or give the path of the VISA library that came "
        "with the interface as the backend"
    )


def simulated_elsewhere(resource: str, backend: str, known: tuple[str, ...]) -> str | None:
    """The message for a pyvisa-sim backend asked for a resource its profile lacks, or None."""
    if not backend.endswith("@sim") or resource.upper() in (k.upper() for k in known):
        return None
    shown = ", ".join(known[:6]) + (", ..." if len(known) > 6 else "") if known else "none"
    return (
        f"cannot open {resource}: backend {backend} is pyvisa-sim, which answers only for the "
        f"resources of its profile ({shown}). The simulated meter of `acquire sim` and real "
        "meters on the LAN are reached with the backend @py"
    )


def open_failure(resource: str, backend: str, exc: BaseException) -> str:
    """One line saying why ``resource`` could not be opened and what to do."""
    return missing_driver(resource, exc) or (
        f"cannot open {resource} with backend {backend}: {first_sentence(str(exc))}"
        f"{socket_hint(resource)}. {ADVICE_OPEN}"
    )


class Attempts:
    """The failures of one repeated operation on ``resource``, told as one short line."""

    def __init__(self, resource: str) -> None:
        self.resource = resource
        self.tried: list[str] = []
        self.reopening: list[str] = []

    def failed(self, exc: BaseException) -> None:
        """Note a failed attempt of the operation."""
        self.tried.append(self._short(exc))

    def reopen_failed(self, exc: BaseException) -> None:
        """Note a failed attempt to reopen the connection."""
        self.reopening.append(self._short(exc))

    @property
    def last(self) -> str:
        return self.tried[-1] if self.tried else ""

    def told(self) -> str:
        """What the attempts met, e.g. ``MeterTimeout: no reply ... (3 times)``."""
        return _counted(self.tried)

    def reopening_told(self) -> str:
        return _counted(self.reopening)

    def _short(self, exc: BaseException) -> str:
        text = first_sentence(str(exc))
        for prefix in (f"cannot open {self.resource}: ", f"{self.resource}: "):
            if text.startswith(prefix):
                text = text[len(prefix) :]
        return f"{type(exc).__name__}: {text}"


def _counted(items: list[str]) -> str:
    """Items in first-seen order, each said once with how often it happened."""
    counts: dict[str, int] = {}
    for item in items:
        counts[item] = counts.get(item, 0) + 1
    return " | ".join(f"{k} ({n} times)" if n > 1 else k for k, n in counts.items())
