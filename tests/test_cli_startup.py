"""A run builds only its own sub-command's parser: the arguments it reads, its help and
its errors must be those of the parser with every command."""
from __future__ import annotations

import pytest

from optbench import cli

ARGVS = [
    ["compare", "chains/ZPHX", "--format", "json", "--band", "0.1,0.9", "--seed", "3"],
    ["compare"],
    ["hedge", "chains/ZPHX", "--portfolio", "25m", "--floor", "90", "--days", "91",
     "--structure", "collar", "--moves=-0.2,0.1"],
    ["check", "chains/ZPHX", "--format", "csv"],
    ["fit", "chains/ZPHX/history.csv", "--model", "gjr"],
    ["screen", "somewhere", "--floor", "0.9"],
    ["track", "store.sqlite"],
    ["demo", "--seed", "5"],
    ["open"],
]


def _parse(commands, argv):
    return vars(cli.build_parser(commands).parse_args(argv))


@pytest.mark.parametrize("argv", ARGVS, ids=lambda a: " ".join(a[:2]))
def test_own_parser_reads_what_the_full_parser_reads(argv):
    named = cli.command_named(argv)
    assert named == (argv[0],)
    assert _parse(named, argv) == _parse(None, argv)


@pytest.mark.parametrize("argv", [["compare", "--help"], ["hedge", "-h"],
                                  ["compare", "--bogus"], ["hedge", "--structure", "x"],
                                  ["fit"]])
def test_help_and_errors_are_the_same(argv, capsys):
    outputs = []
    for commands in (cli.command_named(argv), None):
        with pytest.raises(SystemExit) as done:
            cli.build_parser(commands).parse_args(argv)
        captured = capsys.readouterr()
        outputs.append((done.value.code, captured.out, captured.err))
    assert outputs[0] == outputs[1]


def test_which_commands_a_run_builds():
    assert cli.command_named([]) == cli.DEFAULT_COMMANDS
    assert cli.command_named(["--version"]) == cli.DEFAULT_COMMANDS
    assert cli.command_named(["-h"]) is None                  # help lists every command
    assert cli.command_named(["--help", "compare"]) is None
    assert cli.command_named(["bogus"]) is None               # the error lists them all
    assert cli.command_named(["hedge", "--help"]) == ("hedge",)
    assert set(cli.ENDS_AT_ONCE) <= set(cli.COMMANDS)
    assert "open" not in cli.ENDS_AT_ONCE and "screen" not in cli.ENDS_AT_ONCE


def test_unknown_command_lists_every_command(capsys):
    with pytest.raises(SystemExit) as done:
        cli.main(["bogus"])
    assert done.value.code == 2
    err = capsys.readouterr().err
    assert all(f"'{name}'" in err for name in cli.COMMANDS)
