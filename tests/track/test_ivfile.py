"""Loading an implied-vol history: aliases, units per column, tenors as text,
every row used or rejected with its reason, one-line errors naming the file."""
from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from optbench.errors import InputError
from optbench.track.ivfile import load_iv_history


def _write(tmp_path, text: str, name: str = "iv.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_aliases_percent_columns_and_text_tenors(tmp_path):
    p = _write(tmp_path, "As Of,DTE,ATM Vol,25D Put,25D Call\n"
                         "2025-03-03,30,18.2,22.1,16.4\n"
                         "2025-03-03,3M,19.0,23.0,17.5\n"
                         "2025-03-04,1Y,20.5%,24.0,18.0\n")
    iv = load_iv_history(p)
    f = iv.frame
    assert list(f["tenor_days"]) == [30, 91, 365]     # 3 x 365/12 rounded, 365
    np.testing.assert_allclose(f["atm_iv"], [0.182, 0.19, 0.205])
    np.testing.assert_allclose(f["iv_25d_put"], [0.221, 0.23, 0.24])
    assert iv.units == {"atm_iv": "percent", "iv_25d_put": "percent",
                        "iv_25d_call": "percent"}
    assert f["expiry"].iloc[0] == pd.Timestamp("2025-04-02")
    assert iv.quality == {"rows_in": 3, "rows_used": 3, "rejected": {}}


def test_decimal_units_and_expiry_rows(tmp_path):
    p = _write(tmp_path, "date,expiry,atm_iv\n2025-03-03,2025-04-17,0.21\n"
                         "2025-03-04,2025-04-17,0.205\n")
    iv = load_iv_history(p)
    assert iv.units == {"atm_iv": "decimal"}
    assert list(iv.frame["tenor_days"]) == [45, 44]
    assert not iv.frame["tenor_given"].any()
    assert iv.frame["iv_25d_put"].isna().all()


def test_every_row_used_or_rejected_with_its_reason(tmp_path):
    p = _write(tmp_path, "date,tenor_days,atm_iv,iv_25d_put\n"
                         "2025-03-03,30,0.20,0.24\n"      # used
                         "not a date,30,0.20,\n"          # bad_date
                         "2025-03-04,,0.20,\n"            # no_tenor
                         "2025-03-05,-5,0.20,\n"          # bad_tenor
                         "2025-03-06,30,,\n"              # bad_vol
                         "2025-03-07,30,0,\n"             # bad_vol
                         "2025-03-10,30,7.5,\n"           # implausible (750 %)
                         "2025-03-03,30,0.20,0.24\n"      # exact repeat -> duplicate
                         "2025-03-11,30,0.21,abc\n")      # used, 25d cell left empty
    iv = load_iv_history(p)
    q = iv.quality
    assert q["rows_in"] == 9
    assert q["rows_in"] == q["rows_used"] + sum(q["rejected"].values())
    assert q["rejected"] == {"bad_date": 1, "no_tenor": 1, "bad_tenor": 1, "bad_vol": 2,
                             "implausible_vol": 1, "duplicate": 1}
    assert sorted(iv.rejected["line"]) == [3, 4, 5, 6, 7, 8, 9]
    assert iv.frame["iv_25d_put"].isna().sum() == 1
    assert any("abc" not in t and "iv_25d_put" in t for t in iv.issues)


def test_conflicting_rows_for_one_date_and_tenor_are_an_error(tmp_path):
    p = _write(tmp_path, "date,tenor_days,atm_iv\n2025-03-03,30,0.20\n2025-03-03,30,0.22\n")
    with pytest.raises(InputError, match=r"iv.csv: 2025-03-03 tenor 30 days is given twice "
                                         r"with different vols \(lines 2 and 3\)"):
        load_iv_history(p)


@pytest.mark.parametrize("text, problem", [
    ("tenor_days,atm_iv\n30,0.2\n", "missing column 'date'"),
    ("date,tenor_days\n2025-03-03,30\n", "missing column 'atm_iv'"),
    ("date,atm_iv\n2025-03-03,0.2\n", "missing column 'tenor_days' or 'expiry'"),
    ("date,tenor_days,atm_iv\n2025-03-03,30,\n", "no usable row"),
])
def test_one_line_errors_name_the_file(tmp_path, text, problem):
    p = _write(tmp_path, text)
    with pytest.raises(InputError) as err:
        load_iv_history(p)
    assert str(err.value).startswith(str(p)) and problem in str(err.value)
    assert "\n" not in str(err.value)


def test_parquet_reads_like_csv(tmp_path):
    frame = pd.DataFrame({"date": pd.to_datetime(["2025-03-03", "2025-03-04"]),
                          "tenor": [30, 30], "iv": [18.0, 18.5]})
    p = tmp_path / "iv.parquet"
    frame.to_parquet(p)
    iv = load_iv_history(p)
    np.testing.assert_allclose(iv.frame["atm_iv"], [0.18, 0.185])
    assert iv.units["atm_iv"] == "percent"
