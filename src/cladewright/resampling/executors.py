"""Internal: where the replicates of cladewright.bootstrap run (its workers= and scheduler=).

Where replicates run: in line, on local threads, or on a Dask cluster.

Every executor yields the same results, (index, parent, length, rooted,
capped) per replicate, in completion order; the caller puts them back in
index order. Each replicate draws from its own seed stream, so the output is
the same whatever the executor or the number of workers.
"""

from __future__ import annotations

import queue
import threading
from typing import TYPE_CHECKING, Any, Iterator, Sequence, cast

from ..errors import InputError
from .jobs import ReplicateJob, ReplicateResult, replicate_tree

if TYPE_CHECKING:
    from dask.distributed import Client

__all__ = ["replicate_results"]


def replicate_results(job: ReplicateJob, todo: Sequence[int], workers: int,
                      scheduler: str | Client | None) -> Iterator[ReplicateResult]:
    """Yield replicate results in completion order from the chosen executor.

    Parameters
    ----------
    job : ReplicateJob
        The run's data (shared read-only by every worker).
    todo : list of int
        The replicates to build.
    workers : int
        Local threads; 1 builds the replicates in line.
    scheduler : str or dask.distributed.Client or None
        A Dask scheduler address or client: the replicates run there instead.

    Yields
    ------
    tuple
        (index, parent, length, rooted, capped) per replicate, see
        :func:`cladewright.resampling.jobs.replicate_tree`.
    """
    if scheduler is not None:
        yield from _dask_results(job, todo, scheduler)
        return
    if workers <= 1 or len(todo) <= 1:
        for i in todo:
            yield replicate_tree(job, i)
        return
    yield from _thread_results(job, todo, workers)


def _thread_results(job: ReplicateJob, todo: Sequence[int], workers: int) -> Iterator[ReplicateResult]:
    """Run replicates on ``workers`` threads, one replicate at a time each.

    Threads, not processes: the compiled counting and tree kernels release
    the interpreter lock, so replicates run in parallel while sharing the
    patterns, with nothing to start or copy per worker. The threads are
    daemons and take the next replicate only while the run goes on: after an
    error or Ctrl-C the caller leaves at once, and a replicate still running
    is simply abandoned.
    """
    tasks: queue.SimpleQueue[int] = queue.SimpleQueue()
    for i in todo:
        tasks.put(i)
    results: queue.SimpleQueue[tuple[bool, Any]] = queue.SimpleQueue()
    stop = threading.Event()

    def work() -> None:
        while not stop.is_set():
            try:
                i = tasks.get_nowait()
            except queue.Empty:
                return
            try:
                results.put((True, replicate_tree(job, i)))
            except BaseException as err:  # handed to the caller, which raises it
                results.put((False, err))
                return

    for k in range(min(workers, len(todo))):
        threading.Thread(target=work, name=f"replicate-worker-{k}", daemon=True).start()
    try:
        for _ in range(len(todo)):
            while True:
                try:
                    ok, value = results.get(timeout=0.2)  # wakes up for Ctrl-C
                    break
                except queue.Empty:
                    continue
            if not ok:
                raise value
            yield value
    finally:
        stop.set()


def _run_chunk_with(job: ReplicateJob, indices: Sequence[int]) -> list[ReplicateResult]:
    """The Dask task: the job arrives as a scattered future."""
    return [replicate_tree(job, i) for i in indices]


def _chunks(indices: Sequence[int], workers: int) -> list[Sequence[int]]:
    """Small chunks, so that no cluster worker idles at the end of a run."""
    size = max(1, min(16, len(indices) // max(1, 4 * workers)))
    return [indices[k:k + size] for k in range(0, len(indices), size)]


def _dask_results(job: ReplicateJob, todo: Sequence[int], scheduler: str | Client) -> Iterator[ReplicateResult]:
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError("scheduler needs Dask: install cladewright[cluster]") from None
    client = cast("Client", scheduler) if hasattr(scheduler, "submit") else Client(scheduler)
    try:
        job_future = client.scatter(job, broadcast=True)
        n_workers = max(1, len(client.scheduler_info().get("workers", {})))
        # pure=False: every chunk runs, and a chunk lost with a worker is run again elsewhere.
        futures = [client.submit(_run_chunk_with, job_future, chunk, pure=False, retries=3)
                   for chunk in _chunks(todo, n_workers)]
        for fut in as_completed(futures):
            yield from fut.result()
    finally:
        if client is not scheduler:
            client.close()
