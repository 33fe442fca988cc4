"""``optbench fit``: JSON keys of DESIGN.md, agreement with the library call, one-line
errors. The numbers themselves are checked against arch in test_garch.py."""
from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from optbench.cli import main


def _history_csv(path, n, constant=False):
    """The last n+1 closes of arch's bundled S&P 500 sample (arch.data.sp500) as a
    history file; ``constant`` repeats one price instead (a bad-input case)."""
    from arch.data import sp500

    prices = sp500.load()["Adj Close"].iloc[-(n + 1):]
    close = np.full(n + 1, 100.0) if constant else prices.to_numpy()
    dates = prices.index.strftime("%Y-%m-%d")
    lines = ["date,close"] + [f"{d},{c:.6f}" for d, c in zip(dates, close)]
    path.write_text("\n".join(lines) + "\n")
    return path


def test_fit_json_has_the_design_keys(tmp_path, capsys):
    hist = _history_csv(tmp_path / "history.csv", 1200)
    assert main(["fit", str(hist), "--model", "garch", "--dist", "normal",
                 "--format", "json", "--horizons", "5,21,63"]) == 0
    doc = json.loads(capsys.readouterr().out)
    m = doc["model"]
    for key in ("name", "dist", "params", "std_errors", "loglik", "aic", "bic", "converged",
                "fallback_reason", "persistence", "half_life_days", "long_run_vol"):
        assert key in m
    assert [row["trading_days"] for row in doc["term_structure"]] == [5, 21, 63]
    for row in doc["term_structure"]:
        assert row["low"] <= row["forecast_vol"] <= row["high"]
    assert "not advice" in doc["caution"]
    # the command shows exactly what the library computes
    from optbench.data.history import load_history
    from optbench.volatility.garch import fit_garch
    fit = fit_garch(load_history(hist).returns, "garch", "normal")
    assert m["loglik"] == pytest.approx(fit.loglik, rel=1e-12)
    assert doc["term_structure"][1]["forecast_vol"] == pytest.approx(fit.forecast_vol(21))


def test_fit_table_and_csv(tmp_path, capsys):
    hist = _history_csv(tmp_path / "history.csv", 800)
    assert main(["fit", str(hist), "--model", "gjr"]) == 0
    out = capsys.readouterr().out
    assert "Forecast volatility" in out and "gamma" in out and "not advice" in out
    out_file = tmp_path / "ts.csv"
    assert main(["fit", str(hist), "--model", "garch", "--format", "csv",
                 "-o", str(out_file)]) == 0
    rows = out_file.read_text().splitlines()
    assert rows[0].startswith("trading_days,forecast_vol,low,high") and len(rows) == 7


@pytest.mark.parametrize("n,constant,needle", [(100, False, "at least 250"),
                                               (400, True, "constant")])
def test_fit_bad_history_is_one_line_exit_2(tmp_path, n, constant, needle):
    hist = _history_csv(tmp_path / "history.csv", n, constant=constant)
    out = subprocess.run([sys.executable, "-m", "optbench", "fit", str(hist)],
                         capture_output=True, text=True)
    assert out.returncode == 2
    assert "Traceback" not in out.stderr and len(out.stderr.strip().splitlines()) == 1
    assert needle in out.stderr and "history.csv" in out.stderr


def test_fit_bad_horizons_exit_2(tmp_path):
    hist = _history_csv(tmp_path / "history.csv", 300)
    out = subprocess.run([sys.executable, "-m", "optbench", "fit", str(hist),
                          "--horizons", "5,x"], capture_output=True, text=True)
    assert out.returncode == 2 and "not a whole number" in out.stderr
