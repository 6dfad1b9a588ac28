"""The nonparametric bootstrap of sites (Felsenstein 1985), run in parallel.

A replicate is a multinomial draw of site counts over the distinct site
patterns; the distance engine takes those weights directly, so no replicate
alignment is ever built. Replicate ``i`` draws from its own stream,
``SeedSequence(seed, spawn_key=(i,))``, so every output is the same whatever
the number of workers or the executor. Replicate trees are written to the
replicate file in index order, one Newick tree per line, flushed as they
complete; ``resume`` continues such a file. Nothing outlives a call: each job
carries its own data.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import json
import os
import queue
import secrets
import threading
import time
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..io.files import atomic_output, output_error

try:
    import fcntl
except ImportError:  # Windows
    fcntl = None

__all__ = ["BootstrapResult", "bootstrap", "replicate_weights"]

PRECISIONS = {"double": np.float64, "single": np.float32}
SEED_LIMIT = 2**128  # SeedSequence takes any entropy >= 0; 128 bits is its own pool size


@dataclass
class BootstrapResult:
    """The tree of the original data with support, the replicate trees, and
    the distance matrix of the original data's distinct sequences (one row
    per group of identical sequences, named after its first sequence;
    ``info["identical_groups"]`` counts the groups of two or more)."""

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
    """Everything a worker needs to build replicate trees (sent once per worker).

    The job holds its own read-only copies of the data, so a replicate is
    built from this call's alignment and nothing else, in any thread or
    process (it pickles as it stands for a Dask cluster).
    """

    names: tuple             # the distinct sequences' names (one per group of identical sequences)
    patterns: np.ndarray
    weights: np.ndarray
    alphabet: str
    seed: int
    settings: tuple   # (model, gamma, gaps, freqs, saturated, method, negative, precision)
    source: str = "<alignment>"
    all_names: tuple = ()    # every sequence, in the alignment's order
    group: np.ndarray = None  # the distinct row standing for each sequence
    multiplicity: np.ndarray = None  # how many sequences each distinct row stands for

    def alignment(self, index):
        """The patterns as an Alignment for replicate ``index`` (no copy; messages name the replicate)."""
        from ..alignment import Alignment

        aln = Alignment.__new__(Alignment)
        aln.names, aln.alphabet = self.names, self.alphabet
        aln.source = f"{self.source}: bootstrap replicate {index + 1}"
        aln.patterns, aln.weights = self.patterns, self.weights
        aln.states = self.patterns
        aln.site_pattern = np.arange(self.patterns.shape[1])
        aln.multiplicity = self.multiplicity
        return aln


def _frozen(array):
    out = np.array(array, copy=True)
    out.flags.writeable = False
    return out


def _replicate_tree(job, index):
    """Replicate ``index``: its site weights, distances and tree, as
    (index, parent, length, rooted, capped). The counting stays on the
    calling thread: replicates are what runs side by side.

    A replicate caps saturated pairs whatever ``saturated`` says: the
    original data passed under the run's own rule, and one unlucky draw of
    sites must not end a long run (docs/support.md); ``capped`` says whether
    this replicate needed it.
    """
    from ..pipeline import distinct_tree, finish_tree, zero_tolerance

    model, gamma, gaps, freqs, saturated, method, negative, precision = job.settings
    w = replicate_weights(job.weights, job.seed, index)
    dtype = PRECISIONS[precision]
    tree, _, dm = distinct_tree(job.alignment(index), model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                saturated="cap", negative=negative, dtype=dtype, weights=w, fit=False,
                                serial=True, n_sequences=len(job.all_names))
    # identical sequences back as polytomies, branches of length zero contracted, as in the main tree
    tree = finish_tree(tree, job.all_names, job.group, zero_tolerance(dtype))
    return index, tree.parent, tree.length, tree.rooted, bool(dm.info.get("saturated"))


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
    h = hashlib.sha256()
    h.update(np.ascontiguousarray(job.patterns).tobytes())
    h.update(np.ascontiguousarray(job.weights).tobytes())
    h.update("\t".join(job.names).encode())
    h.update("\t".join(job.all_names).encode())
    h.update(np.ascontiguousarray(job.group, dtype=np.int64).tobytes())
    return {"seed": job.seed, "settings": list(job.settings), "data": h.hexdigest()}


def _sidecar(path):
    return os.fspath(path) + ".run.json"


_EXISTS = "the replicate file exists; pass --resume to continue it, or choose a new path"
_NO_DIGEST = "0" * 64
CHECKPOINT_SECONDS = 1.0  # how often the run record catches up with the lines written


def _chain(digest, line):
    """The running SHA-256 of the lines so far: each line hashed after the digest before it."""
    return hashlib.sha256(bytes.fromhex(digest) + line).hexdigest()


def _lock(fh, path):
    """Hold the replicate file for this run alone (an exclusive lock, never waited for)."""
    try:
        if fcntl is not None:
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        else:
            import msvcrt

            msvcrt.locking(fh.fileno(), msvcrt.LK_NBLCK, 1)
    except OSError as err:
        if err.errno in (errno.EAGAIN, errno.EWOULDBLOCK, errno.EACCES, errno.EDEADLK):
            raise InputError("the replicate file is in use by another run (it is locked); wait for that run "
                             "to end, or choose another path", source=path) from None
        raise InputError(f"the replicate file cannot be locked on this file system ({err.strerror}); keep it "
                         "on a local disk", source=path) from None


def _write_error(err, path, tail="nothing was written"):
    mapped = output_error(err, path, tail=tail)
    return err if mapped is None else mapped


class _ReplicateFile:
    """A replicate file held by one run: locked against other runs for the
    run's length, appended one whole line at a time, with a record of the run
    (``FILE.run.json``): what the file was made from, how many lines were
    written, a running SHA-256 of them, and which replicates capped
    saturated pairs. ``resume`` trusts only the lines the record vouches for.
    """

    def __init__(self, path, fh, key, lines=0, digest=_NO_DIGEST, capped=()):
        self.path, self.fh, self.key = path, fh, key
        self.lines, self.digest, self.capped = lines, digest, list(capped)
        self.saved = time.monotonic()

    @classmethod
    def create(cls, path, key):
        try:
            fh = open(path, "xb")
        except FileExistsError:
            raise InputError(_EXISTS, source=path) from None
        except OSError as err:
            raise _write_error(err, path) from None
        try:
            _lock(fh, path)
            rf = cls(path, fh, key)
            rf.save()
        except BaseException:
            fh.close()
            with contextlib.suppress(OSError):
                os.unlink(path)  # ours, empty: a retry must not be told the file exists
            raise
        return rf

    @classmethod
    def resume(cls, path, key, replicates):
        """The file of an earlier run and the trees it holds (up to ``replicates``)."""
        try:
            fh = open(path, "r+b")
        except OSError as err:
            raise _write_error(err, path) from None
        try:
            _lock(fh, path)
            lines, digest, capped = cls._record(path, key)
            data = fh.read()
            whole = data[:data.rfind(b"\n") + 1].split(b"\n")[:-1]
            if len(whole) < lines:
                raise InputError(f"cannot resume: the run wrote {lines} replicate trees but the file holds "
                                 f"{len(whole)} whole lines (lines were deleted); start a new replicate file",
                                 source=path)
            check = _NO_DIGEST
            for line in whole[:lines]:
                check = _chain(check, line + b"\n")
            if check != digest:
                raise InputError(f"cannot resume: the first {lines} lines are not the replicate trees the run "
                                 "wrote (a line was changed, deleted or added); start a new replicate file",
                                 source=path)
            from ..io.newick import parse_newick

            trees = [parse_newick(whole[k].decode("utf-8"), source=f"{path} line {k + 1}")[0]
                     for k in range(min(lines, replicates))]
            # lines after the recorded ones (the last second of a killed run, a torn line) are made again
            keep = sum(len(x) + 1 for x in whole[:lines])
            fh.truncate(keep)
            fh.seek(keep)
        except BaseException:
            fh.close()
            raise
        return cls(path, fh, key, lines, digest, capped), trees

    @staticmethod
    def _record(path, key):
        meta_path = _sidecar(path)
        try:
            with open(meta_path, encoding="utf-8") as fh:
                meta = json.load(fh)
            lines, digest, capped = int(meta["lines"]), str(meta["digest"]), [int(i) for i in meta["capped"]]
            bytes.fromhex(digest)
        except (OSError, ValueError, KeyError, TypeError):
            raise InputError(f"cannot resume: {meta_path} (the record of the run that made the file) is "
                             "missing or damaged; start a new replicate file", source=path) from None
        if {k: meta.get(k) for k in ("seed", "settings", "data")} != key:
            raise InputError("cannot resume: the file was made from other data, settings or seed; give the same "
                             "input and options (the seed is in " + meta_path + ") or start a new file",
                             source=path)
        return lines, digest, [i for i in capped if i < lines]

    def append(self, text, capped):
        line = text.encode("utf-8")
        try:
            self.fh.write(line)
            self.fh.flush()
        except OSError as err:
            raise _write_error(err, self.path, "the replicates written so far are kept (continue with "
                               "--resume)") from None
        self.digest = _chain(self.digest, line)
        if capped:
            self.capped.append(self.lines)
        self.lines += 1
        if time.monotonic() - self.saved >= CHECKPOINT_SECONDS:
            self.save()

    def save(self):
        """Bring the record up to the lines written; they reach the disk first."""
        os.fsync(self.fh.fileno())
        with atomic_output(_sidecar(self.path)) as fh:
            json.dump({**self.key, "lines": self.lines, "digest": self.digest, "capped": self.capped}, fh)
        self.saved = time.monotonic()

    def close(self, save):
        if save:
            # after a failed write or Ctrl-C: keep what is recorded, and the first error
            with contextlib.suppress(OSError, InputError):
                self.save()
        with contextlib.suppress(OSError):
            self.fh.close()


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
        The run's seed, 0 <= seed < 2**128; drawn (and returned) when not given.
    workers : int, optional
        Replicates run side by side on threads; default: the number of cores.
    support : {"fbp", "tbe"}
        Felsenstein bootstrap proportion or transfer bootstrap expectation.
    save_replicates : path, optional
        Append each replicate tree to this file (one Newick line each), held
        with an exclusive lock for the run.
    resume : bool
        Continue ``save_replicates`` from an interrupted run with the same input and settings;
        refused when the lines the run wrote were changed since.
    scheduler : str or dask.distributed.Client, optional
        Run the replicates on a Dask cluster instead of local processes.
    progress : bool
        A progress line with the time left on stderr, when it is a terminal.
    precision : {"double", "single"}
        float64 or float32 distance matrices (half the memory per worker).

    Returns
    -------
    BootstrapResult
        ``info["replicates_capped"]`` counts the replicates whose sites gave a
        saturated pair, set to that replicate's cap (docs/support.md).

    References
    ----------
    Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature 556:452–456.
    """
    from ..memory import check_replicates_fit
    from ..pipeline import distinct_tree, finish_tree, identical_info, split_identical, zero_tolerance
    from ..progress import Progress
    from ..tree import Tree
    from . import fbp_support, tbe_support, apply_support

    if isinstance(replicates, bool) or not isinstance(replicates, (int, np.integer)) or replicates < 1:
        raise InputError(f"replicates must be a whole number >= 1, got {replicates!r}")
    replicates = int(replicates)
    if support not in ("fbp", "tbe"):
        raise InputError(f"unknown support measure {support!r}; choose fbp or tbe")
    if resume and save_replicates is None:
        raise InputError("--resume needs --save-replicates FILE, the file of the run to continue")
    if save_replicates is not None and os.fspath(save_replicates).lower().endswith(".gz"):
        # appended one line at a time and cut back to its last whole line by --resume: kept plain
        raise InputError("a replicate file is written uncompressed, one tree per line; give a name without .gz "
                         "(gzip it after the run: every reader takes gzip)", source=os.fspath(save_replicates))
    if seed is None:
        seed = secrets.randbelow(2**31)
    elif isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or not 0 <= seed < SEED_LIMIT:
        raise InputError(f"seed must be a whole number from 0 to 2**128 - 1, got {seed!r}")
    if workers is None:
        workers = os.cpu_count() or 1
    elif isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1:
        raise InputError(f"workers must be a whole number >= 1, got {workers!r}")
    workers = int(workers)
    if precision not in PRECISIONS:
        raise InputError(f"unknown precision {precision!r}; choose double or single")
    # the replicate trees are kept for the support count: refuse a count that cannot fit, before any work
    check_replicates_fit(alignment.n_taxa, replicates, method=method, precision=precision,
                         workers=0 if scheduler is not None else min(workers, replicates))

    # Identical sequences enter once; they stay identical in every replicate.
    distinct, group = split_identical(alignment, model)
    job = _Job(tuple(distinct.names), _frozen(distinct.patterns), _frozen(distinct.weights),
               alignment.alphabet, int(seed), (model, gamma, gaps, freqs, saturated, method, negative, precision),
               alignment.source, tuple(alignment.names), _frozen(group), _frozen(distinct.multiplicity))
    done, rfile, path = [], None, None
    if save_replicates is not None:
        path = os.fspath(save_replicates)
        if os.path.lexists(path) and not resume:
            raise InputError(_EXISTS, source=path)
        if resume and os.path.lexists(path):
            # locked and checked before any work: a second run on the file stops at once
            rfile, done = _ReplicateFile.resume(path, _run_key(job), replicates)
    finished = False
    try:
        dtype = PRECISIONS[precision]
        tree, info, dm = distinct_tree(distinct, model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                       saturated=saturated, negative=negative, dtype=dtype, progress=progress,
                                       n_sequences=alignment.n_taxa)
        tree = finish_tree(tree, alignment.names, group, zero_tolerance(dtype))
        info.update(identical_info(group))
        if path is not None and rfile is None:
            rfile = _ReplicateFile.create(path, _run_key(job))
        trees = list(done)
        capped = sum(1 for i in rfile.capped if i < len(done)) if rfile is not None else 0
        pending = {}
        next_index = len(done)
        todo = list(range(len(done), replicates))
        with Progress("bootstrap", replicates, enabled=progress, done=len(done)) as bar:
            for index, *result in _executor_results(job, todo, workers, scheduler):
                pending[index] = result
                while next_index in pending:
                    parent, length, rooted, was_capped = pending.pop(next_index)
                    trees.append(Tree(parent, length, job.all_names, rooted=rooted))
                    capped += was_capped
                    if rfile is not None:
                        rfile.append(trees[-1].to_newick(), was_capped)
                    next_index += 1
                bar.advance()
        if rfile is not None:
            rfile.save()
        finished = True
    finally:
        if rfile is not None:
            rfile.close(save=not finished)
    values = fbp_support(tree, trees) if support == "fbp" else tbe_support(tree, trees)
    info.update(dm.info, replicates=replicates, resumed=len(done), workers=workers, replicates_capped=capped)
    return BootstrapResult(apply_support(tree, values), trees, int(seed), support, info, dm)
