"""Progress bars by default only for long work on a terminal; an explicit choice always wins."""

import io

import numpy as np

from nullfit.core.progress import show_progress
from nullfit.limits.bootstrap import block_means


class _Tty(io.StringIO):
    def isatty(self):
        return True


def test_default_needs_long_work_and_a_terminal(monkeypatch):
    monkeypatch.setattr("sys.stderr", io.StringIO())  # a file or a pipe: no bar, however long
    assert not show_progress(None, True)
    assert show_progress(True, False) and not show_progress(False, True)
    monkeypatch.setattr("sys.stderr", _Tty())
    assert show_progress(None, True) and not show_progress(None, False)


def test_long_bootstrap_writes_no_bar_into_a_file(capsys):
    # 10⁴ replicates × 10⁴ blocks is "long" (a bar on a terminal); pytest's captured stderr is not one
    x = np.random.default_rng(0).normal(size=(10_000, 2))
    block_means(x, 1, "circular", 10_000, np.random.default_rng(1))
    assert capsys.readouterr().err == ""
