"""Figures of the sky analysis draw what the campaign stage computed (and return their Axes)."""

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402

from nullfit.campaign.sky import fit_sky, quadrature_curves, sidereal_fold  # noqa: E402
from nullfit.campaign.sky_bounds import bounds_table  # noqa: E402
from nullfit.campaign.sky_data import sky_data  # noqa: E402
from nullfit.figures import plot_quadratures, plot_sidereal_fold, plot_sky_bounds  # noqa: E402


@pytest.fixture(scope="module")
def campaign():
    import conftest

    truth = {k: 20 * v for k, v in conftest.SKY_TRUTH.items()}
    table, _ = conftest._sky_turns("days", n_runs=24, turn_period_s=1800.0, seed=4, truth=truth)
    data = sky_data(table)
    return data, fit_sky(data, "sme")


def _gids(ax):
    return {a.get_gid() for a in ax.get_children() if a.get_gid()}


def test_sidereal_fold_shows_data_and_model(campaign):
    data, fit = campaign
    fold = sidereal_fold(data, fit)
    # the binned means follow the model: with a signal of ~20 σ of the campaign the bins track it
    for ch in ("B", "C"):
        f = fold[fold["channel"] == ch]
        assert len(f) == 24 and f["n"].sum() == data.n_turns
        assert np.corrcoef(f["mean"], f["model"])[0, 1] > 0.8
    ax = plot_sidereal_fold(fold)
    assert {"sky-fold-C", "sky-fold-B", "sky-model-C", "sky-model-B"} <= _gids(ax)
    assert "sidereal" in ax.get_xlabel()
    plt.close("all")


def test_quadratures_against_annual_phase(campaign):
    data, fit = campaign
    days, curve = quadrature_curves(data, fit)
    assert len(days) == 24 and {"W_deg", "Cs2", "sigma_Cs2"} <= set(days.columns)
    fig, ax = plt.subplots()
    out = plot_quadratures(days, curve, "Bs1", ax=ax)
    assert out is ax and {"sky-days", "sky-curve"} <= _gids(ax)
    with pytest.raises(ValueError, match="column"):
        plot_quadratures(days, curve, "Xs9")
    plt.close("all")


def test_bounds_side_by_side(campaign):
    _, fit = campaign
    table = bounds_table(fit)
    own = table[table["source"] == "this campaign"]
    assert list(own["parameter"]) == list(fit.names)
    assert np.all(own["bound_abs"] >= np.abs(own["estimate"]))
    ax = plot_sky_bounds(table)
    assert {"sky-bound-campaign", "sky-bound-published"} <= _gids(ax)
    assert ax.get_xscale() == "log"
    assert f"{100 * fit.confidence_level:g} % CL" in ax.get_xlabel()  # the level of every bound is on the axis
    plt.close("all")
