"""Reading: log files (CSV, Parquet, a DataFrame) and their manifests into a validated `Scan`.

Modules, in the order data pass through them: :mod:`.timebase` (exact epochs),
:mod:`.turn_numbering` (unwrap angles, number turns), :mod:`.manifest` (the TOML manifest),
:mod:`.validate` (the checks), :mod:`.columns` (choosing and parsing a table's columns),
:mod:`.scan` (the `Scan`), :mod:`.files` (``read_scan``).
"""
