"""Start-up a user feels: whole-process wall and CPU time of ``optbench compare`` and
``optbench hedge`` on the bundled demo, against the floor every Python tool here pays
(``python -c "import numpy, pandas"``), timed in alternating rounds in the same run.

Two cases, both printed: optbench's own modules with bytecode (what a plain install
has; the script compiles them first) and without (an editable checkout on a machine
that sets PYTHONDONTWRITEBYTECODE=1 recompiles them at every start). Targets: compare
and hedge <= 1.4x the floor, the HTML report <= 3x (with bytecode). Medians of wall
and CPU (user+sys). Compare and hedge run with the garbage collector's thresholds
raised and end once their output is flushed (``optbench.cli.entry``); the floor with
the same thresholds is printed for the record, so the part of the gain that comes
from collecting less often while numpy and pandas import is seen.

Run: .venv/bin/python tests/benchmarks/bench_startup.py [--repeats N] [--quick]
"""
from __future__ import annotations

import argparse
import compileall
import resource
import shutil
import statistics
import subprocess
import sys
import time
from pathlib import Path

from timing import figure  # noqa: E402  (tests/benchmarks)

ROOT = Path(__file__).resolve().parents[2]
DEMO = str(ROOT / "chains" / "ZPHX")
PY = sys.executable
sys.path.insert(0, str(ROOT))
from optbench.cli import ONE_SHOT_GC_THRESHOLD  # noqa: E402

CASES = {
    "floor: import numpy, pandas": [PY, "-c", "import numpy, pandas"],
    # for the record: how much of the floor the collector's thresholds that compare
    # and hedge run with take off (their ratio counts against the plain floor)
    "floor, one-shot gc thresholds": [PY, "-c", "import gc; gc.set_threshold("
                                      + ", ".join(map(str, ONE_SHOT_GC_THRESHOLD))
                                      + "); import numpy, pandas"],
    "optbench compare (demo)": [PY, "-m", "optbench", "compare", DEMO, "--format", "json"],
    "optbench hedge (demo)": [PY, "-m", "optbench", "hedge", DEMO, "--portfolio", "1000000",
                              "--days", "91", "--format", "json"],
    "optbench compare, HTML report": [PY, "-m", "optbench", "compare", DEMO, "--format",
                                      "html", "-o", "/dev/null"],
}
TARGETS = {"optbench compare (demo)": 1.4, "optbench hedge (demo)": 1.4,
           "optbench compare, HTML report": 3.0}


def one(cmd):
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, cwd=ROOT)
    wall = time.perf_counter() - t0
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, r1.ru_utime + r1.ru_stime - r0.ru_utime - r0.ru_stime


def measure(repeats):
    got = {k: ([], []) for k in CASES}
    for _ in range(repeats):
        for k, cmd in CASES.items():
            w, c = one(cmd)
            got[k][0].append(w)
            got[k][1].append(c)
    return {k: (statistics.median(w), statistics.median(c)) for k, (w, c) in got.items()}


def report(label, res, with_targets):
    """Print each case's wall and CPU against the floor, and its figures: with their
    targets for the bytecode case, for the record (no target) without bytecode."""
    fw, fc = res["floor: import numpy, pandas"]
    print(f"{label}")
    suffix = "" if with_targets else " (no bytecode)"
    for k, (w, c) in res.items():
        target = TARGETS.get(k)
        print(f"  {k:30s} wall {w:6.2f} s ({w / fw:4.2f}x floor)   CPU {c:6.2f} s "
              f"({c / fc:4.2f}x floor)"
              + (f"   target <= {target:g}x" if target and with_targets else ""))
        if not k.startswith("floor"):
            ref = f"import numpy, pandas ({fw:.2f} s wall, {fc:.2f} s CPU)"
            figure(f"{k} / floor, wall{suffix}", w / fw, "x",
                   target if with_targets else None, reference=ref)
            figure(f"{k} / floor, CPU{suffix}", c / fc, "x",
                   target if with_targets else None, reference=ref)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--repeats", type=int, default=7)
    ap.add_argument("--quick", action="store_true")
    a = ap.parse_args()
    repeats = 3 if a.quick else a.repeats
    pkg = ROOT / "optbench"
    compileall.compile_dir(pkg, quiet=1)
    report("optbench with bytecode (a plain install)", measure(repeats), True)
    for cache in pkg.rglob("__pycache__"):
        shutil.rmtree(cache)
    import os
    os.environ["PYTHONDONTWRITEBYTECODE"] = "1"
    report("optbench without bytecode (editable checkout, PYTHONDONTWRITEBYTECODE=1)",
           measure(repeats), False)
    compileall.compile_dir(pkg, quiet=1)


if __name__ == "__main__":
    main()
