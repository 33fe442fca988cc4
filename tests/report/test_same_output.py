"""The faster start-up paths write exactly the same bytes as before.

- ``jsonout.dumps`` writes the per-strike records column by column into one template;
  :func:`reference_dumps` below is the rendering it replaced (every record a dict,
  the list written by the standard library's C encoder), and the two must give the
  same text on the demo's comparison and hedge, and on frames with every kind of
  column (NaN, infinities, NaT, strings that need escaping, nullable dtypes).
- ``python -m optbench`` builds only the parser of the command it runs and ends the
  process as soon as the output is flushed; its stdout and the files it writes must
  equal what the command's own ``render`` gives in this process for the same result
  objects (JSON, CSV, table), for compare and hedge.
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from optbench.report import jsonout

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "chains" / "ZPHX"


def reference_dumps(obj, *, kind=None, indent=2) -> str:
    """The JSON rendering as written before the column-wise records (kept verbatim
    as the reference the faster one must equal byte for byte)."""
    strikes = None
    if hasattr(obj, "strike_frame") and hasattr(obj, "to_dict"):
        data = jsonout.clean(obj.to_dict(strikes=False))
        strikes = jsonout.frame_records(obj.strike_frame())
    else:
        data = obj.to_dict() if hasattr(obj, "to_dict") else obj
        data = jsonout.clean(data)
    if kind and isinstance(data, dict):
        data = {"schema": f"optbench.{kind}/{jsonout.SCHEMA_VERSION}", **data}
    text = json.dumps(data, indent=indent, allow_nan=False, ensure_ascii=False)
    if strikes is not None:
        pad = " " * (indent or 0)
        sep = ",\n" + pad * 2 if indent else ","
        body = json.dumps(strikes, allow_nan=False, ensure_ascii=False)[1:-1]
        body = body.replace("}, {", "}" + sep + "{")
        head = f",\n{pad}\"strikes\": [\n{pad * 2}" if indent else ',"strikes":['
        tail = f"\n{pad}]\n}}" if indent else "]}"
        text = text[:text.rstrip().rfind("}")].rstrip() + head + body + tail
    return text + "\n"


@pytest.fixture(scope="module")
def comparison():
    from optbench.analysis.compare import compare
    return compare(DEMO)


def test_compare_json_equals_the_reference_rendering(comparison):
    assert len(comparison.strike_frame()) > 500
    for indent in (2, None, 4):
        fast = jsonout.dumps(comparison, kind="compare", indent=indent)
        assert fast == reference_dumps(comparison, kind="compare", indent=indent)
    json.loads(fast)


def test_hedge_json_equals_the_reference_rendering(comparison):
    from optbench.analysis.hedge import hedge_from_comparison
    from optbench.analysis.results import HedgeRequest
    estimate = hedge_from_comparison(comparison, HedgeRequest(1e6, days=91),
                                     n_paths=2000, seed=7)
    assert jsonout.dumps(estimate, kind="hedge") == reference_dumps(estimate, kind="hedge")


class _Table:
    """A result-like object whose per-strike table is any frame."""

    def __init__(self, frame):
        self.frame = frame

    def strike_frame(self):
        return self.frame

    def to_dict(self, strikes=True):
        return {"asof": "2026-01-02", "n": len(self.frame)}


def _awkward_frame(n: int = 40) -> pd.DataFrame:
    rng = np.random.default_rng(3)
    x = rng.standard_normal(n) * 10.0 ** rng.integers(-20, 20, n)
    x[::7] = np.nan
    x[3] = np.inf
    x[5] = -np.inf
    x[6] = -0.0
    dates = pd.Series(pd.to_datetime("2026-01-02")
                      + pd.to_timedelta(rng.integers(0, 900, n), unit="D"))
    dates[4] = pd.NaT
    text = np.array(["C", "P", 'quote "a"', "naïve ✓", "tab\there", "50%", None, "\\"],
                    dtype=object)[rng.integers(0, 8, n)]
    nullable = pd.array(rng.integers(0, 5, n), dtype="Int64")
    nullable[2] = pd.NA
    return pd.DataFrame({
        "expiry": dates, "strike": x, "f32": x.astype(np.float32),
        "is_call": rng.integers(0, 2, n).astype(bool), "line": rng.integers(-5, 10**12, n),
        "u8": rng.integers(0, 255, n).astype(np.uint8), "type": text,
        "type_str": pd.array(np.where(rng.integers(0, 2, n) == 1, "C", "P"), dtype="string"),
        "ts": [pd.Timestamp("2026-03-04")] * n, "obj_num": [1.5, 2, None, np.nan] * (n // 4),
        "nullable": nullable, "big": np.full(n, 1e22), "tiny": np.full(n, 1e-7),
        "100% key \"q\"": np.arange(n, dtype=float) / 3,
    })


@pytest.mark.parametrize("indent", [2, None])
def test_records_equal_the_encoder_on_every_kind_of_column(indent):
    frame = _awkward_frame()
    # a nullable integer column with a missing value is refused by both renderings
    with pytest.raises(ValueError, match="not JSON compliant"):
        reference_dumps(_Table(frame), indent=indent)
    with pytest.raises(ValueError, match="not JSON compliant"):
        jsonout.dumps(_Table(frame), indent=indent)
    frame = frame.drop(columns="nullable")
    table = _Table(frame)
    expected = reference_dumps(table, indent=indent)
    assert jsonout.dumps(table, indent=indent) == expected
    assert jsonout.records_text(frame) == json.dumps(jsonout.frame_records(frame),
                                                     ensure_ascii=False)[1:-1]
    # an empty table takes the record-by-record path; duplicate column names fail
    # the same way in both
    assert jsonout.dumps(_Table(frame.iloc[:0])) == reference_dumps(_Table(frame.iloc[:0]))
    dup = frame[["strike", "line"]].set_axis(["a", "a"], axis=1)
    for render in (jsonout.dumps, reference_dumps):
        with pytest.raises(AttributeError):
            render(_Table(dup))


def _run(*args, cwd=ROOT) -> bytes:
    out = subprocess.run([sys.executable, "-m", "optbench", *map(str, args)],
                         capture_output=True, cwd=cwd, timeout=300)
    assert out.returncode == 0, out.stderr.decode()
    return out.stdout


def _args(command: str, argv: list[str]):
    from optbench.cli import build_parser
    return build_parser((command,)).parse_args([command, *argv])


def test_compare_process_writes_what_render_gives(comparison, tmp_path):
    from optbench.commands.compare import render
    argv = [str(DEMO)]
    stdout = _run("compare", *argv, "--format", "json")
    assert stdout.decode("utf-8") == render(comparison, _args("compare", argv), "json")
    _run("compare", *argv, "-o", tmp_path / "c.csv", "-o", tmp_path / "c.txt")
    args = _args("compare", argv + ["-o", "c.txt"])
    assert (tmp_path / "c.csv").read_text("utf-8") == str(render(comparison, args, "csv"))
    table = str(render(comparison, args, "table"))
    assert (tmp_path / "c.txt").read_text("utf-8") == table + ("" if table.endswith("\n")
                                                               else "\n")


def test_hedge_process_writes_what_render_gives(tmp_path, monkeypatch):
    from optbench.commands import hedge as cmd
    argv = [str(DEMO), "--portfolio", "1000000", "--days", "91"]
    stdout = _run("hedge", *argv, "--format", "json")
    _run("hedge", *argv, "-o", tmp_path / "h.csv", "-o", tmp_path / "h.txt")
    args = _args("hedge", argv)
    captured = {}

    def keep(args, render, plan):
        captured["render"] = render
    monkeypatch.setattr(cmd, "write_outputs", keep)
    assert cmd.run(args) == 0
    render = captured["render"]
    assert stdout.decode("utf-8") == render("json")
    assert (tmp_path / "h.csv").read_text("utf-8") == str(render("csv"))
    table = str(render("table"))
    assert (tmp_path / "h.txt").read_text("utf-8") == table + ("" if table.endswith("\n")
                                                               else "\n")


def test_a_closed_pipe_ends_quietly():
    """``optbench compare --format json | head -c 10``: the reader goes away early;
    the process still ends with status 0 and no traceback."""
    proc = subprocess.Popen([sys.executable, "-m", "optbench", "compare", str(DEMO),
                             "--format", "json"], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, cwd=ROOT)
    proc.stdout.read(10)
    proc.stdout.close()
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=300) == 0
    assert "Traceback" not in err and "Exception ignored" not in err


@pytest.mark.skipif(not Path("/dev/full").exists(), reason="needs /dev/full (Linux)")
@pytest.mark.parametrize("fmt", ["json", "table"])
def test_a_full_disk_under_stdout_is_one_line(fmt):
    """``optbench compare ... > /dev/full``: every write fails with ENOSPC; the user
    gets one line naming stdout and the reason, status 1, no traceback."""
    with open("/dev/full", "w") as full:
        proc = subprocess.run([sys.executable, "-m", "optbench", "compare", str(DEMO),
                               "--format", fmt], stdout=full, stderr=subprocess.PIPE,
                              cwd=ROOT, timeout=300)
    err = proc.stderr.decode()
    assert proc.returncode == 1
    assert "Traceback" not in err and "Exception ignored" not in err
    assert err.strip().splitlines() == [
        "optbench: error: the output (stdout): No space left on device (errno 28); "
        "the output is incomplete"]
