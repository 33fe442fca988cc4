"""Which starts of ``optbench`` fork before numpy and pandas (optbench.tui.early):
only the workbench, only in a terminal, only where fork exists, and not when the
user turns it off."""
from __future__ import annotations

import io
import sys

import pytest

from optbench.tui import early


class _Tty(io.StringIO):
    def isatty(self) -> bool:
        return True


def _terminal(monkeypatch):
    """Standard input and output as a terminal (set in the test's body: pytest sets
    its own capture again between a fixture and the test)."""
    monkeypatch.setattr(sys, "stdin", _Tty())
    monkeypatch.setattr(sys, "stdout", _Tty())


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the early fork is Linux only")
@pytest.mark.parametrize("argv,wanted", [
    ([], True), (["open"], True), (["open", "chains/ZPHX", "--model", "garch"], True),
    (["compare", "chains/ZPHX"], False), (["hedge"], False), (["--version"], False),
])
def test_only_the_workbench_starts_early(monkeypatch, argv, wanted):
    monkeypatch.delenv("OPTBENCH_EARLY", raising=False)
    _terminal(monkeypatch)
    assert early.wanted(argv) is wanted


def test_not_without_a_terminal(monkeypatch):
    monkeypatch.delenv("OPTBENCH_EARLY", raising=False)
    monkeypatch.setattr(sys, "stdin", io.StringIO())
    monkeypatch.setattr(sys, "stdout", io.StringIO())
    assert early.wanted([]) is False
    assert early.start([]) is None   # no fork: the ordinary path


def test_turned_off_by_the_user(monkeypatch):
    monkeypatch.setenv("OPTBENCH_EARLY", "0")
    _terminal(monkeypatch)
    assert early.wanted(["open"]) is False
