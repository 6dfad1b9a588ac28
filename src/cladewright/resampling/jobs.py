"""A bootstrap job: the data of one run, and how one replicate tree is built from it.

The job holds its own read-only copies of the data, so a replicate is built
from this call's alignment and nothing else, in any thread or process (it
pickles as it stands for a Dask cluster). Nothing outlives a call.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..choices import PRECISIONS
from .weights import replicate_weights

__all__ = ["ReplicateJob", "replicate_tree"]


def _frozen(array):
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

    @classmethod
    def of(cls, alignment, distinct, group, seed, settings):
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
            (model, gamma, gaps, freqs, saturated, method, negative, precision).

        Returns
        -------
        ReplicateJob
            With read-only copies of the arrays.
        """
        return cls(tuple(distinct.names), _frozen(distinct.patterns), _frozen(distinct.weights),
                   alignment.alphabet, int(seed), tuple(settings), alignment.source, tuple(alignment.names),
                   _frozen(group), _frozen(distinct.multiplicity))

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


def replicate_tree(job, index):
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

    model, gamma, gaps, freqs, saturated, method, negative, precision = job.settings
    w = replicate_weights(job.weights, job.seed, index)
    dtype = PRECISIONS[precision]
    tree, _, dm = distinct_tree(job.alignment(index), model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                saturated="cap", negative=negative, dtype=dtype, weights=w, fit=False,
                                serial=True, n_sequences=len(job.all_names))
    # identical sequences back as polytomies, branches of length zero contracted, as in the main tree
    tree = finish_tree(tree, job.all_names, job.group, zero_tolerance(dtype))
    return index, tree.parent, tree.length, tree.rooted, bool(dm.info.get("saturated"))
