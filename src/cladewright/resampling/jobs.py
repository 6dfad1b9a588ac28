"""Internal: the job every replicate of cladewright.bootstrap runs.

A bootstrap job: the data of one run, and how one replicate tree is built from it.

The job holds its own read-only copies of the data, so a replicate is built
from this call's alignment and nothing else, in any thread or process (it
pickles as it stands for a Dask cluster). Nothing outlives a call.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..choices import PRECISIONS, Alphabet
from .weights import replicate_weights

if TYPE_CHECKING:
    from ..alignment import Alignment

#: What one replicate gives back: (index, parent, length, rooted, capped), see :func:`replicate_tree`.
ReplicateResult = tuple[int, NDArray[np.int64], NDArray[np.float64], bool, bool]

__all__ = ["ReplicateJob", "replicate_tree"]


def _frozen(array: ArrayLike) -> NDArray[Any]:
    out = np.array(array, copy=True)
    out.flags.writeable = False
    return out


@dataclass(frozen=True)
class ReplicateJob:
    """Everything a worker needs to build replicate trees (sent once per worker).

    The job holds its own read-only copies of the data, so a replicate is
    built from this call's alignment and nothing else, in any thread or
    process (it pickles as it stands for a Dask cluster).
    """

    names: tuple[str, ...]        # the distinct sequences' names (one per group of identical sequences)
    patterns: NDArray[np.uint8]   # (n_distinct, P) site patterns
    weights: NDArray[np.int64]    # (P,) sites showing each pattern
    alphabet: Alphabet
    seed: int
    settings: tuple[Any, ...]     # (model, gamma, gaps, freqs, saturated, method, negative, precision, refine,
    #                               criterion, gamma_categories)
    source: str                   # the alignment's file, for messages
    all_names: tuple[str, ...]    # every sequence, in the alignment's order
    group: NDArray[np.int64]      # the distinct row standing for each sequence
    multiplicity: NDArray[np.int64]  # how many sequences each distinct row stands for

    @classmethod
    def of(cls, alignment: Alignment, distinct: Alignment, group: ArrayLike, seed: int,
           settings: tuple[Any, ...]) -> ReplicateJob:
        """The job for ``alignment``, whose distinct sequences are ``distinct``.

        Parameters
        ----------
        alignment : Alignment
            The run's alignment (names, alphabet, source).
        distinct : Alignment
            One row per group of identical sequences (its patterns and weights are copied).
        group : int array (n,)
            The distinct row standing for each sequence of ``alignment``.
        seed : int
        settings : tuple
            (model, gamma, gaps, freqs, saturated, method, negative, precision, refine, criterion,
            gamma_categories).

        Returns
        -------
        ReplicateJob
            With read-only copies of the arrays.
        """
        return cls(tuple(distinct.names), _frozen(distinct.patterns), _frozen(distinct.weights),
                   alignment.alphabet, int(seed), tuple(settings), alignment.source, tuple(alignment.names),
                   _frozen(group), _frozen(distinct.multiplicity))

    def alignment(self, index: int) -> Alignment:
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


def replicate_tree(job: ReplicateJob, index: int) -> ReplicateResult:
    """Replicate ``index``: its site weights, distances and tree, as
    (index, parent, length, rooted, capped). The counting stays on the
    calling thread: replicates are what runs side by side.

    A replicate caps saturated pairs whatever ``saturated`` says: the
    original data passed under the run's own rule, and one unlucky draw of
    sites must not end a long run (docs/support.md); ``capped`` says whether
    this replicate needed it.

    Parameters
    ----------
    job : ReplicateJob
    index : int
        The replicate's number, from 0.

    Returns
    -------
    tuple
        (index, parent array, length array, rooted, capped).
    """
    from ..pipeline import distinct_tree, finish_tree, zero_tolerance

    model, gamma, gaps, freqs, saturated, method, negative, precision, refine, criterion, categories = job.settings
    w = replicate_weights(job.weights, job.seed, index)
    dtype = PRECISIONS[precision]
    tree, _, dm = distinct_tree(job.alignment(index), model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                saturated="cap", negative=negative, dtype=dtype, weights=w, fit=False,
                                serial=True, n_sequences=len(job.all_names), refine=refine, criterion=criterion,
                                gamma_categories=categories)
    # identical sequences back as polytomies, branches of length zero contracted, as in the main tree
    tree = finish_tree(tree, job.all_names, job.group, zero_tolerance(dtype))
    return index, tree.parent, tree.length, tree.rooted, bool(dm.info.get("saturated"))
