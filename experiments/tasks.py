"""Studies as independent tasks, run in this process or on a Dask cluster, to the same result.

A study (a sweep, a sizing, a sensitivity study) is a list of :class:`Task`: each an
independent unit (a building file, a design, a control, a demand, a block of
replications) with a key that names it, a module-level function and its arguments,
and its own seed derived from the run's seed and the key alone
(:func:`task_seed`). A task's result therefore depends on nothing but its key and
the run's seed: not on where it ran, in what order, or on how many workers.

Executors (:func:`executor`):

* in process (the default; nothing extra installed);
* ``workers=N``: a local Dask cluster of N worker processes
  (``distributed.LocalCluster``);
* ``scheduler=ADDRESS``: a running Dask scheduler, its workers started on other
  machines with Dask's own commands (``dask scheduler``, ``dask worker ADDRESS``).

On a cluster each task is retried once (a worker lost mid-run has its tasks rerun
elsewhere by the scheduler, which does not count); a task that still fails is reported
by its key (:class:`TaskFailed`), never left out. Workers compile the kernels once each,
from numba's disk cache.
"""
from __future__ import annotations

import contextlib
import hashlib
import json
from dataclasses import dataclass, field
from typing import Callable

import numpy as np


@dataclass(frozen=True)
class Task:
    """One independent unit of a study."""

    key: tuple                  # names the unit: plain values (str, int, float)
    function: Callable          # a module-level function (it travels to the workers)
    kwargs: dict = field(default_factory=dict)

    @property
    def name(self) -> str:
        """The key as text (also the task's name on a cluster)."""
        return "liftsort-" + "-".join(str(k) for k in self.key)


class TaskFailed(RuntimeError):
    """A task raised an error (on a cluster: also when retried)."""

    def __init__(self, key: tuple, error: BaseException):
        self.key = key
        self.error = error
        super().__init__(f"task {' / '.join(str(k) for k in key)} failed: "
                         f"{type(error).__name__}: {error}")


def key_digest(key: tuple) -> str:
    """A stable digest of a key (the same on every machine and Python)."""
    return hashlib.sha256(json.dumps([str(k) for k in key]).encode()).hexdigest()


def task_seed(run_seed: int, key: tuple) -> int:
    """The unit's own seed: the first word of ``SeedSequence(run_seed, spawn_key=...)``, the
    spawn key made of the digest of the unit's key (numpy.random.SeedSequence)."""
    words = tuple(int(key_digest(key)[i:i + 8], 16) for i in range(0, 32, 8))
    return int(np.random.SeedSequence(int(run_seed), spawn_key=words).generate_state(1)[0])


def _call(function, kwargs):
    return function(**kwargs)


class InProcess:
    """Runs the tasks one after another in this process."""

    workers = 1

    def run(self, tasks, on_done: Callable | None = None) -> list:
        out = []
        for task in tasks:
            try:
                out.append(_call(task.function, task.kwargs))
            except Exception as exc:            # noqa: BLE001 - reported with its key
                raise TaskFailed(task.key, exc) from exc
            if on_done is not None:
                on_done()
        return out


class DaskCluster:
    """Runs the tasks on a Dask cluster (``distributed``), results in task order."""

    def __init__(self, client, workers: int):
        self.client = client
        self.workers = workers

    def run(self, tasks, on_done: Callable | None = None) -> list:
        from distributed import as_completed
        futures = [self.client.submit(_call, t.function, t.kwargs, key=t.name, pure=False,
                                      retries=1) for t in tasks]
        by_future = {f.key: t for f, t in zip(futures, tasks)}
        for future in as_completed(futures):
            if future.status == "error":
                task = by_future[future.key]
                exc = future.exception()
                for f in futures:
                    f.cancel()
                raise TaskFailed(task.key, exc)
            if on_done is not None:
                on_done()
        return [f.result() for f in futures]


@contextlib.contextmanager
def executor(workers: int | None = None, scheduler: str | None = None):
    """The executor asked for: in process, a local cluster of ``workers`` processes, or the
    running scheduler at ``scheduler``."""
    if not workers and not scheduler:
        yield InProcess()
        return
    try:
        from distributed import Client, LocalCluster
    except ImportError:
        raise ValueError("--workers / --scheduler need Dask's distributed scheduler: "
                         "pip install 'liftsort[cluster]' (or 'distributed')") from None
    if scheduler:
        with Client(scheduler, timeout="20s") as client:
            n = len(client.scheduler_info().get("workers", {})) or 1
            yield DaskCluster(client, n)
        return
    # one compute thread per worker process: the workers share the cores
    with LocalCluster(n_workers=int(workers), threads_per_worker=1, processes=True,
                      dashboard_address=None, silence_logs=50,
                      env={"NUMBA_NUM_THREADS": "1"}) as cluster, \
            Client(cluster) as client:
        yield DaskCluster(client, int(workers))
