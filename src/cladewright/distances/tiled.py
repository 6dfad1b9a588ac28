"""The distance matrix in square tiles, written into a chunked store as they are done.

For matrices too large for one run on one machine: the rows of the distinct
sequences are cut into tiles of ``tile`` rows, and each tile (row tile <=
column tile) is one task, run on local threads or on a Dask cluster. The
encoded alignment (bit planes, or site patterns for the likelihood models) is
made once and, on a cluster, scattered once to every worker; each task
returns its tile and the caller writes it into the store and marks it done
(on a cluster, a worker that sees the store, on a shared file system, writes
the tile itself and returns only its facts: see :func:`tile_task`).
A run that stops is continued with ``resume=True``: only the tiles not marked
done are computed, and the store ends with the same bytes as an
uninterrupted run.

Every value is the one :func:`cladewright.distance_matrix` gives: the same
counting kernels count the same pairs, the same formula runs on the counts,
and the whole alignment's base frequencies (or fitted likelihood model) are
computed once, before the tiles. A tile of rows I and columns J counts the
rows I against the rows J only (the likelihood models, whose pairs come in
blocks, still compute the pairs of I + J stacked and keep those of I x J).

Saturation, a rule over the whole matrix (the cap is twice the largest defined
distance), is applied in a last pass: tiles hold undefined distances as
computed (NaN or inf), each tile's count of them and its largest defined
distance are kept beside its done flag, the last pass finds the cap from
those, and the cap is put in when the store is read
(:func:`cladewright.io.readers.open_store`). With ``saturated="error"`` the
last pass raises, and a run resumed with ``saturated="cap"`` finishes the
store without computing a tile again.
"""

from __future__ import annotations

import hashlib
import os
from concurrent.futures import FIRST_COMPLETED, ThreadPoolExecutor, wait
from dataclasses import dataclass
from itertools import islice
from typing import Any, Callable, Iterator, Optional

import numpy as np
from numpy.typing import DTypeLike, NDArray

from ..alignment import Alignment, distinct_sequences
from ..errors import InputError, SaturationError
from .._kernels import counts as kc
from ..io import store as st
from ..matrix import as_float_dtype
from ..progress import Progress
from . import MAX_LISTED, MODELS, ZERO_WHEN_IDENTICAL, check_settings
from . import likelihood as lik
from .counts import count_dict, pack, state_frequencies

__all__ = ["tiled_distances", "TileJob", "compute_tile", "tile_task"]

#: The settings a resumed run must share with the run that made the store.
RESUME_KEYS = ("input_sha256", "model", "gamma", "gaps", "freqs", "gamma_categories", "dtype", "tile", "n_rows")


@dataclass(frozen=True)
class TileJob:
    """What every tile task needs: the encoded distinct sequences and the model, made once."""

    model: str
    n: int
    tile: int
    dtype: str
    count_kind: int
    gamma: Optional[float]
    pi: Optional[NDArray[np.float64]]
    planes: Optional[NDArray[np.uint64]]
    valid: Optional[NDArray[np.uint64]]
    word_weight: Optional[NDArray[np.int64]]
    patterns: Optional[NDArray[np.uint8]] = None
    weights: Optional[NDArray[np.int64]] = None
    use: Optional[NDArray[np.bool_]] = None
    fitted: Any = None


