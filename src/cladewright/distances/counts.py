"""Internal: the counting engine behind cladewright.distance_matrix.

Pair counts for all pairs at once, from weighted site patterns.

The patterns in use (all for pairwise deletion, the fully unambiguous ones
for complete deletion) are packed into bit planes, grouped by weight so that
each 64-bit word carries one weight; a bootstrap replicate is just another
weight vector over the same patterns. The compiled kernel then counts, for
a block of rows at a time, shared sites, identical sites and whichever
differences the model needs.
"""

from __future__ import annotations

from typing import Iterator

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._kernels import counts as kc
from .._kernels.matrix import pairs_before

__all__ = ["PackedPatterns", "pack", "iter_count_blocks", "state_frequencies", "count_dict"]

# Bytes of count array per block of rows: bounds the working memory beside
# the output matrix.
BLOCK_BYTES = 48 * 2**20


class PackedPatterns:
    """Bit planes of the patterns in use and one weight per word."""

    __slots__ = ("planes", "valid", "word_weight", "n_sites")

    #: uint64 (n, words, states): bit b of word w of plane a is set when the
    #: sequence shows state a at that packed site.
    planes: NDArray[np.uint64]
    #: uint64 (n, words): the sites where the sequence is unambiguous.
    valid: NDArray[np.uint64]
    #: int64 (words,): the weight every site of a word counts with.
    word_weight: NDArray[np.int64]
    #: The weighted number of sites packed.
    n_sites: int

    def __init__(self, planes: NDArray[np.uint64], valid: NDArray[np.uint64], word_weight: NDArray[np.int64],
                 n_sites: int) -> None:
        self.planes = planes
        self.valid = valid
        self.word_weight = word_weight
        self.n_sites = n_sites


def pack(patterns: NDArray[np.uint8], weights: ArrayLike, n_states: int,
         use: NDArray[np.bool_] | None = None) -> PackedPatterns:
    """Pack the patterns with nonzero weight (and ``use`` True) into planes.

    Parameters
    ----------
    patterns : uint8 array (n, S)
    weights : int array (S,)
        How many times each pattern is counted (site counts, or a bootstrap
        replicate's multinomial draw).
    n_states : int
        4 for DNA, 20 for protein; states >= n_states are not counted.
    use : bool array (S,), optional
        Patterns to keep (complete deletion keeps only the fully unambiguous ones).
    """
    weights = np.asarray(weights, dtype=np.int64)
    keep = weights > 0
    if use is not None:
        keep &= use
    idx = np.flatnonzero(keep)
    w = weights[idx]
    # Group by weight: sort by weight, start each group on a fresh word.
    order = idx[np.argsort(w, kind="stable")]
    w_sorted = weights[order]
    values, starts, sizes = np.unique(w_sorted, return_index=True, return_counts=True)
    group_words = (sizes + 63) // 64
    first_word = np.concatenate(([0], np.cumsum(group_words)[:-1])).astype(np.int64)
    n_words = int(group_words.sum())
    rank_in_group = np.arange(order.size) - np.repeat(starts, sizes)
    word_of = np.repeat(first_word, sizes) + rank_in_group // 64
    bit_of = (rank_in_group % 64).astype(np.int64)
    word_weight = np.repeat(values, group_words).astype(np.int64)
    planes, valid = kc.pack_planes(np.ascontiguousarray(patterns), order.astype(np.int64),
                                   word_of.astype(np.int64), bit_of, max(n_words, 0), n_states)
    return PackedPatterns(planes, valid, word_weight, int(w.sum()))


def iter_count_blocks(packed: PackedPatterns, kind: int,
                      serial: bool = False) -> Iterator[tuple[int, int, NDArray[np.int64]]]:
    """Yield ``(r0, r1, counts)`` for blocks of rows; ``counts[c, p]`` holds
    count ``c`` of the p-th pair (i, j), r0 <= i < r1, j > i, in row-major
    order of the upper triangle. ``serial`` keeps the counting on the
    calling thread (bootstrap replicates run on threads of their own)."""
    n = packed.planes.shape[0]
    n_counts = kc.N_COUNTS[kind]
    rows = max(1, min(n, BLOCK_BYTES // max(1, n * n_counts * 8)))
    buf = np.empty((n_counts, max(1, rows * (n - 1))), dtype=np.int64)
    count = kc.pair_counts_serial if serial else kc.pair_counts
    planes = kc.transition_planes(packed.planes, packed.valid) if kind == kc.TRANSITIONS else packed.planes
    for r0 in range(0, n, rows):
        r1 = min(n, r0 + rows)
        m = pairs_before(r1, n) - pairs_before(r0, n)
        count(planes, packed.valid, packed.word_weight, r0, r1, kind, buf)
        yield r0, r1, buf[:, :m]


def state_frequencies(patterns: NDArray[np.uint8], weights: ArrayLike, n_states: int,
                      use: NDArray[np.bool_] | None = None,
                      multiplicity: ArrayLike | None = None) -> NDArray[np.float64]:
    """Frequencies of the unambiguous states over the patterns in use,
    weighted, pooled over all sequences; row ``i`` counts
    ``multiplicity[i]`` times (a row standing for a group of identical
    sequences)."""
    weights = np.asarray(weights, dtype=np.int64)
    if use is not None:
        weights = np.where(use, weights, 0)
    counts = np.zeros(n_states + 2, dtype=np.int64)
    # One bincount per state code keeps this O(n S) without a loop over sites.
    flat_states = patterns.reshape(-1)
    if multiplicity is None:
        flat_weights = np.broadcast_to(weights, patterns.shape).reshape(-1)
    else:
        flat_weights = np.outer(np.asarray(multiplicity, dtype=np.int64), weights).reshape(-1)
    counts += np.bincount(flat_states, weights=flat_weights, minlength=n_states + 2)[: n_states + 2].astype(np.int64)
    total = counts[:n_states].sum()
    if total == 0:
        return np.full(n_states, np.nan)
    return counts[:n_states] / total


def count_dict(block: NDArray[np.int64], kind: int, serial: bool = False) -> dict[str, NDArray[np.generic]]:
    """Name the rows of a (n_counts, m) count block for the models' formulas: ``shared``, ``same``, and
    as ``kind`` has them ``ag``, ``ct``, ``comp_i``, ``comp_j``; for :data:`FULL <cladewright._kernels.counts.FULL>`
    also ``logdet_f`` (ln det of each pair's frequency table, compiled; ``serial``: on the calling
    thread only) and ``table`` (the block itself, row 4a + b the state pair (a, b)).

    The one home of this naming: the in-memory matrix and the tiled store use it alike, so their
    distances are the same bits.
    """
    if kind == kc.FULL:
        log_det = kc.log_det_frequencies_serial if serial else kc.log_det_frequencies
        return {"shared": block.sum(axis=0), "same": block[0] + block[5] + block[10] + block[15],
                "logdet_f": log_det(block), "table": block,
                "ag": block[2] + block[8], "ct": block[7] + block[13]}
    c = {"shared": block[0], "same": block[1]}
    if kind in (kc.TRANSITIONS, kc.COMPOSITION):
        c["ag"], c["ct"] = block[2], block[3]
    if kind == kc.COMPOSITION:
        c["comp_i"], c["comp_j"] = block[4:8].T, block[8:12].T
    return c
