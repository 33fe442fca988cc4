"""optbench installed from its wheel (not editable) finds the bundled demo.

The test builds the wheel from a copy of the project's sources (so the checkout
stays clean), installs it with ``--no-deps`` into a fresh virtual environment whose
only view of the dependencies is a ``.pth`` line naming this environment's
site-packages (the installed optbench still comes first on ``sys.path``), and runs
the installed ``optbench`` console script from an empty folder: ``compare --format
json`` with no CHAIN must give the demo's comparison, and ``demo`` with no ``--out``
must write into the user's data folder instead of a checkout that is not there.
"""
from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import sysconfig
import venv
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SOURCES = ("pyproject.toml", "setup.py", "MANIFEST.in", "README.md", "optbench", "chains")

pytestmark = pytest.mark.slow


def _run(cmd, **kw) -> subprocess.CompletedProcess:
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=240, **kw)
    assert done.returncode == 0, f"{cmd}\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}"
    return done


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    """``(bin folder, environment variables)`` of a fresh venv holding the wheel."""
    tmp = tmp_path_factory.mktemp("wheel")
    src = tmp / "src"
    src.mkdir()
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.egg-info")
    for name in SOURCES:
        path = ROOT / name
        if path.is_dir():
            shutil.copytree(path, src / name, ignore=ignore)
        else:
            shutil.copy2(path, src / name)
    wheels = tmp / "wheels"
    _run([sys.executable, "-m", "pip", "wheel", str(src), "--no-deps", "-q",
          "-w", str(wheels)])
    (wheel,) = wheels.glob("optbench-*.whl")

    env_dir = tmp / "venv"
    venv.EnvBuilder(with_pip=False).create(env_dir)
    python = env_dir / ("Scripts/python.exe" if os.name == "nt" else "bin/python")
    site = Path(_run([str(python), "-c", "import sysconfig; "
                      "print(sysconfig.get_paths()['purelib'])"]).stdout.strip())
    # the dependencies come from this environment, after the venv's own packages
    (site / "optbench_test_deps.pth").write_text(sysconfig.get_paths()["purelib"] + "\n")
    _run([sys.executable, "-m", "pip", "--python", str(python), "install", "--no-deps",
          "-q", str(wheel)])
    env = {k: v for k, v in os.environ.items() if not k.startswith("PYTHON")}
    home = tmp / "home"
    home.mkdir()
    env.update(HOME=str(home), XDG_DATA_HOME=str(home / "data"),
               PATH=str(python.parent) + os.pathsep + env.get("PATH", ""))
    return python.parent, env, site


def test_the_wheel_carries_the_demo_inside_the_package(installed):
    bin_dir, env, site = installed
    shipped = site / "optbench" / "scenarios" / "ZPHX"
    for name in ("chain.csv", "history.csv", "meta.toml"):
        assert (shipped / name).read_bytes() == (ROOT / "chains" / "ZPHX" / name).read_bytes()


def test_installed_compare_without_a_chain_uses_the_packaged_demo(installed, tmp_path):
    bin_dir, env, site = installed
    where = _run([str(bin_dir / "python"), "-c",
                  "import optbench; from optbench.data.scenario import bundled_demo; "
                  "print(optbench.__file__); print(bundled_demo())"],
                 cwd=tmp_path, env=env).stdout.split()
    assert Path(where[0]).is_relative_to(site), where   # the wheel, not the checkout
    assert Path(where[1]) == site / "optbench" / "scenarios" / "ZPHX"

    done = _run([str(bin_dir / "optbench"), "compare", "--format", "json"],
                cwd=tmp_path, env=env)
    doc = json.loads(done.stdout)
    assert doc["underlying"] == "ZPHX" and doc["asof"] == "2026-11-27"
    assert len(doc["expiries"]) >= 7
    assert all(e["verdict"] in ("rich", "fair", "cheap") for e in doc["expiries"])
    assert list(tmp_path.iterdir()) == []            # nothing written where it ran


def test_installed_demo_writes_to_the_user_data_folder(installed, tmp_path):
    bin_dir, env, site = installed
    done = _run([str(bin_dir / "optbench"), "demo"], cwd=tmp_path, env=env)
    target = Path(env["XDG_DATA_HOME"]) / "optbench" / "scenarios" / "ZPHX"
    assert str(target) in done.stdout
    assert (target / "chain.csv").read_bytes() == (ROOT / "chains/ZPHX/chain.csv").read_bytes()
    assert list(tmp_path.iterdir()) == []
