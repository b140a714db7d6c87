"""Words the simulated meter no longer understands, and what replaced them.

The simulated meter once named each reading pair with one run-together code and set its speed
with a keyword header. It now names a pair with two plain words and a circuit setting, and sets
the number of signal periods per reading (drivers/simulator/COMMANDS.md). The simulator answers
an old word with an error naming the new spelling, and a dialect file that still sends one
fails on load with the same advice; both take it from here.
"""

from __future__ import annotations

import re

#: Each retired reading-pair code and the commands that select the same pair now.
OLD_PAIRS: dict[str, str] = {
    "RX": "FORM:PAIR REAL,IMAG",
    "ZDEG": "UNIT:ANGL DEG;FORM:PAIR MAGN,PHAS",
    "ZRAD": "UNIT:ANGL RAD;FORM:PAIR MAGN,PHAS",
    "GB": "FORM:PAIR COND,SUSC",
    "LSRS": "CIRC SER;FORM:PAIR IND,RES",
    "LPRP": "CIRC PAR;FORM:PAIR IND,RES",
    "CSRS": "CIRC SER;FORM:PAIR CAP,RES",
    "CPD": "CIRC PAR;FORM:PAIR CAP,DISS",
    "LSQ": "CIRC SER;FORM:PAIR IND,QUAL",
}

#: What replaced the speed header, in the simulator's words and in a dialect's.
NEW_SPEED = "PER <n> (signal periods averaged per reading, 1 to 1000)"
NEW_SPEED_DIALECT = (
    'set_speed = { command = "PER {speed}", choices = { fast = "1", medium = "4", slow = "16" } }'
)

_PAIR_COMMAND = re.compile(r"(?:^|[;\s:])FORM(?:AT)?:PAIR\s+([A-Z]+)\s*(?:;|$)", re.IGNORECASE)
#: Compiled by the re module on first use: only a command holding "SPE" is searched.
_SPEED_COMMAND = r"(?:^|;)\s*:?(?:SENS(?:E)?:)?SPE(?:ED)?(?:\s|\?|;|$)"


def old_pair(command: str) -> str | None:
    """The retired pair code a command selects with ``FORMat:PAIR``, or None."""
    for match in _PAIR_COMMAND.finditer(command):
        if match.group(1).upper() in OLD_PAIRS:
            return match.group(1).upper()
    return None


def selects_pair(command: str) -> bool:
    """True if the command uses the simulated meter's ``FORMat:PAIR`` header at all."""
    return re.search(r"FORM(?:AT)?:PAIR", command, re.IGNORECASE) is not None


def old_speed(command: str) -> bool:
    """True if the command uses the retired speed header."""
    return (
        "SPE" in command.upper() and re.search(_SPEED_COMMAND, command, re.IGNORECASE) is not None
    )


def dialect_problems(commands: dict[str, str]) -> list[tuple[str, str]]:
    """``(operation, reason)`` for every retired word in a dialect's operation commands.

    Only dialects of the simulated meter's family (some command uses ``FORMat:PAIR``) are
    judged: another meter may well have a header spelled like the old speed one.
    """
    if not any(selects_pair(c) for c in commands.values()):
        return []
    problems = []
    for name, command in commands.items():
        code = old_pair(command)
        if code is not None:
            problems.append(
                (
                    name,
                    f"{command!r} uses a reading-pair name this meter no longer knows ({code}); "
                    f"the simulator now says {OLD_PAIRS[code]} "
                    "(see drivers/simulator/COMMANDS.md)",
                )
            )
        elif old_speed(command):
            problems.append(
                (
                    name,
                    f"{command!r} uses the speed header this meter no longer knows; the simulator "
                    f"now sets {NEW_SPEED}: write {NEW_SPEED_DIALECT}",
                )
            )
    return problems