def compute_tile(job: TileJob, ti: int, tj: int) -> tuple[int, int, NDArray[np.floating], Optional[tuple[int, int]]]:
    """One tile: ``(ti, tj, block, empty)``, ``block`` the distances of rows tile ``ti`` against
    columns tile ``tj`` (ti <= tj), ``empty`` the first pair sharing no site (or None).

    Example
    -------
    See :func:`tiled_distances`.
    """
    t, n = job.tile, job.n
    a0, a1 = ti * t, min(n, (ti + 1) * t)
    b0, b1 = tj * t, min(n, (tj + 1) * t)
    rows = np.arange(a0, a1) if ti == tj else np.concatenate((np.arange(a0, a1), np.arange(b0, b1)))
    size, head = rows.size, a1 - a0
    with np.errstate(all="ignore"):
        if job.fitted is not None:
            d, shared = _likelihood_pairs(job, rows)
        else:
            d, shared = _formula_pairs(job, rows, head, cross=ti != tj)
    if ti != tj and job.fitted is None:  # rows against columns, row-major already
        block = d.reshape(head, size - head)
        gi, gj = np.broadcast_to(np.arange(a0, a1)[:, None], block.shape), \
            np.broadcast_to(np.arange(b0, b1)[None, :], block.shape)
        flat = np.arange(block.size).reshape(block.shape)
    elif ti == tj:
        i, j = np.triu_indices(size, 1)
        block = np.zeros((size, size), dtype=job.dtype)
        block[i, j] = d
        block[j, i] = d
        flat = np.arange(d.size)
        gi, gj = i + a0, j + a0
    else:
        ii = np.arange(head)[:, None]
        jj = np.arange(head, size)[None, :]
        flat = ii * size - ii * (ii + 1) // 2 + jj - ii - 1  # condensed index of (i, j), i < j
        block = d[flat].astype(job.dtype, copy=False)
        gi, gj = np.broadcast_to(ii + a0, flat.shape), np.broadcast_to(jj - head + b0, flat.shape)
    hit = np.flatnonzero((shared[flat] == 0).reshape(-1))
    empty = None if hit.size == 0 else (int(gi.reshape(-1)[hit[0]]), int(gj.reshape(-1)[hit[0]]))
    return ti, tj, block, empty


def _formula_pairs(job: TileJob, rows: NDArray[np.int64], head: int, cross: bool
                   ) -> tuple[NDArray[Any], NDArray[Any]]:
    """Distances and shared sites of the pairs (i, j), i < j, of the stacked rows (condensed), or with
    ``cross`` of the rows i < head against the rows j >= head (row-major)."""
    assert job.planes is not None and job.valid is not None
    planes = np.ascontiguousarray(job.planes[rows])
    valid = np.ascontiguousarray(job.valid[rows])
    size = rows.size
    m = head * (size - head) if cross else size * (size - 1) // 2
    buf = np.empty((kc.N_COUNTS[job.count_kind], max(1, m)), dtype=np.int64)
    if cross:
        kc.cross_counts(planes, valid, job.word_weight, head, job.count_kind, buf)
    else:
        kc.pair_counts_serial(planes, valid, job.word_weight, 0, size, job.count_kind, buf)
    c = count_dict(buf[:, :m], job.count_kind, serial=True)
    pi: Any = job.pi
    if job.count_kind == kc.COMPOSITION:
        pi = (c["comp_i"] + c["comp_j"]) / (2.0 * c["shared"][:, None])
    spec = MODELS[job.model]
    assert spec.formula is not None
    d = spec.formula(c, pi, job.gamma)
    if job.model in ZERO_WHEN_IDENTICAL:
        d = np.where(c["same"] == c["shared"], 0.0, d)
    return (d + 0.0).astype(job.dtype, copy=False), c["shared"]


def _likelihood_pairs(job: TileJob, rows: NDArray[np.int64]) -> tuple[NDArray[Any], NDArray[Any]]:
    """Condensed distances and shared sites of all pairs of the stacked rows."""
    assert job.patterns is not None and job.weights is not None
    parts = [(d.copy(), s.copy()) for _, d, s in
             lik.likelihood_blocks(job.fitted, np.ascontiguousarray(job.patterns[rows]), job.weights, job.use,
                                   True)]
    d = np.concatenate([p[0] for p in parts]) if parts else np.empty(0)
    s = np.concatenate([p[1] for p in parts]) if parts else np.empty(0)
    return d.astype(job.dtype, copy=False), s


def alignment_checksum(alignment: Alignment) -> str:
    """SHA-256 of the names and encoded states (the input's identity when no file checksum is given)."""
    h = hashlib.sha256("\n".join(alignment.names).encode())
    h.update(alignment.alphabet.encode())
    h.update(np.ascontiguousarray(alignment.states).tobytes())
    return h.hexdigest()


