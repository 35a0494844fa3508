"""Writing results: :mod:`.files` (safe output paths), :mod:`.report` (self-contained HTML),
:mod:`.scan_report` (the figures and report of one run), :mod:`.demo` (``nullfit demo``)."""
