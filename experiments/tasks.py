"""Studies as independent tasks, run in this process or on a Dask cluster, to the same result.

A study (a sweep, a sizing, a sensitivity study) is a list of :class:`Task`: each an
independent unit (a building file, a design, a control, a demand, a block of
replications) with a key that names it, a module-level function and its arguments,
and its own seed derived from the run's seed and a key alone (:func:`task_seed`). A
task's result therefore depends on nothing but its arguments and the run's seed: not on
where it ran, in what order, or on how many workers.

Seeds and common random numbers. The seed of a task is ``task_seed(run_seed,
stream_key)``, where the *stream key* is the unit's key with the parts left out over
which the study compares on common random numbers: the demand points of one design in a
sweep share one stream (so that its curves are smooth), and the candidates of one sizing
search share one (each candidate meets the same passengers, so that a larger group never
fails where a smaller one passed by the luck of the draw). Every rule of a comparison runs
inside one task, on the same batches. The stream key is still made of the building (its
name and the digest of its file) and the unit's own values only, never of the order of
the tasks or of the executor.

Executors (:func:`executor`):

* in process (the default; nothing extra installed);
* ``workers=N``: a local Dask cluster of N worker processes
  (``distributed.LocalCluster``, one compute thread each);
* ``scheduler=ADDRESS``: a running Dask scheduler, its workers started on other
  machines with Dask's own commands (``dask scheduler``, ``dask worker ADDRESS``).

Both run a list of tasks and return their results in the order of the list
(:meth:`InProcess.run`, :meth:`DaskCluster.run`), calling ``on_done`` as each task
completes (on a cluster in the order they complete), which drives the progress bar.
A search that stops at the first passing candidate (sizing) runs its candidates
:attr:`lookahead` at a time (:func:`ordered_search`): one at a time in process; on a
cluster a few per worker in flight beyond the last candidate taken (a sliding window), and
takes the first passing one in the search's order, so that the answer and the list of
candidates tried are the same either way.

On a cluster each task is retried once when it raises (a worker lost mid-run has its
tasks rerun elsewhere by the scheduler, which does not count as a retry); a task that
still fails is reported by its key (:class:`TaskFailed`), never left out. Workers compile
the kernels once each, from numba's disk cache.
"""
from __future__ import annotations

import contextlib
import hashlib
import json
import uuid
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

#: The most worker processes ``--workers`` starts on one machine.
MAX_LOCAL_WORKERS = 256
#: How long to wait for a running scheduler to answer, and for it to have a worker [s].
CONNECT_TIMEOUT_S = 10
#: Candidates of a search in flight per worker on a cluster (the look-ahead).
LOOKAHEAD_PER_WORKER = 2


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
    spawn key made of the digest of the unit's (stream) key (numpy.random.SeedSequence)."""
    words = tuple(int(key_digest(key)[i:i + 8], 16) for i in range(0, 32, 8))
    return int(np.random.SeedSequence(int(run_seed), spawn_key=words).generate_state(1)[0])


def file_digest(data: bytes) -> str:
    """The digest that names a building file in tables: the first 12 hexadecimal digits of
    the SHA-256 of its bytes."""
    return hashlib.sha256(data).hexdigest()[:12]


def _call(function, kwargs):
    return function(**kwargs)


#: Errors that are about the input or the machine, not a task: they keep their own
#: handling (exit status 2) instead of being reported as a failed task.
_PASS_THROUGH: tuple = (MemoryError,)


def _passes_through(exc: BaseException) -> bool:
    from roundtrip.inputfile import InputError
    return isinstance(exc, (InputError, *_PASS_THROUGH))


class InProcess:
    """Runs the tasks one after another in this process."""

    workers = 1
    lookahead = 1
    threads = None              # the command's --threads (None: all cores)

    def __init__(self, threads: int | None = None):
        self.threads = threads

    def run(self, tasks, on_done: Callable | None = None) -> list:
        out = []
        for task in tasks:
            try:
                out.append(_call(task.function, task.kwargs))
            except Exception as exc:            # noqa: BLE001 - reported with its key
                if _passes_through(exc):
                    raise
                raise TaskFailed(task.key, exc) from exc
            if on_done is not None:
                on_done()
        return out


def _check_finished(future, key: tuple) -> None:
    """Raise what a cluster future that did not finish raised: an input or machine error as
    it is, any other as the failure of the task ``key`` (after its retry)."""
    if future.status != "finished":
        exc = future.exception()
        if _passes_through(exc):
            raise exc
        raise TaskFailed(key, exc)


