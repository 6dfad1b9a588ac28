"""The bootstrap run: the tree of the original data, its replicates, and their support.

Identical sequences enter once; the replicates run on the chosen executor
(:mod:`.executors`), are kept in index order and, when asked, written to a
replicate file (:mod:`.replicate_file`) that ``resume`` continues. Nothing
outlives a call: the job (:mod:`.jobs`) carries its own data.

References
----------
Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature
556:452–456.
"""

from __future__ import annotations

import os
import secrets
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from ..choices import PRECISIONS, SUPPORT_MEASURES
from ..errors import InputError
from .executors import replicate_results
from .jobs import ReplicateJob, ReplicateResult
from .replicate_file import ReplicateFile, refuse_existing, run_key
from .weights import SEED_LIMIT

if TYPE_CHECKING:
    from dask.distributed import Client

    from ..alignment import Alignment
    from ..build.criteria import LengthCriterion
    from ..matrix import DistanceMatrix
    from ..tree import Tree

__all__ = ["BootstrapResult", "bootstrap"]


@dataclass
class BootstrapResult:
    """The tree of the original data with support, the replicate trees, and
    the distance matrix of the original data's distinct sequences (one row
    per group of identical sequences, named after its first sequence;
    ``info["identical_groups"]`` counts the groups of two or more)."""

    tree: Tree                      # the tree of the original data, with support on its internal branches
    replicates: list[Tree]          # the replicate trees, in replicate order
    seed: int                       # the run's seed (drawn when none was given)
    support: str                    # "fbp" or "tbe"
    info: dict[str, Any] = field(default_factory=dict)
    matrix: DistanceMatrix | None = None


def bootstrap(alignment: Alignment, replicates: int = 100, *, model: str | None = None, method: str = "nj",
              gamma: float | None = None, gaps: str = "pairwise", freqs: str | None = None, saturated: str = "error",
              negative: str = "zero", seed: int | None = None, workers: int | None = None, support: str = "fbp",
              save_replicates: str | os.PathLike[str] | None = None, resume: bool = False,
              scheduler: str | Client | None = None, progress: bool = True,
              precision: str = "double", refine: str | None = None,
              criterion: LengthCriterion | None = None, gamma_categories: int | None = None) -> BootstrapResult:
    """Bootstrap support for the tree of an alignment.

    Parameters
    ----------
    alignment : Alignment
    replicates : int
        Number of bootstrap replicates (>= 1).
    model, gamma, gaps, freqs, saturated, gamma_categories : see :func:`cladewright.distance_matrix`
    method, negative, refine, criterion : see :func:`cladewright.build_tree`; every replicate
        uses the same start and refinement as the main tree
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
        saturated pair, set to that replicate's cap (docs/support.md);
        ``info["warnings"]`` holds the run's warnings
        (:func:`cladewright.pipeline.run_warnings`).

    References
    ----------
    Felsenstein (1985) Evolution 39:783–791; Lemoine et al. (2018) Nature 556:452–456.
    """
    from ..memory import check_replicates_fit
    from ..pipeline import distinct_tree, finish_tree, identical_info, run_warnings, split_identical, zero_tolerance
    from ..progress import Progress
    from ..support import apply_support, fbp_support, tbe_support
    from ..tree import Tree

    if isinstance(replicates, bool) or not isinstance(replicates, (int, np.integer)) or replicates < 1:
        raise InputError(f"replicates must be a whole number >= 1, got {replicates!r}")
    replicates = int(replicates)
    if support not in SUPPORT_MEASURES:
        raise InputError(f"unknown support measure {support!r}; choose fbp or tbe")
    if resume and save_replicates is None:
        raise InputError("resume=True needs save_replicates=FILE, the file of the run to continue")
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
    job = ReplicateJob.of(alignment, distinct, group, seed,
                          (model, gamma, gaps, freqs, saturated, method, negative, precision, refine, criterion,
                           gamma_categories))
    done: list[Tree] = []
    rfile: ReplicateFile | None = None
    path: str | None = None
    if save_replicates is not None:
        path = os.fspath(save_replicates)
        if not resume:
            refuse_existing(path)
        elif os.path.lexists(path):
            # locked and checked before any work: a second run on the file stops at once
            rfile, done = ReplicateFile.resume(path, run_key(job), replicates)
    finished = False
    try:
        dtype = PRECISIONS[precision]
        tree, info, dm = distinct_tree(distinct, model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                       saturated=saturated, negative=negative, dtype=dtype, progress=progress,
                                       n_sequences=alignment.n_taxa, refine=refine, criterion=criterion,
                                       gamma_categories=gamma_categories)
        tree = finish_tree(tree, alignment.names, group, zero_tolerance(dtype))
        info.update(identical_info(group))
        if path is not None and rfile is None:
            rfile = ReplicateFile.create(path, run_key(job))
        trees = list(done)
        capped = sum(1 for i in rfile.capped if i < len(done)) if rfile is not None else 0
        pending: dict[int, ReplicateResult] = {}
        next_index = len(done)
        todo = list(range(len(done), replicates))
        with Progress("bootstrap", replicates, enabled=progress, done=len(done)) as bar:
            for result in replicate_results(job, todo, workers, scheduler):
                pending[result[0]] = result
                while next_index in pending:
                    _, parent, length, rooted, was_capped = pending.pop(next_index)
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
    info.update(dm.info, replicates=replicates, resumed=len(done), workers=workers, replicates_capped=capped,
                negative=negative)
    info["warnings"] = run_warnings(info, alignment)
    return BootstrapResult(apply_support(tree, values), trees, int(seed), support, info, dm)
