"""Reading: log files (CSV, Parquet, a DataFrame) and their manifests into a validated `Scan`,
or a Parquet log in chunks (a `ScanStream`).

Modules, in the order data pass through them: :mod:`.timebase` (exact epochs),
:mod:`.histogram` (whole-log medians), :mod:`.unwrap`, :mod:`.turn_numbering` and
:mod:`.turn_counter` (unwrap angles, number turns, chunk by chunk), :mod:`.events` and
:mod:`.marks` (gaps, marks), :mod:`.manifest` (the TOML manifest), :mod:`.validate` (the checks),
:mod:`.columns` and :mod:`.arrow_columns` (choosing and parsing a table's columns),
:mod:`.csv_arrow` (CSV bytes, header and parser), :mod:`.scan` (the `Scan`), :mod:`.files`
(``read_scan``), :mod:`.stream` (``open_stream``).  The design is in ``docs/reading.md``.
"""
