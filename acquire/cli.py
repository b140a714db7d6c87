"""The ``acquire`` command line.

Each subcommand lives in its own module under :mod:`acquire.commands` and exposes three names:

- ``HELP``: one line shown in ``acquire --help``;
- ``add_arguments(parser)``: declares its options (imports nothing heavy);
- ``run(args) -> int``: does the work (imports what it needs inside, so ``--help`` stays fast).

Errors the user can cause end with one line on stderr and exit code 2 (``--debug`` shows the
traceback); Ctrl-C ends with exit code 130.
"""

from __future__ import annotations

import argparse
import gc
import importlib
import os
import re
import sys
from collections.abc import Sequence

from acquire import signals

#: A byte of the command line that was not text (PEP 383 decodes it as U+DC80..U+DCFF); compiled
#: by the re module on first use (only for a command line that needs it).
_SURROGATE = "[\udc80-\udcff]"

#: Subcommand name -> module under acquire.commands, in the order shown by --help.
COMMANDS: dict[str, str] = {
    "demo": "demo",
    "sim": "sim",
    "identify": "identify",
    "sweep": "sweep",
    "reference": "reference",
    "predict": "predict",
    "fit": "fit",
    "plan": "plan",
    "station": "station",
    "bias-sweep": "bias_sweep",
    "temperature-rise": "temperature_rise",
    "lot": "lot",
    "line-view": "line_view",
    "report": "report",
    "grr": "grr",
    "verify": "verify",
    "publish": "publish",
}

DESCRIPTION = """\
Characterise and test coils with an impedance (LCR) meter over SCPI.

Trade terms used throughout: Ls/Rs are the series inductance and resistance of the coil's
equivalent circuit, Lp/Rp the parallel ones; Q = |X|/R is the quality factor and D = 1/Q the
dissipation factor; open/short/load are the reference measurements taken on the empty, shorted
and standard-loaded fixture that let the tool remove the fixture from every reading.
"""


def _load(name: str):
    return importlib.import_module(f"acquire.commands.{COMMANDS[name]}")


def named_command(argv: Sequence[str]) -> str | None:
    """The subcommand ``argv`` names (its first word that is not an option), if it is one."""
    for word in argv:
        if word == "--":
            return None
        if not word.startswith("-"):
            return word if word in COMMANDS else None
    return None


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The parser of every subcommand, or of subcommand ``only`` alone (a command line that
    names one parses the same either way, without loading every other subcommand's module)."""
    parser = argparse.ArgumentParser(
        prog="acquire",
        description=DESCRIPTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS if only is None else (only,):
        try:
            module = _load(name)
        except ModuleNotFoundError as exc:
            if exc.name != f"acquire.commands.{COMMANDS[name]}":
                raise
            continue
        p = sub.add_parser(
            name,
            help=module.HELP,
            description=(module.__doc__ or module.HELP),
            formatter_class=argparse.RawDescriptionHelpFormatter,
        )
        module.add_arguments(p)
        p.set_defaults(_module=module)
    return parser


def program() -> None:
    """The program ``acquire`` (and ``python -m acquire``): :func:`main`, then exit with its code.

    Before the interpreter ends, the objects left are taken out of the garbage collector's
    sight (:func:`gc.freeze`): its final collection would walk every object of every library
    loaded (pyvisa, numpy: tens of milliseconds after a sweep) only to free memory that the end
    of the process frees anyway. By then every command has closed its stores, files and
    connections itself; atexit handlers and the final flush of stdout and stderr still run.
    """
    code = main()
    gc.freeze()
    sys.exit(code)


def main(argv: Sequence[str] | None = None) -> int:
    from acquire.display import keep_output_readable

    keep_output_readable(sys.stdout, sys.stderr)  # an ASCII terminal, a file name not in UTF-8
    words = sys.argv[1:] if argv is None else list(argv)
    parser = build_parser(named_command(words))
    args = parser.parse_args(words)
    if getattr(args, "_module", None) is None:
        parser.print_help()
        return 0
    debug = args.debug or os.environ.get("ACQUIRE_DEBUG") == "1"
    try:
        with signals.installed():  # SIGTERM and SIGHUP end a command as Ctrl-C does
            return int(args._module.run(args) or 0)
    except KeyboardInterrupt:
        # On its own line: Ctrl-C often comes at a prompt, whose line the terminal leaves open.
        print("\nacquire: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # The reader of our output went away (`acquire predict | head`): stop quietly, as the
        # Python documentation's note on SIGPIPE advises, so the interpreter's final flush of
        # stdout does not fail again.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 1
    except UnicodeEncodeError as exc:
        if debug or "surrogates" not in str(exc.reason):
            raise
        where = _holding(exc.object, sys.argv[1:] if argv is None else list(argv))
        shown = exc.object.encode("utf-8", "surrogateescape")
        print(
            f"acquire {args.command}: error: {where} holds bytes that are not UTF-8 text "
            f"({shown!r}); names are kept as UTF-8: type it again in UTF-8",
            file=sys.stderr,
        )
        return 2
    except Exception as exc:  # noqa: BLE001 - turned into one line; --debug re-raises
        if debug or not _is_user_error(exc):
            raise
        print(f"acquire {args.command}: error: {exc}", file=sys.stderr)
        return 2


def _holding(value: str, argv: list[str]) -> str:
    """The option of the command line whose text is (or holds) ``value``, else "a name"."""
    for i, token in enumerate(argv):
        text = token.split("=", 1)[1] if token.startswith("--") and "=" in token else token
        if not re.search(_SURROGATE, text) or not (value in text or text in value):
            continue
        if text is not token:
            return token.split("=", 1)[0]
        if i and argv[i - 1].startswith("-") and not argv[i - 1].startswith("---"):
            return argv[i - 1]
        return f"the argument {token.encode('utf-8', 'surrogateescape')!r}"
    return "a name"


def _is_user_error(exc: BaseException) -> bool:
    """True for the project's own errors and OS-level I/O errors (shown as one line)."""
    from acquire.errors import AcquireError
    from drivers.errors import InstrumentError

    return isinstance(exc, AcquireError | InstrumentError | OSError)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
