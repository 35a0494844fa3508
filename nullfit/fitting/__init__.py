"""Fitting: a `Scan` into harmonic coefficients with honest errors.

In the order data pass through them: :mod:`.design` (harmonic and drift columns),
:mod:`.segments` (turns as row ranges), :mod:`.linalg` (small stacked solves), :mod:`.kernel`
(per-turn sums and solves), :mod:`.engine` (the per-turn engine), :mod:`.demodulate` (the per-turn
table), :mod:`.stream` (the fit of a log read in chunks), :mod:`.hac`
(Newey–West pieces), :mod:`.turn_errors` and :mod:`.joint` (the two estimators),
:mod:`.estimate` and :mod:`.scanfit` (the results), :mod:`.fit` (``fit_scan``), :mod:`.dependence` (the
turn-to-turn dependence check), :mod:`.coupling` (turn-level coupling fits of auxiliary channels), and after the
fit :mod:`.model` (the fitted model at every reading, for figures) and :mod:`.allan` (Allan
deviation of a per-turn series).  :mod:`.dense` builds a small dense design for cross-checks.
"""
