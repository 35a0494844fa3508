"""Runs end to end and many runs together: :mod:`.analysis` (one run: fit, limits, expected
signal, ratio), :mod:`.runs` (the run table), :mod:`.combine` (lab-frame combination and the
sky-frame scale fit), :mod:`.turn_table` (the per-turn table of a campaign), :mod:`.dataset`
(many logs demodulated into it: ``demodulate_campaign``) and :mod:`.parallel` (running tasks
serially, on a local Dask cluster or on a scheduler)."""