class DaskCluster:
    """Runs the tasks on a Dask cluster (``distributed``), results in task order."""

    threads = 1                 # one compute thread per worker process

    def __init__(self, client, workers: int):
        self.client = client
        self.workers = workers
        self.lookahead = max(1, LOOKAHEAD_PER_WORKER * workers)

    def run(self, tasks, on_done: Callable | None = None) -> list:
        from distributed import as_completed
        tasks = list(tasks)
        if not tasks:
            return []
        # a token of this run in every key: on a shared scheduler two runs never share
        # results (the key alone would make the scheduler treat them as the same task)
        token = uuid.uuid4().hex[:12]
        futures = [self.client.submit(_call, t.function, t.kwargs, key=f"{t.name}-{token}",
                                      pure=False, retries=1) for t in tasks]
        by_key = {f.key: t for f, t in zip(futures, tasks)}
        try:
            for future in as_completed(futures):
                _check_finished(future, by_key[future.key].key)
                if on_done is not None:
                    on_done()
            return self.client.gather(futures)
        finally:
            for f in futures:
                f.cancel()

    def search(self, count: int, make_task, take, on_done=None) -> None:
        """:func:`ordered_search` with a sliding window: up to :attr:`lookahead` candidates
        beyond the last one taken are in flight at once, the next submitted as soon as one
        is taken, so that no worker waits for the slowest task of a wave."""
        from distributed import as_completed
        token = uuid.uuid4().hex[:12]
        index: dict = {}                     # future key -> candidate
        keys: dict = {}                      # candidate -> task key
        futures = []
        done: dict = {}
        pending = as_completed()
        submitted = taken = 0

        def submit(i):
            task = make_task(i)
            keys[i] = task.key
            f = self.client.submit(_call, task.function, task.kwargs,
                                   key=f"{task.name}-{token}", pure=False, retries=1)
            index[f.key] = i
            futures.append(f)
            pending.add(f)
        try:
            while submitted < min(count, self.lookahead):
                submit(submitted)
                submitted += 1
            for future in pending:
                i = index[future.key]
                _check_finished(future, keys[i])
                done[i] = future.result()
                if on_done is not None:
                    on_done()
                while taken in done:
                    if take(taken, done.pop(taken)):
                        return
                    taken += 1
                while submitted < count and submitted < taken + self.lookahead:
                    submit(submitted)
                    submitted += 1
        finally:
            for f in futures:
                f.cancel()


def ordered_search(ex, count: int, make_task: Callable[[int], Task],
                   take: Callable[[int, object], bool], on_done: Callable | None = None) -> None:
    """Run candidates ``0 ... count-1`` in their order until ``take`` says the search is over.

    ``make_task(i)`` builds candidate i's task (from the state the results taken so far
    left); ``take(i, result)`` is given the results strictly in order and returns True when
    the search is over. Candidates are run in waves of ``ex.lookahead`` (one in process, a
    few per worker on a cluster), so a cluster computes a few candidates the search then
    does not take; what the search answers does not depend on the wave, provided a task's
    result does not depend on the state ``make_task`` saw except in parts ``take`` then
    ignores. An executor with its own ``search`` (a cluster: a sliding window instead of
    waves) runs it.
    """
    if hasattr(ex, "search"):
        return ex.search(count, make_task, take, on_done)
    i = 0
    while i < count:
        wave = [make_task(j) for j in range(i, min(count, i + ex.lookahead))]
        for j, result in enumerate(ex.run(wave, on_done), start=i):
            if take(j, result):
                return
        i += len(wave)


def check_workers(text) -> int:
    """``--workers N``: a whole number of worker processes, 1 ... MAX_LOCAL_WORKERS."""
    from roundtrip.inputfile import InputError
    try:
        n = int(str(text).strip())
    except ValueError:
        n = None
    if n is None or str(n) != str(text).strip().lstrip("+") or not 1 <= n <= MAX_LOCAL_WORKERS:
        raise InputError([f"--workers {text!r}: must be a whole number of worker processes "
                          f"from 1 to {MAX_LOCAL_WORKERS}."])
    return n


def _need_distributed(option: str):
    from roundtrip.inputfile import InputError
    try:
        import distributed
    except ImportError:
        raise InputError([f"{option} needs Dask's distributed scheduler, which is not "
                          f"installed: pip install 'liftsort[cluster]' (or run without "
                          f"{option}, in this process)."]) from None
    return distributed


@contextlib.contextmanager
def executor(workers: int | None = None, scheduler: str | None = None,
             threads: int | None = None):
    """The executor asked for: in process (``threads`` compute threads), a local cluster of
    ``workers`` processes, or the running scheduler at ``scheduler``."""
    from roundtrip.inputfile import InputError
    if not workers and not scheduler:
        yield InProcess(threads)
        return
    if workers and scheduler:
        raise InputError(["--workers and --scheduler: give one of them (--workers starts a "
                          "local cluster, --scheduler uses a running one)."])
    if scheduler:
        distributed = _need_distributed("--scheduler")
        try:
            client = distributed.Client(scheduler, timeout=f"{CONNECT_TIMEOUT_S}s")
        except (OSError, TimeoutError, ValueError, TypeError) as exc:
            raise InputError([f"--scheduler {scheduler!r}: no Dask scheduler answered there "
                              f"within {CONNECT_TIMEOUT_S} s ({type(exc).__name__}: {exc}). "
                              f"Start one with `dask scheduler` and give the address it prints "
                              f"(tcp://HOST:8786), with `dask worker tcp://HOST:8786` on each "
                              f"worker machine."]) from None
        with client:
            try:
                client.wait_for_workers(1, timeout=CONNECT_TIMEOUT_S)
            except (TimeoutError, OSError):
                raise InputError([f"--scheduler {scheduler!r}: the scheduler has no worker "
                                  f"after {CONNECT_TIMEOUT_S} s; start some with `dask worker "
                                  f"{scheduler}` (the same liftsort version installed on "
                                  f"each)."]) from None
            n = len(client.scheduler_info().get("workers", {})) or 1
            yield DaskCluster(client, n)
        return
    n = check_workers(workers)
    distributed = _need_distributed("--workers")
    # one compute thread per worker process: the workers share the cores
    with distributed.LocalCluster(n_workers=n, threads_per_worker=1, processes=True,
                                  dashboard_address=None, silence_logs=50,
                                  env={"NUMBA_NUM_THREADS": "1"}) as cluster, \
            distributed.Client(cluster) as client:
        yield DaskCluster(client, n)
