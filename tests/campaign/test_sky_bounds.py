"""The published-bounds table: bundled rows carry journal references and say they are recalled from
memory; user tables are checked with one-line errors; the comparison frame is like with like."""

import numpy as np
import pytest
from scipy import stats

from nullfit.campaign.sky import fit_sky
from nullfit.campaign.sky_bounds import BOUNDS_COLUMNS, bounds_table, published_sky_bounds
from nullfit.core.errors import ScanError


def test_bundled_table_is_honest_about_its_sources():
    df = published_sky_bounds()
    assert list(df.columns) == list(BOUNDS_COLUMNS)
    assert len(df) >= 10
    for _, r in df.iterrows():
        assert "from memory" in r["note"]
        assert any(j in r["reference"] for j in ("Phys. Rev.", "Nat. Commun.")) and "(" in r["reference"]
        assert r["parameter"] in ("e_*", "o_*", "P_MM") and r["sigma"] > 0


def test_user_tables_are_checked(tmp_path):
    p = tmp_path / "b.csv"
    p.write_text("parameter,value,sigma\ne_XY,1,2\n", encoding="utf-8")
    with pytest.raises(ScanError, match="lacks column"):
        published_sky_bounds(p)
    header = ",".join(BOUNDS_COLUMNS)
    p.write_text(f"{header}\ne_XY,1e-17,-1,sigma,0.68,2020,365,x,\"J. 1, 2 (2020)\",n\n", encoding="utf-8")
    with pytest.raises(ScanError, match=r"row 1, column 'sigma'"):
        published_sky_bounds(p)
    p.write_text(f"{header}\ne_XY,,1e-17,sigma,0.68,2020,365,x,\"J. 1, 2 (2020)\",n\n", encoding="utf-8")
    with pytest.raises(ScanError, match="central value"):
        published_sky_bounds(p)


def test_bounds_table_puts_like_with_like(sky_turns, tmp_path):
    table, _ = sky_turns("days", n_runs=24, turn_period_s=1800.0, seed=3)
    fit = fit_sky(table, "sme", confidence_level=0.9)
    p = tmp_path / "b.csv"
    p.write_text(",".join(BOUNDS_COLUMNS) + "\ne_XY,2e-17,1e-17,sigma,0.6827,2020,365,x,\"J. 1, 2 (2020)\",n\n"
                 "o_*,,1e-13,sigma_order,0.6827,2020,365,x,\"J. 1, 2 (2020)\",n\n", encoding="utf-8")
    bt = bounds_table(fit, published_sky_bounds(p))
    z = stats.norm.ppf(0.95)  # the campaign's 90% CL, two-sided (scipy as reference)
    row = bt[(bt["parameter"] == "e_XY") & (bt["source"] != "this campaign")].iloc[0]
    assert row["bound_abs"] == pytest.approx(2e-17 + z * 1e-17)
    assert (row["lower"], row["upper"]) == pytest.approx((2e-17 - z * 1e-17, 2e-17 + z * 1e-17))
    o = bt[(bt["parameter"] == "o_XZ") & (bt["source"] != "this campaign")].iloc[0]
    assert o["bound_abs"] == pytest.approx(z * 1e-13) and np.isnan(o["estimate"])
    own = bt[bt["source"] == "this campaign"].set_index("parameter")
    lim = fit.interval("e_YZ")
    assert own.loc["e_YZ", "bound_abs"] == pytest.approx(max(abs(lim.lower), abs(lim.upper)))
    assert len(bt[bt["parameter"] == "e_XZ"]) == 1  # no published row for e_XZ in this table
