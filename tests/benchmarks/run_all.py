"""Run every benchmark script and print one table: figure, target, status.

Each ``bench_*.py`` prints its figures side by side with its reference library and,
for the figures that carry a target, a ``FIGURE {json}`` line (``timing.figure``).
This script runs them one after another in fresh processes (never in parallel: the
machine has two cores and the figures would disturb each other), collects those lines
and prints the regression table, so a change that slows something down is seen before
it lands. A script that fails is reported with its exit status and last line.

Run: .venv/bin/python tests/benchmarks/run_all.py [--only NAME ...] [--quick]
                                                  [--log FILE]

``--quick`` passes ``--quick`` to scripts that accept it (fewer repeats / smaller
universes); figures from a quick run are indicative only.
"""
from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def scripts(only: list[str] | None) -> list[Path]:
    found = sorted(HERE.glob("bench_*.py"))
    if only:
        found = [p for p in found if any(o in p.stem for o in only)]
    return found


def accepts_quick(path: Path) -> bool:
    return "--quick" in path.read_text()


def run_one(path: Path, quick: bool, log) -> tuple[list[dict], int, str, float]:
    cmd = [sys.executable, str(path)]
    if quick and accepts_quick(path):
        cmd.append("--quick")
    t0 = time.perf_counter()
    proc = subprocess.run(cmd, capture_output=True, text=True)
    wall = time.perf_counter() - t0
    if log is not None:
        log.write(f"\n===== {path.name} (exit {proc.returncode}, {wall:.0f} s)\n")
        log.write(proc.stdout)
        log.write(proc.stderr)
    figures = []
    for line in proc.stdout.splitlines():
        if line.startswith("FIGURE "):
            try:
                figures.append(json.loads(line[len("FIGURE "):]))
            except json.JSONDecodeError:
                pass
    last = (proc.stderr.strip().splitlines() or proc.stdout.strip().splitlines() or [""])[-1]
    return figures, proc.returncode, last, wall


def status(fig: dict) -> str:
    target = fig.get("target")
    if target is None:
        return "record"
    ok = fig["value"] <= target if fig.get("better", "lower") == "lower" else \
        fig["value"] >= target
    return "met" if ok else "MISSED"


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", nargs="*", help="run only scripts whose name contains these")
    ap.add_argument("--quick", action="store_true", help="pass --quick where accepted")
    ap.add_argument("--log", metavar="FILE", help="write every script's full output here")
    args = ap.parse_args()
    log = open(args.log, "w") if args.log else None
    rows, failures = [], []
    for path in scripts(args.only):
        print(f"running {path.name} …", file=sys.stderr, flush=True)
        figures, code, last, wall = run_one(path, args.quick, log)
        if code != 0:
            failures.append((path.name, code, last))
        for fig in figures:
            rows.append((path.stem.removeprefix("bench_"), fig))
        print(f"  {path.name}: {len(figures)} figures in {wall:.0f} s"
              + ("" if code == 0 else f", exit {code}"), file=sys.stderr, flush=True)
    if log is not None:
        log.close()
    width = max([len(f["name"]) for _, f in rows] + [10])
    print(f"{'script':<14}{'figure':<{width + 2}}{'value':>12} {'unit':<8}{'target':>10}  "
          f"{'status':<7} reference")
    missed = 0
    for script, fig in rows:
        st = status(fig)
        missed += st == "MISSED"
        op = "<=" if fig.get("better", "lower") == "lower" else ">="
        target = "" if fig.get("target") is None else f"{op}{fig['target']:g}"
        print(f"{script:<14}{fig['name']:<{width + 2}}{fig['value']:>12.4g} "
              f"{fig['unit']:<8}{target:>10}  {st:<7} {fig.get('reference', '')}")
    for name, code, last in failures:
        print(f"{name}: FAILED (exit {code}): {last}")
    print(f"{len(rows)} figures, {missed} missed, {len(failures)} scripts failed")
    return 1 if failures or missed else 0


if __name__ == "__main__":
    raise SystemExit(main())
