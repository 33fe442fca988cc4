"""The invented sample universe (``optbench demo --universe N``).

Distinct invented codes and names, the intended characters (calm, turbulent,
trending, switching, one broken member), reproducible from the seed, every folder
loads except the broken one, and ``optbench screen`` reports the broken one in its
own row while the others get verdicts.
"""
from __future__ import annotations

import json
import re

import numpy as np
import pytest

from optbench import demo_universe as du
from optbench.cli import main
from optbench.errors import InputError

N = 9


@pytest.fixture(scope="module")
def universe(tmp_path_factory):
    folder = tmp_path_factory.mktemp("universe") / "sample"
    assert main(["demo", "--universe", str(N), "--out", str(folder)]) == 0
    return folder, du.generate_universe(N)


def test_codes_and_names_are_distinct_and_plainly_invented(universe):
    folder, members = universe
    codes = [m.code for m, _ in members]
    names = [m.name for m, _ in members]
    assert len(set(codes)) == N and len(set(names)) == N
    # letter, digit, two letters: a digit in second place marks the code as invented
    assert all(re.fullmatch(r"[A-Z]\d[A-Z]{2}", c) for c in codes), codes
    assert sorted(p.name for p in folder.iterdir()) == sorted(codes)
    many = [code for code, _ in du.invented_names(np.random.default_rng(1), 500)]
    assert len(set(many)) == 500


def test_every_character_is_dealt_and_exactly_one_member_is_broken(universe):
    _, members = universe
    kinds = [m.character for m, _ in members]
    assert set(kinds) == {"calm", "turbulent", "trending", "switching", "broken"}
    assert kinds.count("broken") == 1
    assert du.characters_for(np.random.default_rng(0), 1) == ["calm"]   # one: nothing broken


def test_same_seed_same_bytes_other_seed_other_data():
    a = [files for _, files in du.generate_universe(4, seed=11)]
    b = [files for _, files in du.generate_universe(4, seed=11)]
    c = [files for _, files in du.generate_universe(4, seed=12)]
    assert a == b and a != c


def test_each_folder_loads_except_the_broken_one(universe):
    from optbench.data.scenario import load_scenario
    folder, members = universe
    for member, _ in members:
        path = folder / member.code
        if member.character == "broken":
            with pytest.raises(InputError, match="ask"):
                load_scenario(path)
            continue
        sc = load_scenario(path)
        assert sc.code == member.code and sc.name == member.name
        assert sc.chain.quality.rows_used == sc.chain.quality.rows_in   # clean quotes
        assert sc.chain.spot == pytest.approx(sc.history.close[-1])   # one market
        assert set(sc.chain.quotes["style"]) == {"european"}
        assert "invented" in sc.meta["note"].lower()


def test_characters_show_in_the_histories(universe):
    """Annualised realized vol (close-to-close, sqrt(252) x std of daily log returns,
    the textbook estimator: Hull, Options, Futures, and Other Derivatives, ch. 15)
    sets the calm members apart from the turbulent ones; the trending members move
    far from where they started."""
    from optbench.data.history import load_history
    folder, members = universe
    vol, drift = {}, {}
    for m, _ in members:
        if m.character == "broken":
            continue
        h = load_history(folder / m.code / "history.csv")
        vol.setdefault(m.character, []).append(np.std(h.returns) * np.sqrt(252))
        drift.setdefault(m.character, []).append(abs(np.mean(h.returns)) * 252)
    assert min(vol["turbulent"]) > max(vol["calm"]) + 0.10
    assert np.mean(drift["trending"]) > 2 * np.mean(drift["calm"])


def test_cli_json_lists_the_members_and_needs_force_for_a_full_folder(universe, capsys):
    folder, members = universe
    capsys.readouterr()
    assert main(["demo", "--universe", str(N), "--out", str(folder)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "--force" in err
    assert main(["demo", "--universe", str(N), "--out", str(folder), "--force",
                 "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert [m["code"] for m in doc["members"]] == [m.code for m, _ in members]
    assert doc["invented"] is True and doc["other_scenarios"] == []


def test_force_over_a_larger_universe_names_the_folders_left_behind(tmp_path, capsys):
    folder = tmp_path / "u"
    assert main(["demo", "--universe", "4", "--out", str(folder)]) == 0
    assert main(["demo", "--universe", "2", "--seed", "5", "--out", str(folder),
                 "--force"]) == 0
    out = capsys.readouterr().out
    assert "also holds 4 other scenario folder(s)" in out


def test_cli_rejects_a_universe_too_large(tmp_path, capsys):
    assert main(["demo", "--universe", "501", "--out", str(tmp_path / "x")]) == 2
    assert "--universe" in capsys.readouterr().err


def test_screen_reports_the_broken_member_in_its_own_row(universe, capsys):
    folder, members = universe
    capsys.readouterr()
    assert main(["screen", str(folder), "--format", "json", "--workers", "1",
                 "--tenors", "30,91", "--paths", "500"]) == 0
    doc = json.loads(capsys.readouterr().out)
    broken = next(m.code for m, _ in members if m.character == "broken")
    rows = doc["rows"]
    assert {r["code"] for r in rows} == {m.code for m, _ in members}
    bad = [r for r in rows if r["code"] == broken]
    assert len(bad) == 2 and all("ask" in r["error"] and r["verdict"] is None for r in bad)
    good = [r for r in rows if r["code"] != broken]
    assert all(r["verdict"] in ("rich", "fair", "cheap") for r in good)
    assert [f["code"] for f in doc["failures"]] == [broken]
    # the table shows each row's code
    assert main(["screen", str(folder), "--workers", "1", "--tenors", "30",
                 "--paths", "500"]) == 0
    table = capsys.readouterr().out
    assert all(m.code in table for m, _ in members)


def test_without_out_a_universe_goes_to_the_user_data_folder(tmp_path, monkeypatch, capsys):
    from optbench.data import scenario
    monkeypatch.setattr(scenario, "user_data_folder", lambda: tmp_path / "data")
    assert main(["demo", "--universe", "3", "--seed", "0"]) == 0
    target = tmp_path / "data" / "universes" / "3-seed0"
    assert str(target) in capsys.readouterr().out
    assert len([p for p in target.iterdir() if p.is_dir()]) == 3
