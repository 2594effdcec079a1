"""Independent chains of work run on threads: how every kernel uses more than one core.

The kernels (:mod:`roundtrip._chain_kernel`, :mod:`batchrounds._kernel`) are serial,
compiled with ``nogil=True``, and take a range of chains; :func:`run_chains` splits
the chains of one call into pieces and runs them on a pool of threads, each piece
taken by the next free thread. Chains are independent and each writes only its own
rows, so the numbers do not depend on the thread count or on which thread ran what.
This costs a serial compile only (no parallel-loop lowering), and a thread that
finishes waits without spinning.

The thread count is numba's setting (``numba.get_num_threads()``, which the
``threads`` option of the Monte Carlo functions sets); one thread, or a call of
fewer than :data:`MIN_PARALLEL_CHAINS` chains, runs in the calling thread.
"""
from __future__ import annotations

#: Fewer chains than this run in the calling thread (starting threads would cost more).
MIN_PARALLEL_CHAINS = 4

_POOL = None


def pool():
    """The worker threads (numba's largest thread count of them)."""
    global _POOL
    if _POOL is None:
        import numba
        from concurrent.futures import ThreadPoolExecutor
        _POOL = ThreadPoolExecutor(max(1, numba.config.NUMBA_NUM_THREADS),
                                   thread_name_prefix="liftsort-kernel")
    return _POOL


def thread_count() -> int:
    import numba
    return max(1, numba.get_num_threads())


def run_chains(kernel, n_chains: int, *args, threaded: bool = True) -> None:
    """``kernel(*args, first_chain, last_chain)`` over chains 0 ... n_chains - 1 (in the
    calling thread when not ``threaded``: a worker of the pool itself)."""
    threads = thread_count()
    if not threaded or threads == 1 or n_chains < MIN_PARALLEL_CHAINS:
        kernel(*args, 0, n_chains)
        return
    pieces = min(n_chains, 2 * threads)
    bounds = [n_chains * i // pieces for i in range(pieces + 1)]
    futures = [pool().submit(kernel, *args, a, b) for a, b in zip(bounds[:-1], bounds[1:])
               if b > a]
    for f in futures:
        f.result()
