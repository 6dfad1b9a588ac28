"""Average distances between the subtrees of a binary tree, kept up to date
while the tree changes (numba): the table behind NNI and greedy insertion.

The tree is hung from a leaf ``top`` (Desper & Gascuel 2002): ``top`` has one
child, every other internal node two (``kid1``, ``kid2``), and every node w
but ``top`` stands for two subtrees, the clade X_w below it and U_w, the rest
of the tree, which splits at w's parent p into the sibling's clade X_s and
U_p. One (m x m) table ``M`` holds the average distance between every pair of
disjoint subtrees:

    M[a, b] = M[b, a] = Δ(X_a, X_b)   a, b unrelated (neither below the other),
                                      ``top`` counting as unrelated to all;
    M[a, b]           = Δ(U_a, X_b)   b strictly below a.

Balanced averages (Pauplin 2000; Desper & Gascuel 2002) weigh a leaf of a
subtree by 2^-(edges from the subtree's first node to the leaf), so

    Δ(X_w, Z) = 1/2 (Δ(X_w1, Z) + Δ(X_w2, Z)),  Δ(U_w, Z) = 1/2 (Δ(X_s, Z) + Δ(U_p, Z));

plain (OLS) averages weigh the two parts by their numbers of leaves instead.
The whole table costs O(n^2). When the tree changes on one branch (an NNI, a
leaf put on a branch) only the subtrees holding that branch change: the
clades X_w of the nodes w on its path to ``top`` (O(n) entries each) and the
sides U_w (O(depth) entries per node), so an update is O(n diam).

The build writes every entry between unrelated subtrees into both its rows;
afterwards an update writes the rows of the changed clades only, not their
columns (a column is a scattered write per entry): each row carries the time
it was last written (``stamp``, 0 for all at the build), and an entry between
unrelated subtrees a and b is read from the row written last (:func:`get`). That row holds the current value: a clade that changes
has its row rewritten before anything reads it, and a pair becomes unrelated
only when one of its clades changes.

References
----------
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Pauplin, Y. (2000) Direct calculation of a tree length using a distance
matrix. J. Mol. Evol. 51:41–47.
"""

import numba as nb
import numpy as np


@nb.njit(cache=True, nogil=True)
def work_arrays(m, top):
    """The work arrays of a table of m nodes for a tree hung from ``top``:
    ``pre`` (``pre[0] = top``), ``pos``, ``count``, ``size`` (see
    :func:`preorder`), ``stamp`` and ``clock`` (see :func:`get`), all int64."""
    pre = np.empty(m, np.int64)
    pre[0] = top
    return (pre, np.empty(m, np.int64), np.empty(m, np.int64), np.empty(m, np.int64), np.zeros(m, np.int64),
            np.zeros(1, np.int64))


@nb.njit(cache=True, nogil=True)
def preorder(top, kid1, kid2, n_leaves, pre, pos, count, size):
    """Fill the preorder ``pre`` of the nodes hanging from ``top``, each node's
    place ``pos`` in it, its number of nodes ``count`` and leaves ``size``
    below and at it (``top``'s own size is 1: it is a subtree of one leaf).

    Returns
    -------
    int
        The number of nodes in the tree.
    """
    pre[0] = top
    k = 1
    sp = 0
    stack = np.empty(pre.shape[0], np.int64)
    stack[0] = kid1[top]
    sp = 1
    while sp > 0:
        sp -= 1
        w = stack[sp]
        pre[k] = w
        k += 1
        if w >= n_leaves:
            stack[sp] = kid2[w]
            stack[sp + 1] = kid1[w]
            sp += 2
    for t in range(k):
        pos[pre[t]] = t
    for t in range(k - 1, 0, -1):
        w = pre[t]
        if w < n_leaves:
            count[w] = 1
            size[w] = 1
        else:
            count[w] = 1 + count[kid1[w]] + count[kid2[w]]
            size[w] = size[kid1[w]] + size[kid2[w]]
    count[top] = k
    size[top] = 1
    return k


@nb.njit(cache=True, nogil=True, inline="always")
def below(a, b, pos, count):
    """Whether node b is a or lies below a."""
    return pos[a] <= pos[b] < pos[a] + count[a]


@nb.njit(cache=True, nogil=True, inline="always")
def sibling(w, parent, kid1, kid2):
    """The other child of w's parent."""
    p = parent[w]
    return kid2[p] if kid1[p] == w else kid1[p]


@nb.njit(cache=True, nogil=True, inline="always")
def get(M, stamp, a, b):
    """Δ(X_a, X_b) for unrelated a, b: from the row written last."""
    return M[a, b] if stamp[a] >= stamp[b] else M[b, a]


@nb.njit(cache=True, nogil=True)
def clade_row(M, stamp, clock, w, kid1, kid2, pre, k, pos, count, size, balanced, mirror=False):
    """Δ(X_w, Z) from w's children, for every Z unrelated to w (``top``
    included), into w's row, which takes the next time of ``clock`` (one
    entry); with ``mirror``, into w's column too, the times left as they are
    (for searches that then read whole rows, where a column read per entry
    would cost more than the writes)."""
    a = kid1[w]
    b = kid2[w]
    if balanced:
        fa = 0.5
    else:
        fa = size[a] / (size[a] + size[b])
    fb = 1.0 - fa
    top = pre[0]
    x = fa * get(M, stamp, a, top) + fb * get(M, stamp, b, top)
    M[w, top] = x
    if mirror:
        M[top, w] = x
    lo = pos[w]
    for t in range(1, lo):
        z = pre[t]
        if t + count[z] > lo:  # an ancestor of w
            continue
        x = fa * get(M, stamp, a, z) + fb * get(M, stamp, b, z)
        M[w, z] = x
        if mirror:
            M[z, w] = x
    for t in range(lo + count[w], k):
        z = pre[t]
        x = fa * get(M, stamp, a, z) + fb * get(M, stamp, b, z)
        M[w, z] = x
        if mirror:
            M[z, w] = x
    if not mirror:
        clock[0] += 1
        stamp[w] = clock[0]


