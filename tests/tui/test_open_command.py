"""``optbench open``: bad paths are one line and exit 2 before any screen opens;
``optbench`` with no arguments means ``open`` on the bundled demo."""
from __future__ import annotations

import subprocess
import sys

import pytest

from optbench.cli import build_parser
from optbench.commands import open_
from optbench.tui import session

from tui_helpers import DEMO, ROOT


@pytest.mark.parametrize("args,needle", [
    (["open", "no/such/chain.csv"], "no/such/chain.csv: no such file or folder"),
    (["open", str(DEMO), "--history", "no/such/history.csv"], "no such file"),
    (["open", "--max-spread", "-0.5"], "--max-spread: must be positive"),
    (["open", "--rate", "abc"], "--rate: not a rate: 'abc'"),
    (["open", "--asof", "2026-13-45"], "--asof: not a date: '2026-13-45'"),
])
def test_bad_input_is_one_line_and_exit_2(args, needle):
    out = subprocess.run([sys.executable, "-m", "optbench", *args], capture_output=True,
                         text=True, cwd=ROOT, timeout=60)
    assert out.returncode == 2
    assert needle in out.stderr
    assert len(out.stderr.strip().splitlines()) == 1 and "Traceback" not in out.stderr


def test_no_arguments_opens_the_bundled_demo():
    args = build_parser().parse_args(["open"])
    assert args.run is open_.run and args.chain is None
    assert session.demo_scenario().resolve() == DEMO.resolve()
    assert (DEMO / "chain.csv").is_file() and (DEMO / "history.csv").is_file()
