r"""A per-turn table drawn directly from the sidereal model plus noise — what the sky estimators
consume — for fast calibration studies (thousands of simulated campaigns).

Every run of the schedule (:func:`nullfit.simulation.sky.campaign_schedule`) turns once every
``turn_period_s``; turn ``k`` has its mid time at ``start + (k + ½)·turn_period_s``.  Its table-frame
coefficients are the model's

.. math::  (c_2, s_2) = \mathtt{c2s2\_from\_bc}(B(t), C(t)) + (n_c, n_s) + (o_c, o_s)_{run},

with independent normal ``n`` of standard deviation ``sigma_turn`` (the log's unit) and, if
``lab_sigma > 0``, a lab-fixed offset per run drawn once (normal, ``lab_sigma`` per component).  The
per-turn ``sigma_c2``, ``sigma_s2`` columns are ``sigma_turn``; ``resid_rms`` is NaN (no readings
were simulated) and ``n_samples`` the nominal ``samples_per_turn``.

What this shortcut leaves out: a per-turn fit of real readings (offset, slope and harmonics in
each turn) also responds, at first order, to the change of ``B``, ``C`` *during* the turn; the
derivative leaks into the coefficients by an amount of order ``ω T`` of the signal — measured
+0.1 % for 60-s and +0.5 % for 300-s turns of 16 readings (``docs/sky-analysis.md``, section 10).
It matters only for a signal many σ above the noise (0.05 σ at 10 σ for 300-s turns).  The per-reading route is
:func:`nullfit.simulation.sky.simulate_sky_campaign`.
"""

from __future__ import annotations

import numpy as np

from ..core.conventions import make_rng
from ..hypothesis.sidereal import c2s2_from_bc, sidereal_signal
from ..simulation.sky import SkyTruth, check_campaign, manifest_tables
from .turn_table import NS_PER_S, SCHEMA_VERSION, TurnTable, turn_columns

__all__ = ["simulate_sky_turns"]


def simulate_sky_turns(model: str, params, *, site, apparatus, schedule, turn_period_s: float = 300.0,
                       sigma_turn: float = 1e-16, lab_sigma: float = 0.0, samples_per_turn: int = 16,
                       orbit: str = "circular", rotation: bool = False, pair: bool = True, rng=None):
    """Simulate a campaign's per-turn table: ``(TurnTable, SkyTruth)`` (see the module docstring)."""
    import pandas as pd

    from .. import __version__

    params, schedule = check_campaign(model, params, schedule)
    if not (np.isfinite(sigma_turn) and sigma_turn > 0):
        raise ValueError(f"sigma_turn must be positive, not {sigma_turn!r}")
    gen, seed = make_rng(rng)
    g_noise, g_lab = gen.spawn(2)
    period_ns = int(round(float(turn_period_s) * NS_PER_S))
    s_tab, a_tab = manifest_tables(site, apparatus)
    frames, runs, lab = [], {}, {}
    ns_all = []
    for slot in schedule:
        n = int(slot.duration_s // float(turn_period_s))
        if n < 1:
            raise ValueError(f"run {slot.run_id}: {slot.duration_s:g} s is shorter than one turn")
        ns = slot.start_unix * NS_PER_S + (np.arange(n, dtype=np.int64) * period_ns + period_ns // 2)
        ns_all.append(ns)
        runs[slot.run_id] = {"source": "<simulated per-turn table>", "sha256": None, "unit": apparatus.signal,
                             "epoch_unix": int(slot.start_unix), "absolute_time": True, "apparatus": dict(a_tab),
                             "site": dict(s_tab), "n_samples": n * int(samples_per_turn), "n_turns": n,
                             "dropped_rows": 0, "dropped": {}, "excluded": {}}
    ns = np.concatenate(ns_all)
    epoch = int(ns.min() // NS_PER_S)
    sig = sidereal_signal(params.model, params, site=site, epoch_unix=epoch,
                          time_s=(ns - epoch * NS_PER_S).astype(float) / NS_PER_S, orbit=orbit, rotation=rotation,
                          pair=pair)
    c2, s2 = c2s2_from_bc(sig.B, sig.C, site=site, apparatus=apparatus)
    noise = g_noise.standard_normal((2, ns.size)) * float(sigma_turn)
    c2, s2 = c2 + noise[0], s2 + noise[1]
    start = 0
    for slot, part in zip(schedule, ns_all):
        n = part.size
        sl = slice(start, start + n)
        if lab_sigma > 0:
            oc, os_ = (float(x) for x in g_lab.standard_normal(2) * float(lab_sigma))
            c2[sl] += oc
            s2[sl] += os_
            lab[slot.run_id] = (oc, os_)
        frames.append(pd.DataFrame({
            "run": slot.run_id, "turn": np.arange(n, dtype=np.int64), "t_mid_ns": part,
            "n_samples": np.full(n, int(samples_per_turn), np.int64), "c2": c2[sl], "s2": s2[sl],
            "sigma_c2": np.full(n, float(sigma_turn)), "sigma_s2": np.full(n, float(sigma_turn)),
            "resid_rms": np.full(n, np.nan), "complete": np.ones(n, bool)}))
        start += n
    truth = SkyTruth(params, site, apparatus, schedule, seed, "per-turn", orbit, bool(rotation), bool(pair),
                     {"sigma_turn": float(sigma_turn), "lab_sigma": float(lab_sigma),
                      "turn_period_s": float(turn_period_s)}, lab)
    meta = {"schema": SCHEMA_VERSION, "nullfit_version": __version__, "harmonics": [2], "drift": "per-turn",
            "complete_only": True,
            "settings": {"simulated": "per-turn table from the sidereal model plus noise (SYNTHETIC)",
                         "seed": seed, "model": params.model, "truth": params.as_dict()},
            "runs": runs, "failed": {}}
    return TurnTable(pd.concat(frames, ignore_index=True)[turn_columns([2])], meta), truth
