"""Hedge requests mean what they say: a collar's call below its put, a floor or a
tenor with nothing listed near it, out-of-scale portfolio values and betas are
one-line errors (or a warning naming what was used instead), never a hedge of
something else. Strikes and days are read from the demo chain file with the csv
module; tolerances are :mod:`optbench.analysis.hedge`'s stated common-practice ones.
"""
from __future__ import annotations

import csv
from pathlib import Path

import pytest

from optbench.analysis import hedge as hedge_mod
from optbench.analysis.compare import compare
from optbench.analysis.hedge import hedge
from optbench.analysis.results import HedgeRequest
from optbench.errors import InputError

DEMO = Path(__file__).resolve().parents[2] / "chains" / "ZPHX"


@pytest.fixture(scope="module")
def comparison():
    return compare(DEMO, model="garch", dist="normal", n_paths=200)


def _hedge(c, **kw):
    kw.setdefault("portfolio_value", 1e7)
    return hedge(None, comparison=c, n_paths=200, **kw)


def _put_strikes(expiry: str) -> list[float]:
    with open(DEMO / "chain.csv", newline="") as fh:
        return sorted({float(r["strike"]) for r in csv.DictReader(fh)
                       if r["expiry"] == expiry and r["type"] == "P"})


@pytest.mark.parametrize("call_strike", [1.0, 4000.0])
def test_collar_call_below_the_put_is_an_error(comparison, call_strike):
    with pytest.raises(InputError) as err:
        _hedge(comparison, structure="collar", call_strike=call_strike)
    assert str(err.value).startswith("--call-strike: ") and "above" in str(err.value)


def test_collar_call_above_the_put_still_works(comparison):
    est = _hedge(comparison, structure="collar", call_strike=5600.0)
    assert est.strikes[1] > est.strikes[0]


def test_floor_with_no_listed_put_near_it_is_an_error(comparison):
    with pytest.raises(InputError) as err:
        _hedge(comparison, floor=0.01)
    msg = str(err.value)
    assert msg.startswith("--floor: ") and "no listed put near" in msg
    lowest = _put_strikes(comparison.expiries[0].expiry.isoformat())[0]
    assert f"{lowest:,.2f}" in msg or "nearest is" in msg


def test_floor_between_listed_strikes_names_the_one_used(comparison):
    est = _hedge(comparison, floor=0.90, days=91)
    listed = _put_strikes(est.expiry.isoformat())
    asked = 0.90 * comparison.spot
    nearest = min(listed, key=lambda k: (abs(k - asked), k))
    assert est.strike == nearest
    off = abs(nearest - asked) / comparison.spot
    named = any("no put at" in w for w in est.warnings)
    assert named == (off > hedge_mod.STRIKE_WARN)


def test_days_far_beyond_the_longest_expiry_is_an_error(comparison):
    with pytest.raises(InputError) as err:
        _hedge(comparison, days=100000)
    msg = str(err.value)
    assert msg.startswith("--days: ") and "721 days away" in msg


def test_days_between_expiries_warns_with_the_one_used(comparison):
    days = [e.calendar_days for e in comparison.expiries]
    # halfway between two listed expiries more than a month apart
    a, b = next((x, y) for x, y in zip(days, days[1:]) if y - x > 60)
    est = _hedge(comparison, days=(a + b) // 2)
    assert any(f"no expiry at {(a + b) // 2} days" in w for w in est.warnings)


@pytest.mark.parametrize("field,value,flag", [("beta", 1e308, "--beta"),
                                              ("hedge_ratio", 1e308, "--hedge-ratio"),
                                              ("portfolio_value", -5, "--portfolio"),
                                              ("portfolio_value", 1e308, "--portfolio")])
def test_out_of_scale_request_values_are_one_line_errors(comparison, field, value, flag):
    with pytest.raises(InputError) as err:
        _hedge(comparison, **{field: value})
    assert str(err.value).startswith(flag + ": ")


def test_request_alone_checks_beta_range():
    with pytest.raises(InputError, match="at most 10"):
        HedgeRequest(portfolio_value=1e6, beta=11)
    assert HedgeRequest(portfolio_value=1e6, beta=2.5).beta == 2.5


def test_put_spread_lower_floor_far_from_any_listed_put_is_an_error(comparison):
    with pytest.raises(InputError) as err:
        _hedge(comparison, structure="put_spread", floor=0.95, lower_floor=0.02)
    assert str(err.value).startswith("--lower-floor: ")
