"""The nonparametric bootstrap of sites (Felsenstein 1985), run in parallel.

A replicate is a multinomial draw of site counts over the distinct site
patterns; the distance engine takes those weights directly, so no replicate
alignment is ever built. Replicate ``i`` draws from its own stream,
``SeedSequence(seed, spawn_key=(i,))``, so every output is the same whatever
the number of workers or the executor. Replicate trees are written to the
replicate file in index order, one Newick tree per line, flushed as they
complete; ``resume`` continues such a file.
"""

from __future__ import annotations

import contextlib
import json
import os
import queue
import secrets
import threading
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError

__all__ = ["BootstrapResult", "bootstrap", "replicate_weights"]

PRECISIONS = {"double": np.float64, "single": np.float32}


@dataclass
class BootstrapResult:
    """The tree of the original data with support, the replicate trees, and
    the distance matrix of the original data."""

    tree: object
    replicates: list
    seed: int
    support: str
    info: dict = field(default_factory=dict)
    matrix: object = None


def replicate_weights(weights, seed, index):
    """Site counts per pattern for replicate ``index``: a multinomial draw of
    L sites with the patterns' observed frequencies (Felsenstein 1985)."""
    weights = np.asarray(weights, dtype=np.int64)
    total = int(weights.sum())
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(index,)))
    return rng.multinomial(total, weights / total)


@dataclass(frozen=True)
class _Job:
    """Everything a worker needs to build replicate trees (sent once per worker)."""

    names: tuple
    patterns: np.ndarray
    weights: np.ndarray
    alphabet: str
    seed: int
    settings: tuple   # (model, gamma, gaps, freqs, saturated, method, negative, precision)


def _replicate_tree(job, index):
    """Replicate ``index``: its site weights, distances and tree, as
    (index, parent, length, rooted). The counting stays on the calling
    thread: replicates are what runs side by side."""
    from ..build import build_tree
    from ..distances import distance_matrix

    aln = _job_alignment(job)
    model, gamma, gaps, freqs, saturated, method, negative, precision = job.settings
    w = replicate_weights(job.weights, job.seed, index)
    dm = distance_matrix(aln, model, gamma=gamma, gaps=gaps, freqs=freqs, saturated=saturated, weights=w,
                         dtype=PRECISIONS[precision], serial=True)
    tree = build_tree(dm, method, negative)
    return index, tree.parent, tree.length, tree.rooted


_ALIGNMENTS = {}
_ALIGNMENTS_LOCK = threading.Lock()


def _job_alignment(job):
    """One Alignment per job per process, built from the patterns (cheap)."""
    key = id(job)
    with _ALIGNMENTS_LOCK:
        if key not in _ALIGNMENTS:
            from ..alignment import Alignment

            aln = Alignment.__new__(Alignment)
            aln.names, aln.alphabet, aln.source = job.names, job.alphabet, "replicate"
            aln.patterns, aln.weights = job.patterns, job.weights
            aln.states = job.patterns
            aln.site_pattern = np.arange(job.patterns.shape[1])
            _ALIGNMENTS.clear()
            _ALIGNMENTS[key] = aln
        return _ALIGNMENTS[key]


def _run_chunk_with(job, indices):
    """The Dask task: the job arrives as a scattered future."""
    return [_replicate_tree(job, i) for i in indices]


