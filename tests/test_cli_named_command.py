"""A command line that names a subcommand is parsed by that subcommand's parser alone exactly as
by the parser of every subcommand (argparse, the standard library's, is the reference)."""

from __future__ import annotations

import pytest

from acquire.cli import build_parser, named_command


@pytest.mark.parametrize(
    "argv",
    [["sweep", "--resource", "TCPIP0::h::5025::SOCKET", "--points", "11", "--no-live"],
     ["--debug", "sweep", "list"], ["reference", "list", "--store", "x.db"],
     ["lot", "L-1", "--store", "x.db"], ["sweep", "show", "3"]],
)  # fmt: skip
def test_the_named_subcommand_alone_parses_the_same(argv):
    assert named_command(argv) == next(w for w in argv if not w.startswith("-"))
    assert vars(build_parser(named_command(argv)).parse_args(argv)) == vars(
        build_parser().parse_args(argv)
    )


@pytest.mark.parametrize("argv", [[], ["--debug"], ["nosuch", "x"], ["--", "sweep"]])
def test_no_known_subcommand_builds_every_parser(argv):
    assert named_command(argv) is None


def test_an_unknown_subcommand_is_refused_with_every_choice_named(capsys):
    with pytest.raises(SystemExit):
        build_parser(named_command(["nosuch"])).parse_args(["nosuch"])
    assert "invalid choice: 'nosuch' (choose from 'demo', 'sim'" in capsys.readouterr().err
