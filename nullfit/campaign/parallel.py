"""Running one function over many small, independent tasks: in this process, on a local Dask
cluster started for the purpose, or on an existing ``dask.distributed`` scheduler.

Dask is optional (``pip install 'nullfit[dask]'``).  The three ways to run:

``workers=None`` (default)
    A ``distributed.LocalCluster`` with one worker *process* per core (one thread each), started
    here and closed when the work is done (or fails, or is interrupted).  No set-up.
``workers=N``
    The same with ``N`` worker processes; ``workers=0`` runs the tasks one after the other in
    this process.
``scheduler="tcp://host:port"``
    The workers of an existing scheduler (any number of machines).  Each worker must have nullfit
    installed and see the task's files under the same paths; start them without
    ``MALLOC_TRIM_THRESHOLD_`` for the speed of a local cluster (see `LOCAL_WORKER_ENV`).

Without ``dask.distributed`` the tasks run in this process and the returned `Execution` carries a
note saying so; a scheduler address then cannot be used and is refused.  At most one task also
runs in this process (a cluster would only add its start-up time).

Tasks and results travel between processes by pickling, so the function must be importable
(module level) and both should be small: the function reads its own inputs from the paths in
the task and returns a small summary, never the raw data.
"""

from __future__ import annotations

import importlib
import logging
import os
import warnings
from dataclasses import dataclass
from typing import Any, Callable, Sequence

from ..core.progress import show_progress

DASK_HINT = "pip install 'nullfit[dask]'"

#: Dask configuration of the local cluster's worker processes.  Dask starts its workers with
#: ``MALLOC_TRIM_THRESHOLD_=65536`` (to hand freed memory back to the system quickly); setting it
#: also freezes glibc's mmap threshold (glibc's ``mallopt`` documentation, recalled from memory),
#: so every large numpy temporary becomes a fresh memory mapping.  Measured on 500 000-reading
#: logs (one worker, 7 logs): 2.3 s of system time with it, 0.2 s without, the same as in this
#: process.  The local cluster leaves the variable unset (one thread per process is kept).
LOCAL_WORKER_ENV = {"distributed.nanny.pre-spawn-environ.MALLOC_TRIM_THRESHOLD_": None}


@dataclass(frozen=True)
class Execution:
    """How the tasks ran: ``kind`` is ``"serial"``, ``"local-cluster"`` or ``"scheduler"``;
    ``workers`` the number of worker processes (1 for serial); ``address`` the scheduler's
    address (None for serial); ``note`` says why work ran serially when it was not asked to."""

    kind: str
    workers: int
    address: str | None = None
    note: str | None = None

    def to_dict(self) -> dict:
        return {"kind": self.kind, "workers": self.workers, "address": self.address, "note": self.note}


def load_distributed():
    """The ``distributed`` module, or None when Dask's distributed scheduler is not installed."""
    try:
        return importlib.import_module("distributed")
    except ImportError:
        return None


def default_workers() -> int:
    """One worker per core this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def check_workers(workers, scheduler) -> None:
    if workers is not None:
        if isinstance(workers, bool) or not isinstance(workers, int) or workers < 0:
            raise ValueError(f"workers must be a whole number >= 0 (0: serial in this process), not {workers!r}")
        if scheduler is not None:
            raise ValueError("workers sets the size of a local cluster; with a scheduler address its own workers "
                             "run the tasks (give one of workers and scheduler)")
    if scheduler is not None and (not isinstance(scheduler, str) or not scheduler.strip()):
        raise ValueError(f"scheduler must be an address such as 'tcp://host:8786', not {scheduler!r}")


def run_tasks(func: Callable, tasks: Sequence, *, workers: int | None = None, scheduler: str | None = None,
              progress: bool | None = None, desc: str = "tasks", unit: str = "task", failure: Callable | None = None,
              **kwargs) -> tuple[list, Execution]:
    """``[func(task, **kwargs) for task in tasks]`` (in task order) and how they ran.

    ``failure(task, reason)``, when given, turns a task whose worker process died (for example
    killed for using too much memory) into a result instead of stopping everything; any other
    exception raised by ``func`` stops the work and is raised here.  A progress bar over finished
    tasks shows on a terminal (``progress=None``), always (True) or never (False).
    """
    check_workers(workers, scheduler)
    tasks = list(tasks)
    dist = None if workers == 0 else load_distributed()
    if scheduler is not None and dist is None:
        raise ImportError(f"a scheduler address needs Dask's distributed scheduler, which is not installed "
                          f"({DASK_HINT})")
    if scheduler is None and (workers == 0 or dist is None or len(tasks) <= 1):
        note = None
        if dist is None and workers != 0 and len(tasks) > 1:
            note = (f"dask.distributed is not installed: the {len(tasks)} {unit}s ran one after the other in this "
                    f"process ({DASK_HINT} to run them in parallel)")
        bar = _bar(len(tasks), progress, desc, unit)
        out = []
        for t in tasks:
            out.append(func(t, **kwargs))
            bar.update()
        bar.close()
        return out, Execution("serial", 1, None, note)
    if scheduler is not None:
        try:
            client = dist.Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as err:
            raise ConnectionError(f"cannot reach the Dask scheduler at {scheduler} "
                                  f"({' '.join(str(err).split())[:160]})") from None
        with client:
            n = len(client.scheduler_info().get("workers", {}))
            return _gather(dist, client, func, tasks, kwargs, (progress, desc, unit), failure), \
                Execution("scheduler", n, scheduler)
    n = min(workers or default_workers(), len(tasks))
    environ = dict(os.environ)  # Dask's nannies write their workers' settings into this process's environment
    try:
        with warnings.catch_warnings(), importlib.import_module("dask.config").set(LOCAL_WORKER_ENV):
            # the scheduler's small HTTP server moves to a free port when 8787 is taken (another
            # cluster on the machine) and says so; that is no concern of a one-off local cluster
            warnings.filterwarnings("ignore", message="Port .* is already in use", category=UserWarning)
            cluster = dist.LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=None,
                                        silence_logs=logging.ERROR)
        with cluster, dist.Client(cluster) as client:
            return _gather(dist, client, func, tasks, kwargs, (progress, desc, unit), failure), \
                Execution("local-cluster", n, cluster.scheduler_address)
    finally:
        os.environ.clear()
        os.environ.update(environ)


def _gather(dist, client, func, tasks, kwargs, bar_args, failure) -> list:
    futures = client.map(func, tasks, pure=False, **kwargs)
    where = {f.key: i for i, f in enumerate(futures)}
    out: list[Any] = [None] * len(tasks)
    bar = _bar(len(tasks), *bar_args)
    try:
        for fut in dist.as_completed(futures):
            i = where[fut.key]
            try:
                out[i] = fut.result()
            except dist.KilledWorker as err:
                if failure is None:
                    raise
                out[i] = failure(tasks[i], "the worker process running it died (out of memory?); "
                                           f"{' '.join(str(err).split())[:120]}")
            fut.release()
            bar.update()
    finally:
        bar.close()
        client.cancel(futures)
    return out


def _bar(total: int, progress, desc: str, unit: str):
    from tqdm import tqdm

    show = show_progress(progress, total > 1)
    return tqdm(total=total, disable=not show, desc=desc, unit=unit, leave=False)
