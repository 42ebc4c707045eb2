"""Chunked, order-preserving parallel execution over pixels (or any work items).

Work is cut into deterministic chunks (:func:`plan_chunks`); a back end runs
a function on each chunk and the results come back keyed by chunk index, so
the final assembly — and therefore every number — is the same with 1 worker,
N workers or a Dask cluster.

Back ends
---------
``"serial"``     in this process, one chunk after the other.
``"threads"``    a thread pool; right for the numba kernels, which release the GIL.
``"processes"``  joblib's process pool (loky).
``"dask"``       a ``dask.distributed`` client (pass ``scheduler="tcp://host:port"``
                 or an existing ``Client``).

Numba's own threading is switched off inside workers (one level of
parallelism only, never threads inside processes).
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import ThreadPoolExecutor, as_completed

from lwrad.errors import InputError

__all__ = ["plan_chunks", "run_chunks", "default_workers", "BACKENDS"]

BACKENDS = ("serial", "threads", "processes", "dask")


def default_workers() -> int:
    """Number of cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - non-Linux
        return max(1, os.cpu_count() or 1)


def plan_chunks(n_items: int, chunk_size: int) -> list[slice]:
    """Cut ``range(n_items)`` into consecutive slices of at most ``chunk_size``.

    The plan depends only on ``n_items`` and ``chunk_size``, never on the
    number of workers, so results are reproducible across back ends.
    """
    n_items, chunk_size = int(n_items), int(chunk_size)
    if n_items < 0 or chunk_size < 1:
        raise InputError(f"cannot cut {n_items} items into chunks of {chunk_size}")
    return [slice(i, min(i + chunk_size, n_items)) for i in range(0, n_items, chunk_size)]


def _single_threaded(func, task):
    # Keep numba from starting its own thread pool inside a worker.
    try:
        import numba

        numba.set_num_threads(1)
    except (ImportError, ValueError):  # pragma: no cover
        pass
    return func(task)


def _iter_serial(func, tasks):
    for index, task in enumerate(tasks):
        yield index, func(task)


def _iter_threads(func, tasks, workers):
    with ThreadPoolExecutor(max_workers=workers) as pool:
        futures = {pool.submit(func, task): index for index, task in enumerate(tasks)}
        try:
            for fut in as_completed(futures):
                yield futures[fut], fut.result()
        finally:
            for fut in futures:
                fut.cancel()


def _iter_processes(func, tasks, workers):
    import joblib

    def indexed(index, task):
        return index, _single_threaded(func, task)

    runner = joblib.Parallel(n_jobs=workers, return_as="generator_unordered", backend="loky")
    yield from runner(joblib.delayed(indexed)(i, task) for i, task in enumerate(tasks))


def _iter_dask(func, tasks, scheduler):
    try:
        from distributed import Client
        from distributed import as_completed as dask_completed
    except ImportError:  # pragma: no cover
        raise InputError(
            "the Dask back end needs the 'distributed' package: pip install 'lwrad[cluster]'"
        ) from None
    own_client = not isinstance(scheduler, Client)
    client = Client(scheduler) if own_client else scheduler
    try:
        futures = [
            client.submit(
                _single_threaded, func, task, key=f"lwrad-chunk-{i}-{id(tasks)}", pure=False
            )
            for i, task in enumerate(tasks)
        ]
        index_of = {fut.key: i for i, fut in enumerate(futures)}
        for fut in dask_completed(futures):
            index = index_of[fut.key]
            result = fut.result()
            # drop our reference so the cluster may free the chunk once it is here; a chunk
            # whose worker dies before this point is recomputed by the scheduler
            futures[index] = None
            fut.release()
            yield index, result
    finally:
        if own_client:
            client.close()


def run_chunks(
    func: Callable,
    tasks: Sequence,
    *,
    workers: int | None = 1,
    backend: str | None = None,
    scheduler=None,
    on_result: Callable[[int, object], None] | None = None,
    keep_results: bool = True,
) -> list:
    """Run ``func`` on every task and return the results in task order.

    Parameters
    ----------
    func : callable
        ``func(task) -> result``; must be picklable for processes and Dask.
    tasks : sequence
        Work items (typically a chunk description each).
    workers : int, optional
        Workers on this node; ``None`` means all cores. Ignored for Dask.
    backend : str, optional
        One of :data:`BACKENDS`; default ``"dask"`` when ``scheduler`` is
        given, ``"serial"`` for one worker, else ``"threads"``.
    scheduler : str or distributed.Client, optional
        Dask scheduler address or client.
    on_result : callable, optional
        Called as ``on_result(index, result)`` in the calling thread as each
        chunk finishes (in completion order) — for progress and checkpoints.
    keep_results : bool, optional
        Keep every result for the returned list (default). With ``False``
        each result is dropped once ``on_result`` has seen it, so a caller
        that checkpoints every chunk holds one chunk at a time instead of the
        whole job; the returned list then holds ``None`` placeholders.

    Returns
    -------
    list
        ``[func(task) for task in tasks]``, in order (``None`` for each task
        when ``keep_results`` is false).
    """
    tasks = list(tasks)
    n_workers = default_workers() if workers is None else int(workers)
    if n_workers < 1:
        raise InputError(f"workers must be >= 1, got {workers}")
    if backend is None:
        backend = "dask" if scheduler is not None else ("serial" if n_workers == 1 else "threads")
    if backend not in BACKENDS:
        raise InputError(f"unknown parallel back end {backend!r}; expected one of {BACKENDS}")
    if backend == "dask" and scheduler is None:
        raise InputError("the Dask back end needs a scheduler address or client")
    iterator: Iterator
    if backend == "serial" or (backend == "threads" and n_workers == 1):
        iterator = _iter_serial(func, tasks)
    elif backend == "threads":
        iterator = _iter_threads(func, tasks, n_workers)
    elif backend == "processes":
        iterator = _iter_processes(func, tasks, n_workers)
    else:
        iterator = _iter_dask(func, tasks, scheduler)
    results: list = [None] * len(tasks)
    done = [False] * len(tasks)
    for index, result in iterator:
        if keep_results:
            results[index] = result
        done[index] = True
        if on_result is not None:
            on_result(index, result)
        del result  # with keep_results=False nothing here holds the chunk any longer
    if not all(done):  # pragma: no cover - a back end lost a chunk
        raise RuntimeError("parallel back end returned fewer chunks than submitted")
    return results


def chunked(items: Iterable, size: int) -> Iterator[list]:
    """Yield lists of up to ``size`` consecutive items."""
    batch: list = []
    for item in items:
        batch.append(item)
        if len(batch) == size:
            yield batch
            batch = []
    if batch:
        yield batch
