"""Compiled kernel for the transfer distance of the transfer bootstrap (TBE).

For a reference split with leaf set ``L`` (``|L| = s``) and a replicate tree
``T*``, the transfer distance is the smallest Hamming distance between the
bipartition ``L | L^c`` and any bipartition of ``T*`` (leaf edges included):
``min over edges e of T* of min(|L Δ C_e|, n - |L Δ C_e|)``, where ``C_e`` is
the leaf set below ``e`` once ``T*`` hangs from its root. Since
``|L Δ C_e| = s + |C_e| - 2 |L ∩ C_e|``, one postorder pass over ``T*`` that
sums the membership of the leaves in ``L`` gives every ``|L ∩ C_e|``, so each
(reference split, replicate) pair costs O(n) and a whole replicate O(k n)
for ``k`` reference splits: the O(n) per split and replicate scheme of
Lemoine et al. (2018).

References
----------
Lemoine F, Domelevo Entfellner J-B, Wilkinson E, Correia D, Dávila Felipe M,
De Oliveira T, Gascuel O (2018) Renewing Felsenstein's phylogenetic bootstrap
in the era of big data. Nature 556:452–456.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange
from numpy.typing import NDArray

__all__ = ["transfer_distances"]


@njit(cache=True, parallel=True)
def transfer_distances(ref_bits: NDArray[np.uint64], ref_size: NDArray[np.int64], n_leaves: int,
                       parent: NDArray[np.int64], postorder: NDArray[np.int64],
                       leaf_pos: NDArray[np.int64]) -> NDArray[np.int64]:
    """Transfer distance of every reference split to one replicate tree.

    Parameters
    ----------
    ref_bits : uint64 array (k, w)
        Reference splits as bitsets over the reference leaf order (bit ``b``
        set = leaf at position ``b`` lies in the set).
    ref_size : int64 array (k,)
        Number of set bits of each row of ``ref_bits``.
    n_leaves : int
        Number of leaves ``n`` (the same in both trees).
    parent : int64 array (m,)
        Parent of every node of the replicate, -1 for its root; its leaves are
        nodes ``0..n-1``.
    postorder : int64 array (m,)
        The replicate's nodes, children before parents, root last.
    leaf_pos : int64 array (n,)
        Position in the reference leaf order of replicate leaf ``i``.

    Returns
    -------
    int64 array (k,)
        The transfer distance of each reference split (0 when the replicate
        holds the split; at most ``min(s, n - s) - 1``).

    References
    ----------
    Lemoine et al. (2018) Nature 556:452–456.
    """
    k = ref_bits.shape[0]
    m = parent.shape[0]
    n = n_leaves
    # Leaf count below each replicate node, shared by every reference split.
    below = np.zeros(m, dtype=np.int64)
    for i in range(n):
        below[i] = 1
    for t in range(m):
        v = postorder[t]
        if parent[v] >= 0:
            below[parent[v]] += below[v]
    word = np.empty(n, dtype=np.int64)
    shift = np.empty(n, dtype=np.uint64)
    for i in range(n):
        word[i] = leaf_pos[i] >> 6
        shift[i] = np.uint64(leaf_pos[i] & 63)
    one = np.uint64(1)
    out = np.empty(k, dtype=np.int64)
    for j in prange(k):
        inside = np.zeros(m, dtype=np.int64)
        for i in range(n):
            inside[i] = np.int64((ref_bits[j, word[i]] >> shift[i]) & one)
        s = ref_size[j]
        best = n
        for t in range(m):
            v = postorder[t]
            pv = parent[v]
            if pv < 0:
                continue
            # Children come first in postorder, so inside[v] is complete here.
            d = s + below[v] - 2 * inside[v]
            if n - d < d:
                d = n - d
            if d < best:
                best = d
                if best == 0:
                    break
            inside[pv] += inside[v]
        out[j] = best
    return out