def tiled_distances(alignment: Alignment, path: str | os.PathLike[str], model: str | None = None,
                    gamma: float | None = None, gaps: str = "pairwise", freqs: str | None = None, *,
                    saturated: str = "error", dtype: DTypeLike = np.float64, tile: int = 512,
                    scheduler: Any = None, workers: int | None = None, resume: bool = False,
                    progress: bool = False, gamma_categories: int | None = None, input_sha256: str | None = None,
                    on_tile: Callable[[int, int], None] | None = None) -> dict[str, Any]:
    """All pairwise distances, computed in square tiles into a chunked store (Zarr).

    Parameters
    ----------
    alignment : Alignment
    path : str or os.PathLike
        The store to write (a new directory, ``.zarr`` by convention), or
        with ``resume=True`` the store of a run that stopped.
    model, gamma, gaps, freqs, saturated, dtype, gamma_categories :
        As :func:`cladewright.distance_matrix` (``saturated`` is applied in a
        last pass over the store; see the module docstring).
    tile : int
        Rows (and columns) per tile, >= 16; one task per tile.
    scheduler : str or dask.distributed.Client, optional
        A Dask scheduler's address (or a client) to run the tiles on; default
        local threads.
    workers : int, optional
        Local threads (default: the machine's cores).
    resume : bool
        Continue the store at ``path``: only the tiles not yet done are computed.
    progress : bool
        A progress line with the time left on stderr, when it is a terminal.
    input_sha256 : str, optional
        The checksum of the input file; default the SHA-256 of the names and encoded states.
    on_tile : callable, optional
        Called with ``(ti, tj)`` after each tile is written and marked done.

    Returns
    -------
    dict
        The run's facts (as ``DistanceMatrix.info``), also kept in the store's attributes.

    References
    ----------
    The formulas: :func:`cladewright.distance_matrix`. Zarr storage specification,
    https://zarr-specs.readthedocs.io (an open standard).

    Example
    -------
    >>> from cladewright.alignment import Alignment, encode
    >>> from cladewright.io.readers import open_store
    >>> import tempfile, os
    >>> aln = Alignment(["a", "b"], encode(["a", "b"], ["ACGTACGTAC", "ACGTACGTAA"], "dna", "x"), "dna")
    >>> out = os.path.join(tempfile.mkdtemp(), "m.zarr")
    >>> _ = tiled_distances(aln, out, "p")
    >>> float(open_store(out).values[0, 1])
    0.1
    """
    spec, gamma, freqs, gamma_categories = check_settings(alignment, model, gamma, gaps, freqs, gamma_categories,
                                                          saturated)
    src = alignment.source
    if isinstance(tile, bool) or not isinstance(tile, (int, np.integer)) or tile < 16:
        raise InputError(f"tile={tile!r} must be a whole number >= 16 (rows per tile, e.g. 512)", source=src)
    dtype = as_float_dtype(dtype, src)
    if alignment.n_taxa < 2:
        raise InputError(f"the alignment has {alignment.n_taxa} sequence(s); distances need at least two: add "
                         "sequences", source=src)
    collapse = spec.name in ZERO_WHEN_IDENTICAL
    distinct, group = distinct_sequences(alignment) if collapse else (alignment, np.arange(alignment.n_taxa))
    job, n_sites, fitted_info = _make_job(distinct, spec.name, gamma, gaps, freqs, gamma_categories, dtype, int(tile))
    attrs = {"names": list(alignment.names), "input_sha256": input_sha256 or alignment_checksum(alignment),
             "model": spec.name, "gamma": gamma, "gaps": gaps, "freqs": freqs if spec.uses_freqs else None,
             "gamma_categories": gamma_categories, "dtype": np.dtype(dtype).name, "tile": int(tile),
             "n_rows": job.n, "alphabet": alignment.alphabet}
    out = os.fspath(path)
    root = (st.open_for_resume(out, attrs, RESUME_KEYS) if resume else
            st.create_store(out, job.n, int(tile), np.dtype(dtype), np.asarray(group, np.int64), attrs))
    todo = st.missing_tiles(root)
    n_pairs = sum(_pairs_in(job, ti, tj) for ti, tj in todo)
    where = (os.path.abspath(out), st.start_run(root)) if scheduler is not None else None
    with Progress("distances", n_pairs, enabled=progress) as bar:
        for ti, tj, block, empty, facts in _run(job, todo, scheduler, workers, where):
            if empty is not None:
                i, j = (distinct.names[k] for k in empty)
                raise InputError(f"sequences {i!r} and {j!r} share no unambiguous site, so their distance is "
                                 "undefined; remove one of them or trim the alignment", source=src)
            if block is not None:  # not written by the worker that computed it
                st.write_tile(root, job.tile, ti, tj, block)
            st.mark_done(root, ti, tj, *facts)
            bar.advance(_pairs_in(job, ti, tj))
            if on_tile is not None:
                on_tile(ti, tj)
    facts = _saturation_pass(root, job, distinct.names, saturated, spec.name, src)
    sizes = np.bincount(group)
    facts.update(sites_used=n_sites, **fitted_info)
    if collapse:
        facts.update(identical_groups=int(np.count_nonzero(sizes > 1)),
                     identical_sequences=int(sizes[sizes > 1].sum()))
    st.finish_store(root, facts)
    return dict(attrs, **facts)


