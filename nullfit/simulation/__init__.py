"""Synthetic scans with a known truth: the ingredients (:mod:`.models`), the truth record
(:mod:`.truth`) and the scans themselves (:mod:`.scans`)."""
