"""The screen: one ranked table across underlyings, the same numbers in this process,
in local processes and on a real Dask LocalCluster; a broken underlying is reported
in its own rows and does not stop the screen.

Outside checks: each row's protection cost is recomputed by hand from the chain file
(the ask of the put at the reported strike, scaled to 1,000,000 of notional), and
the CSV and XLSX exports are re-read with pandas and openpyxl.
"""
from __future__ import annotations

import io
import json
import shutil
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from optbench.analysis.compare import compare
from optbench.errors import InputError
from optbench.report.screen import screen_csv, screen_xlsx
from optbench.screening.screen import rank_rows, screen
from optbench.screening.universe import find_scenarios

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"
PATHS = 500


def _copy_as(src: Path, dst: Path, code: str) -> None:
    shutil.copytree(src, dst)
    meta = (dst / "meta.toml").read_text().replace('code = "ZPHX"', f'code = "{code}"')
    (dst / "meta.toml").write_text(meta)


@pytest.fixture(scope="module")
def universe(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("universe")
    _copy_as(DEMO, root / "ZPHA", "ZPHA")
    _copy_as(DEMO, root / "ZPHB", "ZPHB")
    broken = root / "BRKN"
    broken.mkdir()
    (broken / "chain.csv").write_text("this is not an option chain\n")
    shutil.copy(DEMO / "history.csv", broken / "history.csv")
    (root / "notes").mkdir()          # not a scenario: skipped
    return root


@pytest.fixture(scope="module")
def result(universe):
    return screen(universe, workers=1, n_paths=PATHS)


def test_universe_lists_only_scenario_folders(universe):
    assert [p.name for p in find_scenarios(universe)] == ["BRKN", "ZPHA", "ZPHB"]


def test_every_underlying_and_tenor_has_a_row_with_its_code(result):
    assert len(result.rows) == 3 * 3
    codes = {r["code"] for r in result.rows}
    assert codes == {"ZPHA", "ZPHB", "BRKN"}
    for code in ("ZPHA", "ZPHB", "BRKN"):
        assert sorted(r["tenor_days"] for r in result.rows if r["code"] == code) == [30, 91, 182]


def test_broken_underlying_is_reported_not_fatal(result):
    assert [f["code"] for f in result.failures] == ["BRKN"]
    reason = result.failures[0]["reason"]
    assert "chain.csv" in reason
    broken = [r for r in result.rows if r["code"] == "BRKN"]
    assert all(r["error"] == reason and r["atm_iv"] is None for r in broken)
    assert all(r["code"] != "BRKN" for r in result.rows[:6])   # failures rank last


def test_rows_carry_the_comparison_numbers(result):
    comparison = compare(DEMO, n_paths=PATHS)
    by_expiry = {e.expiry.isoformat(): e for e in comparison.expiries}
    for r in (r for r in result.rows if r["code"] == "ZPHA"):
        e = by_expiry[r["expiry"]]
        # nearest listed expiry to the tenor
        assert abs(e.calendar_days - r["tenor_days"]) == min(
            abs(x.calendar_days - r["tenor_days"]) for x in comparison.expiries)
        assert r["atm_iv"] == pytest.approx(e.atm_iv, rel=1e-12)
        assert r["forecast_vol"] == pytest.approx(e.forecast_vol, rel=1e-12)
        assert r["verdict"] == e.verdict


def test_protection_cost_recomputed_from_the_chain_file(result):
    chain = pd.read_csv(DEMO / "chain.csv")
    # the demo carries one deliberately unparseable strike: read the column as numbers
    chain["strike"] = pd.to_numeric(chain["strike"], errors="coerce")
    spot = float(chain["underlying_price"].iloc[0])
    for r in (r for r in result.rows if r["code"] == "ZPHB"):
        puts = chain[(chain["expiry"] == r["expiry"]) & (chain["type"] == "P")
                     & (chain["strike"] == r["put_strike"])]
        ask = float(puts["ask"].iloc[0])
        assert r["protection_cost"] == pytest.approx(ask * 1_000_000 / spot, rel=1e-9)
        # the listed put nearest to 90% of spot
        strikes = chain.loc[(chain["expiry"] == r["expiry"]) & (chain["type"] == "P"), "strike"]
        assert abs(r["put_strike"] - 0.9 * spot) <= (strikes - 0.9 * spot).abs().min() + 1e-9
        assert r["protection_overpay"] == pytest.approx(
            r["protection_cost"] - r["protection_expected_payoff"], rel=1e-9)


def test_ranking_richest_first_and_ascending():
    rows = [{"code": "A", "tenor_days": 30, "iv_minus_forecast": 0.01},
            {"code": "B", "tenor_days": 30, "iv_minus_forecast": None},
            {"code": "C", "tenor_days": 30, "iv_minus_forecast": 0.03}]
    assert [r["code"] for r in rank_rows(rows)] == ["C", "A", "B"]
    assert [r["code"] for r in rank_rows(rows, descending=False)] == ["A", "C", "B"]
    with pytest.raises(InputError, match="--sort"):
        rank_rows(rows, "no_such_column")


def test_local_processes_give_the_same_rows(universe, result):
    parallel = screen(universe, workers=2, n_paths=PATHS)
    assert parallel.rows == result.rows
    assert parallel.failures == result.failures


@pytest.mark.slow
def test_dask_cluster_gives_the_same_rows(universe, result):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        on_dask = screen(universe, scheduler=cluster.scheduler_address, n_paths=PATHS)
    assert on_dask.rows == result.rows
    assert on_dask.failures == result.failures


def test_csv_and_xlsx_reread_equal_the_rows(result, tmp_path):
    frame = pd.read_csv(io.StringIO(screen_csv(result)))
    assert list(frame["code"]) == [r["code"] for r in result.rows]
    ok = [r for r in result.rows if r["atm_iv"] is not None]
    assert frame["atm_iv"].dropna().tolist() == pytest.approx([r["atm_iv"] for r in ok])
    path = tmp_path / "screen.xlsx"
    path.write_bytes(screen_xlsx(result))
    sheet = pd.read_excel(path)  # the table is the first sheet, at A1
    assert sheet["protection_cost"].dropna().tolist() == pytest.approx(
        [r["protection_cost"] for r in ok])
    failures = pd.read_excel(path, sheet_name="Failures")
    assert failures["code"].tolist() == ["BRKN"]


def test_command_line_json_and_errors(universe, tmp_path):
    out = subprocess.run([sys.executable, "-m", "optbench", "screen", str(universe),
                          "--workers", "1", "--paths", str(PATHS), "--tenors", "91",
                          "--format", "json"], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    doc = json.loads(out.stdout)
    assert doc["schema"] == "optbench.screen/1"
    assert {r["code"] for r in doc["rows"]} == {"ZPHA", "ZPHB", "BRKN"}
    assert "not advice" in doc["caution"]
    for args, needle in ((["--format", "xlsx"], "-o FILE"), (["--floor", "1.5"], "--floor"),
                         (["--tenors", "x"], "--tenors")):
        bad = subprocess.run([sys.executable, "-m", "optbench", "screen", str(universe),
                              *args], capture_output=True, text=True)
        assert bad.returncode == 2 and needle in bad.stderr
        assert len(bad.stderr.strip().splitlines()) == 1
    missing = subprocess.run([sys.executable, "-m", "optbench", "screen",
                              str(tmp_path / "nowhere")], capture_output=True, text=True)
    assert missing.returncode == 2 and "no such folder" in missing.stderr