def _check_frequencies(name: str, pi: NDArray[np.float64], src: str | None) -> None:
    if not np.all(np.isfinite(pi)):
        raise InputError("no unambiguous base to estimate base frequencies from; check the alignment", source=src)
    if name in ("tn93", "f84") and np.any(pi <= 0):
        absent = "ACGT"[int(np.flatnonzero(pi <= 0)[0])]
        raise InputError(f"base {absent} never occurs, so model {name} is undefined; choose k2p or jc69",
                         source=src)


def _pairs_in(job: TileJob, ti: int, tj: int) -> int:
    a = min(job.n, (ti + 1) * job.tile) - ti * job.tile
    b = min(job.n, (tj + 1) * job.tile) - tj * job.tile
    return a * (a - 1) // 2 if ti == tj else a * b


def _make_job(aln: Alignment, name: str, gamma: float | None, gaps: str, freqs: str, categories: int | None,
              dtype: np.dtype[Any], tile: int) -> tuple[TileJob, int, dict[str, Any]]:
    """The tile job of the distinct sequences: what distance_matrix makes before its blocks."""
    spec = MODELS[name]
    k, patterns, weights = aln.n_states, aln.patterns, aln.weights
    use = np.all(patterns < k, axis=0) if gaps == "complete" else None
    if use is not None and not np.any(use & (weights > 0)):
        raise InputError("no site is unambiguous in every sequence, so complete deletion leaves nothing; "
                         "use gaps=\"pairwise\"", source=aln.source)
    common: dict[str, Any] = {"model": name, "n": aln.n_taxa, "tile": tile, "dtype": np.dtype(dtype).name, "gamma": gamma}
    if spec.likelihood:
        fitted = lik.model_for(name, patterns, weights, use, aln.multiplicity, freqs, gamma, categories, aln.source)
        n_sites = int(weights[(weights > 0) if use is None else (weights > 0) & use].sum())
        job = TileJob(count_kind=-1, pi=None, planes=None, valid=None, word_weight=None, patterns=patterns,
                      weights=weights, use=use, fitted=fitted, **common)
        return job, n_sites, {key: v for key, v in fitted.info.items() if v is None or isinstance(v, (str, int, float, bool))}
    kind, pi = spec.counts, None
    if spec.uses_freqs:
        if freqs == "pair":
            kind = kc.COMPOSITION
        else:
            pi = state_frequencies(patterns, weights, k, use, aln.multiplicity)
            _check_frequencies(name, pi, aln.source)
    packed = pack(patterns, weights, k, use)
    planes = kc.transition_planes(packed.planes, packed.valid) if kind == kc.TRANSITIONS else packed.planes
    job = TileJob(count_kind=kind, pi=pi, planes=planes, valid=packed.valid, word_weight=packed.word_weight,
                  **common)
    return job, int(packed.n_sites), {}


#: A tile's result: its place, its block (None once written to the store by the worker that computed
#: it), the first pair sharing no site (or None) and its saturation facts (undefined count, largest).
TileResult = tuple[int, int, Optional[NDArray[np.floating]], Optional[tuple[int, int]], tuple[int, float]]


def tile_task(job: TileJob, ti: int, tj: int, where: Optional[tuple[str, str]] = None) -> TileResult:
    """One tile and its saturation facts. With ``where`` (the store's path and the run's token) a worker
    that sees the store writes the tile itself and sends back only the facts: on a cluster the tiles
    then go from the workers to a shared file system in parallel instead of all through the client."""
    ti, tj, block, empty = compute_tile(job, ti, tj)
    facts = _tile_saturation(block, ti == tj)
    root = st.open_for_tiles(*where) if where is not None and empty is None else None
    if root is None:
        return ti, tj, block, empty, facts
    st.write_tile(root, job.tile, ti, tj, block)
    return ti, tj, None, empty, facts


