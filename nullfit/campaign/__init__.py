"""Runs end to end and many runs together: :mod:`.analysis` (one run: fit, limits, expected
signal, ratio), :mod:`.runs` (the run table), :mod:`.combine` (lab-frame combination and the
sky-frame scale fit)."""
