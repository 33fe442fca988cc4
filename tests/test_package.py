"""Package-level checks: the core stays free of UI imports, the CLI basics work,
and CI runs exactly the README's test command."""
from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_core_does_not_import_ui():
    code = ("import sys, optbench, optbench.data, optbench.pricing, optbench.volatility, "
            "optbench.analysis\n"
            "from optbench import bsm_price\n"
            "bad = [m for m in sys.modules if m.split('.')[0] in ('textual', 'rich')]\n"
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == ""


def test_version_and_help():
    out = subprocess.run([sys.executable, "-m", "optbench", "--version"],
                         capture_output=True, text=True)
    assert out.returncode == 0 and out.stdout.startswith("optbench ")
    out = subprocess.run([sys.executable, "-m", "optbench", "--help"],
                         capture_output=True, text=True)
    assert out.returncode == 0 and "usage: optbench" in out.stdout


def test_unknown_command_is_one_line_exit_2():
    out = subprocess.run([sys.executable, "-m", "optbench", "no-such-command"],
                         capture_output=True, text=True)
    assert out.returncode == 2
    assert len(out.stderr.strip().splitlines()) == 1
    assert "Traceback" not in out.stderr


def test_ci_runs_the_readme_test_command():
    readme = (ROOT / "README.md").read_text()
    commands = re.findall(r"^    (python3 -m venv .*)$", readme, flags=re.M)
    assert len(commands) == 2, "README shows exactly two set-up commands"
    assert "pytest" in commands[1] and "optbench" in commands[0]
    assert "README.md" in (ROOT / ".ci" / "run").read_text()