def _run(job: TileJob, todo: list[tuple[int, int]], scheduler: Any, workers: int | None,
         where: Optional[tuple[str, str]]) -> Iterator[TileResult]:
    """The tiles' results as they arrive (local threads, or Dask tasks on one scattered job)."""
    if scheduler is not None:
        yield from _dask_tiles(job, todo, scheduler, where)
        return
    threads = workers or os.cpu_count() or 1
    with ThreadPoolExecutor(max_workers=threads) as pool:
        queue = iter(todo)
        pending = {pool.submit(tile_task, job, ti, tj) for ti, tj in islice(queue, 2 * threads)}
        try:
            while pending:
                done, pending = wait(pending, return_when=FIRST_COMPLETED)
                pending |= {pool.submit(tile_task, job, ti, tj) for ti, tj in islice(queue, len(done))}
                for fut in done:
                    yield fut.result()
        finally:
            for fut in pending:
                fut.cancel()


def _dask_tiles(job: TileJob, todo: list[tuple[int, int]], scheduler: Any,
                where: Optional[tuple[str, str]]) -> Iterator[TileResult]:
    try:
        from dask.distributed import Client, as_completed
    except ImportError:
        raise InputError('scheduler needs Dask: pip install "cladewright[cluster]"') from None
    client = scheduler if hasattr(scheduler, "submit") else Client(scheduler)
    try:
        job_future = client.scatter(job, broadcast=True)
        # pure=False and retries: a tile lost with a worker is computed again elsewhere
        futures = [client.submit(tile_task, job_future, ti, tj, where, pure=False, retries=3) for ti, tj in todo]
        for fut in as_completed(futures):
            yield fut.result()
            fut.release()
    finally:
        if client is not scheduler:
            client.close()


def _tile_saturation(block: NDArray[np.floating], diagonal: bool) -> tuple[int, float]:
    """The undefined distances of a tile's pairs (the upper half of a diagonal tile) and its largest
    defined distance (at least 0: the diagonal's zeros count in distance_matrix's maximum)."""
    bad = ~np.isfinite(block)
    n_bad = int(np.triu(bad, 1).sum() if diagonal else bad.sum())
    return n_bad, max(0.0, float(block[~bad].max())) if (~bad).any() else 0.0


def _saturation_pass(root: Any, job: TileJob, names: tuple[str, ...], saturated: str, model: str,
                     source: str | None) -> dict[str, Any]:
    """The undefined distances and the cap (twice the largest defined distance, at least 1), as
    distance_matrix finds them, from the tiles' own counts; the matrix is read again only to name the
    first undefined pairs in an error."""
    undefined, largest = st.tile_facts(root)
    n_bad = int(np.triu(undefined).sum())
    if not n_bad:
        return {"saturated": 0, "cap": None}
    if saturated == "cap":
        return {"saturated": n_bad, "cap": max(1.0, 2.0 * float(np.triu(largest).max()))}
    listed: list[tuple[int, int]] = []
    arr = root["distances"]
    for ti, tj in zip(*np.nonzero(np.triu(undefined))):
        r0, c0 = int(ti) * job.tile, int(tj) * job.tile
        bad = ~np.isfinite(np.asarray(arr[r0:r0 + job.tile, c0:c0 + job.tile]))
        if ti == tj:
            bad = np.triu(bad, 1)
        listed.extend((int(i) + r0, int(j) + c0) for i, j in zip(*np.nonzero(bad)))
        if len(listed) >= MAX_LISTED:
            break
    listed = sorted(listed)[:MAX_LISTED]
    shown = "; ".join(f"{names[i]}-{names[j]}" for i, j in listed)
    more = f" and {n_bad - len(listed)} more" if n_bad > len(listed) else ""
    raise SaturationError(f"model {model}: distance undefined (saturated) for {n_bad} pair(s): {shown}{more}; "
                          "choose a model that saturates later (e.g. p) or pass saturated=\"cap\" with "
                          "resume=True to set them to a cap and go on", listed, source=source)
