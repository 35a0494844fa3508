"""Fitting a log read in chunks: the default fit and the per-turn table of a `ScanStream`.

A log too large for memory is read as a :class:`nullfit.reading.stream.ScanStream` — chunks of
readings in time order with global turn numbers — and fitted in one pass:

* every turn is demodulated by the same kernel as an in-memory scan
  (:class:`.kernel.TurnKernel`), so the numbers agree with :func:`nullfit.fit_scan` and
  :func:`nullfit.demodulate` to rounding (the tests ask for 1e-12);
* the kernel sums whole turns in chunks fixed by the source rows of their first readings, so a
  streamed log is cut into exactly the chunks of the same log in memory; the readings of the
  kernel chunk still open at the end of a stream chunk (at most ``kernel.CHUNK_ROWS`` readings
  plus one turn) are carried over to the next, nothing else is kept.  Memory is one stream
  chunk, the carried readings, the kernel's cache-sized buffers, and the per-turn results (a
  few hundred bytes per turn) — never a full-length column;
* facts known only after the whole log was seen — which turns are complete, dropped rows,
  discrete marks — are applied at the end: partial and too-short turns are left out and
  counted exactly as for a scan in memory, then the angle coverage is checked (from the sums
  of every reading, not a sample) and the turn scatter is formed.

Supported: per-turn drift (``"per-turn"``, ``"per-turn:d"``) with turn or block errors.  The
joint HAC/OLS fits (which need a second pass for the residuals and, for HAC, their
autocovariance) and auxiliary regressors (standardised over the whole log before the fit) are
refused with an `AnalysisError`: read such a log into memory.

:func:`fit_path` is the entry point for a file: it streams Parquet logs of at least
``STREAM_MIN_BYTES`` (or when asked) through the reading stage's ``open_stream``, and reads
smaller logs into memory.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from types import SimpleNamespace

import numpy as np

from ..core.errors import AnalysisError, where
from ..core.progress import show_progress
from .design import check_harmonics, check_separable_sums, harmonic_names, parse_drift, per_turn_drift
from .engine import turn_frame
from .fit import check_errors_drift, finish_fit, parse_errors
from .kernel import TurnKernel
from .scanfit import ScanFit
from .turn_errors import check_dependence_mode, turn_scatter
from .segments import Exclusions, Segments

#: ``fit_path(..., stream="auto")`` streams Parquet logs of at least this many bytes.
STREAM_MIN_BYTES = 1 << 30


# ----------------------------------------------------------------------------- one pass
@dataclasses.dataclass
class StreamTurns:
    """Per-turn results of one pass over a stream (every turn, in time order)."""

    turn: np.ndarray
    n: np.ndarray  # readings per turn
    t_mid: np.ndarray
    coef: np.ndarray  # (N, p): drift then harmonics
    cov: np.ndarray  # (N, 2K, 2K)
    rss: np.ndarray
    ok: np.ndarray
    coverage: np.ndarray  # Σ over every reading of the products of [1, harmonics]

    def take(self, keep: np.ndarray) -> "StreamTurns":
        """The turns flagged in ``keep``: views when they are consecutive (the usual case: only the
        first and last turns are partial), else copies."""
        i = np.flatnonzero(keep)
        sel = slice(int(i[0]), int(i[-1]) + 1) if i.size and i[-1] - i[0] == i.size - 1 else i
        return StreamTurns(self.turn[sel], self.n[sel], self.t_mid[sel], self.coef[sel], self.cov[sel],
                           self.rss[sel], self.ok[sel], self.coverage)


def _not_increasing(source) -> AnalysisError:
    return AnalysisError(f"{where(source)}: turn numbers are not contiguous and increasing in time")


_FIELDS = ("time", "angle", "signal", "turn", "rows")


def stream_turns(stream, kernel: TurnKernel, *, progress=None) -> StreamTurns:
    """Demodulate every turn of ``stream`` with ``kernel`` (one pass; see the module docstring).

    The kernel sums turns in chunks fixed by the source rows of their first readings
    (:meth:`.kernel.TurnKernel.chunk_keys`), exactly as for a scan in memory.  The readings of
    the kernel chunk still open at the end of a stream chunk (at most ``chunk_rows`` readings and
    one turn) are carried over; every other kernel chunk is fitted from views of the stream
    chunk's arrays.
    """
    parts: list[tuple] = []
    coverage = 0.0
    carry: list[dict] = []  # pieces of the open kernel chunk
    carry_key = None
    last_turn = None

    def solve(arrays):
        nonlocal coverage
        tr = arrays["turn"]
        brk = np.flatnonzero(tr[1:] != tr[:-1]) + 1
        start = np.r_[0, brk].astype(np.int64)
        stop = np.r_[brk, tr.size].astype(np.int64)
        labels = tr[start].astype(np.int64)
        seg = Segments(start, stop, labels, np.ones(labels.size, bool))
        sol = kernel.run(arrays["time"], arrays["angle"], arrays["signal"], seg, first_rows=arrays["rows"][start])
        coverage = coverage + sol.harmonic_sums
        # the kernel's weights (sol.weight) are not kept: a year-long stream has millions of turns, and
        # the χ² recomputes them from the covariances (turn_errors.scatter_chi2)
        parts.append((labels, seg.length, sol.t_mid, sol.coef, sol.cov, sol.rss, sol.ok))

    def piece(ch, a, b, copy=False):
        return {f: (np.array(getattr(ch, f)[a:b]) if copy else np.asarray(getattr(ch, f))[a:b]) for f in _FIELDS}

    for ch in _chunks(stream, progress):
        if ch.n == 0:
            continue
        tr = np.asarray(ch.turn)
        starts = np.flatnonzero(tr[1:] != tr[:-1]) + 1
        if last_turn is None or tr[0] != last_turn:
            starts = np.r_[0, starts]
        if tr.size > 1 and np.any(tr[1:] < tr[:-1]) or (last_turn is not None and tr[0] < last_turn):
            raise _not_increasing(stream.source)
        last_turn = int(tr[-1])
        keys = kernel.chunk_keys(np.asarray(ch.rows)[starts])
        prev = np.r_[carry_key if carry_key is not None else keys[0] - 1, keys[:-1]] if keys.size else keys
        cuts = starts[keys != prev]  # where a new kernel chunk begins
        if cuts.size == 0:  # the whole stream chunk continues the open kernel chunk
            carry.append(piece(ch, 0, ch.n, copy=True))
            continue
        if carry:
            carry.append(piece(ch, 0, int(cuts[0])))
            solve({f: np.concatenate([c[f] for c in carry]) for f in _FIELDS})
        if cuts[-1] > cuts[0]:
            solve(piece(ch, int(cuts[0]), int(cuts[-1])))
        carry = [piece(ch, int(cuts[-1]), ch.n, copy=True)]
        carry_key = int(keys[np.searchsorted(starts, cuts[-1])])
    if carry:
        solve({f: np.concatenate([c[f] for c in carry]) for f in _FIELDS})
    nh = 2 * len(kernel.ks)
    if not parts:
        return StreamTurns(np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0), np.zeros((0, kernel.p)),
                           np.zeros((0, nh, nh)), np.zeros(0), np.zeros(0, bool), np.zeros((nh + 1, nh + 1)))
    fields = []
    for i in range(7):  # one field at a time: the parts of the others are not copied meanwhile
        fields.append(np.concatenate([p[i] for p in parts]))
        parts = [p[:i] + (None,) + p[i + 1:] for p in parts]
    if np.any(fields[0][1:] <= fields[0][:-1]):  # a turn number seen again later
        raise _not_increasing(stream.source)
    return StreamTurns(*fields, coverage=np.asarray(coverage, dtype=float))


def _chunks(stream, progress):
    """The stream's chunks, with a tqdm progress bar over readings when ``progress`` (default:
    when standard error is a terminal)."""
    if not show_progress(progress):
        yield from stream
        return
    from tqdm.auto import tqdm

    with tqdm(total=stream.n_samples, unit="reading", unit_scale=True, desc=Path(str(stream.source)).name,
              leave=False) as bar:
        for ch in stream:
            yield ch
            bar.update(ch.n)


# ----------------------------------------------------------------------------- exclusions
class _Used(Exclusions):
    """The turns a fit uses, with the exclusions counted as :class:`.engine.TurnEngine` counts them."""

    def __init__(self, turns: StreamTurns, complete: np.ndarray, source, complete_only: bool, min_samples: int):
        self.source = source
        keep = self.screen(turns.n, complete, complete_only, min_samples, source)
        self.turns = turns.take(keep)
        self.complete = complete[keep]

    # the engine's bookkeeping, as nullfit.fitting.fit.finish_fit reads it
    aux_names: tuple = ()
    n_aux = 0

    @property
    def seg(self):
        return SimpleNamespace(n=int(self.turns.turn.size))

    @property
    def n_rows(self) -> int:
        return int(self.turns.n.sum())

    def drop(self, bad: np.ndarray, why: str) -> None:
        if not bad.any():
            return
        self.exclude(why, bad.sum(), self.turns.n[bad].sum())
        if bad.all():
            raise AnalysisError(f"{where(self.source)}: no usable turns left to fit ({self.excluded_text()})")
        self.turns = self.turns.take(~bad)
        self.complete = self.complete[~bad]



def _frame(used: _Used, stream, ks, degree):
    t = used.turns
    return turn_frame(t.turn, t.t_mid, t.n, used.complete, t.coef[:, degree + 1:], t.cov, t.rss, ks=ks,
                      unit=stream.unit, source=stream.source, degree=degree, excluded=used.excluded)


def _pass(stream, ks, spec, complete_only, min_samples, progress) -> _Used:
    turns = stream_turns(stream, TurnKernel(ks, spec.degree), progress=progress)
    check_separable_sums(turns.coverage, ks, marks=stream.marks, source=stream.source)
    if stream.turn_complete is None:
        raise ValueError(f"{where(stream.source)}: the stream did not say which turns are complete "
                         "(ScanStream.turn_complete is unset after a full pass)")
    complete = np.asarray(stream.turn_complete, dtype=bool)
    if turns.turn.size and int(turns.turn.max()) >= complete.size:
        raise AnalysisError(f"{where(stream.source)}: the stream numbered {int(turns.turn.max()) + 1} turns but "
                            f"flagged only {complete.size} as complete or not")
    return _Used(turns, complete[turns.turn], stream.source, complete_only, min_samples)


# ----------------------------------------------------------------------------- public
def demodulate_stream(stream, *, harmonics=(1, 2), drift="per-turn", complete_only: bool = True, progress=None):
    """The per-turn table of a streamed log: :func:`nullfit.demodulate` of a `ScanStream`
    (same columns, attributes and exclusions; see the module docstring)."""
    ks = check_harmonics(harmonics)
    spec = per_turn_drift(drift)
    used = _pass(stream, ks, spec, complete_only, 1, progress)
    return _frame(used, stream, ks, spec.degree)


def fit_stream(stream, *, harmonics=(1, 2), drift="per-turn", errors="turns", block_turns: int | None = None,
               complete_only: bool = True, aux=None, progress=None, dependence: str = "widen") -> ScanFit:
    """:func:`nullfit.fit_scan` of a streamed log, for per-turn drift with turn or block errors.

    Parameters are those of ``fit_scan``; ``progress`` shows a tqdm bar over the readings
    (default: when standard error is a terminal).  HAC/OLS errors, other drift models and aux
    regressors raise `AnalysisError` (they need the log in memory).
    """
    ks = check_harmonics(harmonics)
    spec = parse_drift(drift)
    kind, _, block_turns = parse_errors(errors, block_turns=block_turns)
    check_dependence_mode(dependence)  # before the pass over the log, as fit_scan does
    check_errors_drift(kind, spec)
    if kind not in ("turns", "blocks"):
        raise AnalysisError(f"{where(stream.source)}: a streamed log is fitted with turn or block errors only; "
                            f"errors={kind!r} needs the log in memory (read_scan, then fit_scan)")
    if isinstance(aux, str):
        aux = (aux,)
    if aux:
        raise AnalysisError(f"{where(stream.source)}: auxiliary regressors are not fitted on a streamed log; "
                            "read it into memory (read_scan, then fit_scan with aux=...)")
    nd, nh = spec.degree + 1, 2 * len(ks)
    used = _pass(stream, ks, spec, complete_only, nd + nh + 1, progress)
    used.drop(~used.turns.ok, "turns whose per-turn system is singular")
    t = used.turns
    ts = turn_scatter(t.coef[:, nd:], t.cov, rss=t.rss, resid_dof=t.n - (nd + nh), turn=t.turn, time_mid=t.t_mid,
                      names=harmonic_names(ks),
                      block_turns=block_turns if kind == "blocks" else None, dependence=dependence,
                      source=stream.source, left_out=used.excluded_text() if used.excluded else "")
    res = dict(eng=used, coef=ts.coef, cov=ts.cov[:nh, :nh], cov_dof=ts.dof, n_blocks=ts.n_blocks, aux_coef=None,
               aux_cov=None, chi2=ts.chi2, chi2_n=ts.chi2_n, chi2_p=ts.chi2_p, rss=float(np.nansum(t.rss)),
               residuals=None, per_turn=_frame(used, stream, ks, spec.degree), vif=None, cond=None, n_params=None,
               block_turns=ts.block_turns, dependence=ts.dependence, chi2_resid_dof=ts.resid_dof,
               complete_only=bool(complete_only), hac_lags_given=False)
    return finish_fit(stream, ks, spec, kind, res)


# ----------------------------------------------------------------------------- files
def is_parquet(path) -> bool:
    """Whether ``path`` is a Parquet file (magic bytes ``PAR1``)."""
    try:
        with open(path, "rb") as f:
            return f.read(4) == b"PAR1"
    except OSError:
        return False


def streams_by_default(path) -> bool:
    """``stream="auto"``: a Parquet log of at least :data:`STREAM_MIN_BYTES` is read in chunks."""
    return is_parquet(path) and Path(path).stat().st_size >= STREAM_MIN_BYTES


def fit_path(path, *, stream="auto", progress=None, chunk_rows: int | None = None, read_options=None,
             **fit_options) -> ScanFit:
    """Fit a log file, streaming it when it is large.

    Parameters
    ----------
    path : str or Path
    stream : {"auto", True, False}
        ``"auto"`` streams Parquet logs of at least ``STREAM_MIN_BYTES``; ``True`` always streams;
        ``False`` reads the log into memory (:func:`nullfit.read_scan` + :func:`nullfit.fit_scan`).
    progress : bool, optional
        tqdm progress bar over the chunks of a streamed log (default: on a terminal).
    chunk_rows : int, optional
        Readings per chunk, passed to the reader's ``open_stream``.
    read_options : dict, optional
        Keywords of ``read_scan`` / ``open_stream`` (columns, ``manifest``, ``angle_unit`` …).
    **fit_options
        Keywords of ``fit_scan`` (:func:`fit_stream` for a streamed log).

    A streamed log is read by :func:`nullfit.reading.stream.open_stream` (Parquet only).
    """
    read_options = dict(read_options or {})
    if stream not in ("auto", True, False):
        raise ValueError(f"stream must be 'auto', True or False, not {stream!r}")
    use = stream is True or (stream == "auto" and streams_by_default(path))
    if use:
        from ..reading.stream import open_stream

        if chunk_rows is not None:
            read_options["chunk_rows"] = chunk_rows
        return fit_stream(open_stream(path, **read_options), progress=progress, **fit_options)
    from ..reading.files import read_scan
    from .fit import fit_scan

    return fit_scan(read_scan(path, **read_options), **fit_options)