def _chunks(indices, workers):
    """Small chunks, so that no cluster worker idles at the end of a run."""
    size = max(1, min(16, len(indices) // max(1, 4 * workers)))
    return [indices[k:k + size] for k in range(0, len(indices), size)]


def _executor_results(job, todo, workers, scheduler):
    """Yield replicate results in completion order from the chosen executor."""
    if scheduler is not None:
        yield from _dask_results(job, todo, scheduler)
        return
    if workers <= 1 or len(todo) <= 1:
        for i in todo:
            yield _replicate_tree(job, i)
        return
    yield from _thread_results(job, todo, workers)


def _thread_results(job, todo, workers):
    """Run replicates on ``workers`` threads, one replicate at a time each.

    Threads, not processes: the compiled counting and tree kernels release
    the interpreter lock, so replicates run in parallel while sharing the
    patterns, with nothing to start or copy per worker. The threads are
    daemons and take the next replicate only while the run goes on: after an
    error or Ctrl-C the caller leaves at once, and a replicate still running
    is simply abandoned.
    """
    tasks = queue.SimpleQueue()
    for i in todo:
        tasks.put(i)
    results = queue.SimpleQueue()
    stop = threading.Event()

    def work():
        while not stop.is_set():
            try:
                i = tasks.get_nowait()
            except queue.Empty:
                return
            try:
                results.put((True, _replicate_tree(job, i)))
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


def _dask_results(job, todo, scheduler):
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError("--scheduler needs Dask: install cladewright[cluster]") from None
    client = scheduler if hasattr(scheduler, "submit") else Client(scheduler)
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


def _run_key(job):
    """What a replicate file was made from: resume refuses a file from another run."""
    import hashlib

    h = hashlib.sha256()
    h.update(np.ascontiguousarray(job.patterns).tobytes())
    h.update(np.ascontiguousarray(job.weights).tobytes())
    h.update("\t".join(job.names).encode())
    return {"seed": job.seed, "settings": list(job.settings), "data": h.hexdigest()}


def _sidecar(path):
    return os.fspath(path) + ".run.json"


def _read_done(path, job, replicates):
    """The complete replicate lines of an earlier run (a torn last line is cut off)."""
    from ..io.newick import parse_newick

    meta_path = _sidecar(path)
    try:
        with open(meta_path, encoding="utf-8") as fh:
            meta = json.load(fh)
    except (OSError, ValueError):
        raise InputError(f"cannot resume: {meta_path} (the record of the run that made the file) is missing "
                         "or damaged; start a new replicate file", source=os.fspath(path)) from None
    if {k: meta.get(k) for k in ("seed", "settings", "data")} != _run_key(job):
        raise InputError("cannot resume: the file was made from other data, settings or seed; give the same "
                         "input and options (the seed is in " + meta_path + ") or start a new file",
                         source=os.fspath(path))
    with open(path, "rb") as fh:
        data = fh.read()
    keep = data.rfind(b"\n") + 1
    lines = data[:keep].decode("utf-8").splitlines()
    trees = []
    for k, line in enumerate(lines[:replicates]):
        try:
            trees.append(parse_newick(line, source=f"{os.fspath(path)} line {k + 1}")[0])
        except InputError:
            keep = sum(len(x.encode()) + 1 for x in lines[:k])
            break
    with open(path, "r+b") as fh:
        fh.truncate(keep)
    return trees


def bootstrap(alignment, replicates=100, *, model="k2p", method="nj", gamma=None, gaps="pairwise",
              freqs="alignment", saturated="error", negative="zero", seed=None, workers=None, support="fbp",
              save_replicates=None, resume=False, scheduler=None, progress=True, precision="double"):
    """Bootstrap support for the tree of an alignment.

    Parameters
    ----------
    alignment : Alignment
    replicates : int
        Number of bootstrap replicates (>= 1).
    model, gamma, gaps, freqs, saturated : see :func:`cladewright.distance_matrix`
    method, negative : see :func:`cladewright.build_tree`
    seed : int, optional
        The run's seed; drawn (and returned) when not given.
    workers : int, optional
        Local processes; default: the number of cores.
    support : {"fbp", "tbe"}
        Felsenstein bootstrap proportion or transfer bootstrap expectation.
    save_replicates : path, optional
        Append each replicate tree to this file (one Newick line each).
    resume : bool
        Continue ``save_replicates`` from an interrupted run with the same input and settings.
    scheduler : str or dask.distributed.Client, optional
        Run the replicates on a Dask cluster instead of local processes.
    progress : bool
        A progress line with the time left on stderr, when it is a terminal.
    precision : {"double", "single"}
        float64 or float32 distance matrices (half the memory per worker).

    Returns
    -------
    BootstrapResult

    References
    ----------
    Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature 556:452–456.
    """
    from ..build import build_tree_with_info
    from ..distances import distance_matrix
    from ..io.files import atomic_output, output_error
    from ..progress import Progress
    from ..tree import Tree
    from . import fbp_support, tbe_support, apply_support

    if not isinstance(replicates, (int, np.integer)) or replicates < 1:
        raise InputError(f"replicates must be a whole number >= 1, got {replicates!r}")
    if support not in ("fbp", "tbe"):
        raise InputError(f"unknown support measure {support!r}; choose fbp or tbe")
    if resume and save_replicates is None:
        raise InputError("--resume needs --save-replicates FILE, the file of the run to continue")
    if seed is None:
        seed = secrets.randbelow(2**31)
    workers = (os.cpu_count() or 1) if workers is None else int(workers)
    if workers < 1:
        raise InputError(f"workers must be >= 1, got {workers}")

    if precision not in PRECISIONS:
        raise InputError(f"unknown precision {precision!r}; choose double or single")
    dm = distance_matrix(alignment, model, gamma=gamma, gaps=gaps, freqs=freqs, saturated=saturated,
                         dtype=PRECISIONS[precision], progress=progress)
    tree, info = build_tree_with_info(dm, method, negative)
    job = _Job(alignment.names, alignment.patterns, alignment.weights, alignment.alphabet, int(seed),
               (model, gamma, gaps, freqs, saturated, method, negative, precision))

    done = []
    out = None
    if save_replicates is not None:
        path = os.fspath(save_replicates)
        if os.path.exists(path) and not resume:
            raise InputError("the replicate file exists; pass --resume to continue it, or choose a new path",
                             source=path)
        if resume and os.path.exists(path):
            done = _read_done(path, job, replicates)
        else:
            with atomic_output(_sidecar(path)) as fh:
                json.dump(_run_key(job), fh)
        try:
            out = open(path, "a", encoding="utf-8", newline="\n")
        except OSError as err:
            mapped = output_error(err, path)
            if mapped is None:
                raise
            raise mapped from None
    trees = list(done)
    pending = {}
    next_index = len(done)
    todo = list(range(len(done), replicates))
    try:
        with Progress("bootstrap", replicates, enabled=progress, done=len(done)) as bar:
            for index, parent, length, rooted in _executor_results(job, todo, workers, scheduler):
                pending[index] = (parent, length, rooted)
                while next_index in pending:
                    parent, length, rooted = pending.pop(next_index)
                    trees.append(Tree(parent, length, alignment.names, rooted=rooted))
                    if out is not None:
                        try:
                            out.write(trees[-1].to_newick())
                            out.flush()
                        except OSError as err:
                            mapped = output_error(err, path, tail="the replicates written so far are kept "
                                                  "(continue with --resume)")
                            if mapped is None:
                                raise
                            raise mapped from None
                    next_index += 1
                bar.advance()
    finally:
        if out is not None:
            # after a failed write the buffer still holds a torn line, and
            # closing would raise again over the clearer error
            with contextlib.suppress(OSError):
                out.close()
    values = fbp_support(tree, trees) if support == "fbp" else tbe_support(tree, trees)
    info.update(dm.info, replicates=replicates, resumed=len(done), workers=workers)
    return BootstrapResult(apply_support(tree, values), trees, int(seed), support, info, dm)
