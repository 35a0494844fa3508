"""The fitted model at every reading (nullfit.fitting.model): drift model and folded signal.

References: the joint fit's own residuals (a different route to the same drift), and the χ²
law (scipy.stats) for binned means of a simulated scan with known harmonics.
"""

import warnings
from pathlib import Path

import numpy as np
from scipy import stats

from nullfit import fit_scan, read_scan, simulate_scan
from nullfit.fitting.model import drift_model, fold, harmonic_part

DEMO = Path(__file__).resolve().parents[2] / "data_demo"
TRUTH = {1: (0.02, 40.0), 2: (0.01, 75.0)}  # k: (amplitude, phase in degrees), invented


def test_drift_refit_equals_fit_residual_route():
    """The per-turn drift refitted turn by turn (vectorised) equals signal − harmonics −
    residuals of the joint per-turn-drift fit, which holds the same drift by construction."""
    import dataclasses

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan = read_scan(DEMO / "drifting.csv")
        for drift in ("per-turn", "per-turn:2"):
            fit = fit_scan(scan, drift=drift, errors="hac")
            via_residuals = drift_model(scan, fit)
            refit = drift_model(scan, dataclasses.replace(fit, residuals=None))
            assert via_residuals.how == "residuals" and refit.how == "per-turn refit"
            np.testing.assert_array_equal(via_residuals.fitted, refit.fitted)
            np.testing.assert_allclose(refit.drift[refit.fitted], via_residuals.drift[refit.fitted],
                                       rtol=0, atol=1e-12)


def test_folded_noisy_means_agree_with_fit_within_errors():
    # white noise: the binned means scatter about the bin-averaged fitted model with their
    # standard errors; χ² over 16 bins below its 99.9 % point (fixed seed).
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scan, _ = simulate_scan(n_turns=30, samples_per_turn=48, harmonics=TRUTH,
                                drift={"offset": 0.1, "slope": 1e-4}, sigma=0.004, rng=5)
        fit = fit_scan(scan)
    f = fold(scan, fit, bins=16)
    # model averaged over the same three azimuths per bin as the readings
    model = np.mean([harmonic_part(np.deg2rad(f.centers_deg + d), fit) for d in (-7.5, 0.0, 7.5)], axis=0)
    chi2 = float(np.sum(((f.mean - model) / f.sem) ** 2))
    assert np.all(f.n_turns == 30)
    assert chi2 < stats.chi2.ppf(0.999, 16)  # scipy quantile
    assert chi2 > stats.chi2.ppf(0.001, 16)  # the errors are not grossly overestimated either