@nb.njit(cache=True, nogil=True)
def side_rows(M, stamp, parent, kid1, kid2, pre, k, pos, count, size, n_total, balanced):
    """Δ(U_w, X_z) for every node w below ``top`` and every z strictly below w,
    from the clade entries (one top-down pass, O(n diam))."""
    top = pre[0]
    for t in range(1, k):
        w = pre[t]
        lo = pos[w] + 1
        hi = pos[w] + count[w]
        p = parent[w]
        if p == top:
            for q in range(lo, hi):
                z = pre[q]
                M[w, z] = get(M, stamp, top, z)
            continue
        s = sibling(w, parent, kid1, kid2)
        if balanced:
            fs = 0.5
        else:
            fs = size[s] / (size[s] + n_total - size[p])
        fp = 1.0 - fs
        for q in range(lo, hi):
            z = pre[q]
            M[w, z] = fs * get(M, stamp, s, z) + fp * M[p, z]


@nb.njit(cache=True, nogil=True)
def build_table(M, stamp, clock, parent, kid1, kid2, rows, d, n_leaves, pre, pos, count, size, balanced, sides=True):
    """Fill ``M`` for the tree hanging from ``pre[0]`` (O(n^2)).

    Parameters
    ----------
    M : float ndarray (m, m)
        Overwritten where the tree has entries.
    stamp, clock : int64 ndarray (m,), (1,)
        The time each row was written and the last time given, set to 0:
        the build writes every entry between unrelated subtrees into both
        its rows (:func:`get`).
    parent, kid1, kid2 : int64 ndarray (m,)
        The tree hung from a leaf (``kid1[top]`` its one child).
    rows : int64 ndarray
        The matrix row of each leaf.
    d : float ndarray (N, N)
        Distances (read only).
    n_leaves : int
        Leaves are nodes 0..n_leaves−1 (not all need be in the tree yet).
    pre, pos, count, size : int64 ndarray (m,)
        Work arrays, filled by :func:`preorder`.
    balanced : bool
        Balanced averages (BME) or plain ones (OLS).
    sides : bool
        Fill the side entries Δ(U_w, X_z) too; without them only the entries
        between unrelated subtrees are made (the NNI search makes the side
        entries it needs from them, :mod:`cladewright._kernels.nni`).

    Returns
    -------
    int
        The number of nodes in the tree.
    """
    k = preorder(pre[0], kid1, kid2, n_leaves, pre, pos, count, size)
    stamp[:] = 0
    clock[0] = 0
    for i in range(n_leaves):
        ri = rows[i]
        for j in range(n_leaves):
            M[i, j] = d[ri, rows[j]]
    for t in range(k - 1, 0, -1):
        w = pre[t]
        if w >= n_leaves:
            # clades below w in the postorder are done; those after it are
            # not yet, and reach w when their own row is made
            clade_row_done(M, w, kid1, kid2, pre, k, t, pos, count, size, n_leaves, balanced)
    if sides:
        n_total = size[kid1[pre[0]]] + 1
        side_rows(M, stamp, parent, kid1, kid2, pre, k, pos, count, size, n_total, balanced)
    return k


@nb.njit(cache=True, nogil=True)
def clade_row_done(M, w, kid1, kid2, pre, k, t_w, pos, count, size, n_leaves, balanced):
    """As :func:`clade_row`, for the nodes Z already made in a postorder
    (every leaf, ``top``, and the internal nodes after w in preorder), into
    w's row and column; the others reach w when their own row is made."""
    a = kid1[w]
    b = kid2[w]
    if balanced:
        fa = 0.5
    else:
        fa = size[a] / (size[a] + size[b])
    fb = 1.0 - fa
    for q in range(t_w):  # before w in preorder: its ancestors (internal) and unrelated nodes
        z = pre[q]
        if z < n_leaves or q == 0:
            x = fa * M[a, z] + fb * M[b, z]
            M[w, z] = x
            M[z, w] = x
    for q in range(t_w + count[w], k):  # after w's clade: all unrelated
        z = pre[q]
        x = fa * M[a, z] + fb * M[b, z]
        M[w, z] = x
        M[z, w] = x


@nb.njit(cache=True, nogil=True)
def update_path(M, stamp, clock, start, parent, kid1, kid2, n_leaves, pre, pos, count, size, balanced, sides=True):
    """Bring ``M`` up to date after the tree changed at node ``start``: the
    clade rows of ``start`` and of every node above it, then (with ``sides``)
    every side row. O(n diam).

    Returns
    -------
    int
        The number of nodes in the tree.
    """
    top = pre[0]
    k = preorder(top, kid1, kid2, n_leaves, pre, pos, count, size)
    w = start
    while w != top:
        clade_row(M, stamp, clock, w, kid1, kid2, pre, k, pos, count, size, balanced)
        w = parent[w]
    if sides:
        n_total = size[kid1[top]] + 1
        side_rows(M, stamp, parent, kid1, kid2, pre, k, pos, count, size, n_total, balanced)
    return k
