"""Nearest-neighbour interchanges under balanced minimum evolution (BNNI) and
ordinary least squares (FastNNI), iterated to a local optimum (numba).

An internal branch (p, v) of a tree hung from a leaf (see
:mod:`cladewright._kernels.averages`) has four subtrees around it: A and B
below v, C (v's sibling) and D = U_p. Its two interchanges give AC|BD (B and C
swapped) and AD|BC (A and C swapped). With Δ the balanced averages, the BME
length falls by (Desper & Gascuel 2002)

    L(AB|CD) − L(AC|BD) = 1/4 (Δ_AB + Δ_CD − Δ_AC − Δ_BD),

and with plain averages the OLS length falls by (Desper & Gascuel 2002, after
Rzhetsky & Nei 1993)

    L(AB|CD) − L(AC|BD) = 1/2 [(λ − 1)(Δ_AC + Δ_BD) − (λ' − 1)(Δ_AB + Δ_CD)
                               − (λ − λ')(Δ_AD + Δ_BC)],
    λ  = (n_A n_D + n_B n_C) / ((n_A + n_B)(n_C + n_D)),
    λ' = (n_A n_D + n_B n_C) / ((n_A + n_C)(n_B + n_D));

AD|BC is the same with C and D exchanged. Each step takes the interchange of
largest fall over all branches (O(n) from the table), if that fall is
positive beyond rounding, and updates the table (O(n diam)). When no
interchange is left the table is rebuilt from the matrix (O(n^2)) and the
branches are looked at once more, so rounding carried through many updates
cannot end the search early or keep it going; a round with no interchange
ends it. Every interchange taken strictly lowers the tree length, so the
search ends.

References
----------
Desper, R. & Gascuel, O. (2002) Fast and accurate phylogeny reconstruction
algorithms based on the minimum-evolution principle. J. Comput. Biol.
9:687–705.
Rzhetsky, A. & Nei, M. (1993) Theoretical foundation of the minimum-evolution
method of phylogenetic inference. Mol. Biol. Evol. 10:1073–1095.
"""

import numba as nb
import numpy as np

from .averages import build_table, sibling, update_path

#: A fall in tree length counts only above this fraction of the averages it is made of.
RELATIVE_TOLERANCE = 1e-10


@nb.njit(cache=True, nogil=True)
def interchange_gain(M, v, parent, kid1, kid2, size, n_total, balanced):
    """The fall in tree length of each interchange at the branch above v.

    Returns
    -------
    gain_bc, gain_ac : float
        Swapping B and C (to AC|BD), swapping A and C (to BC|AD).
    scale : float
        The sum of the absolute averages involved (for the tolerance).
    """
    p = parent[v]
    a = kid1[v]
    b = kid2[v]
    c = sibling(v, parent, kid1, kid2)
    ab = M[a, b]
    cd = M[p, c]
    ac = M[a, c]
    bd = M[p, b]
    ad = M[p, a]
    bc = M[b, c]
    scale = abs(ab) + abs(cd) + abs(ac) + abs(bd) + abs(ad) + abs(bc)
    if balanced:
        return 0.25 * (ab + cd - ac - bd), 0.25 * (ab + cd - ad - bc), scale
    na = float(size[a])
    nb_ = float(size[b])
    nc = float(size[c])
    nd = float(n_total - size[p])
    lam = (na * nd + nb_ * nc) / ((na + nb_) * (nc + nd))
    lam1 = (na * nd + nb_ * nc) / ((na + nc) * (nb_ + nd))
    g1 = 0.5 * ((lam - 1.0) * (ac + bd) - (lam1 - 1.0) * (ab + cd) - (lam - lam1) * (ad + bc))
    mu = (na * nc + nb_ * nd) / ((na + nb_) * (nc + nd))
    mu1 = (na * nc + nb_ * nd) / ((na + nd) * (nb_ + nc))
    g2 = 0.5 * ((mu - 1.0) * (ad + bc) - (mu1 - 1.0) * (ab + cd) - (mu - mu1) * (ac + bd))
    return g1, g2, scale


@nb.njit(cache=True, nogil=True)
def swap(v, x, parent, kid1, kid2):
    """Exchange x (a child of v) with v's sibling."""
    p = parent[v]
    c = sibling(v, parent, kid1, kid2)
    if kid1[v] == x:
        kid1[v] = c
    else:
        kid2[v] = c
    if kid1[p] == c:
        kid1[p] = x
    else:
        kid2[p] = x
    parent[x] = p
    parent[c] = v


@nb.njit(cache=True, nogil=True)
def best_interchange(M, parent, kid1, kid2, pre, k, size, n_leaves, n_total, balanced):
    """The interchange of largest fall beyond rounding: (v, x, gain), or v = −1."""
    top = pre[0]
    best_v = -1
    best_x = -1
    best = 0.0
    for t in range(1, k):
        v = pre[t]
        if v < n_leaves or parent[v] == top:
            continue
        g1, g2, scale = interchange_gain(M, v, parent, kid1, kid2, size, n_total, balanced)
        floor = RELATIVE_TOLERANCE * scale
        if g1 > floor and g1 > best:
            best, best_v, best_x = g1, v, kid2[v]
        if g2 > floor and g2 > best:
            best, best_v, best_x = g2, v, kid1[v]
    return best_v, best_x, best


@nb.njit(cache=True, nogil=True)
def nni_search(parent, kid1, kid2, top, rows, d, n_leaves, balanced):
    """Interchanges to a local optimum, in place on ``parent``, ``kid1``, ``kid2``.

    Parameters
    ----------
    parent, kid1, kid2 : int64 ndarray (2n − 2,)
        A binary tree hung from leaf ``top`` (``kid1[top]`` its one child,
        −1 where a node has no such child).
    top : int
    rows : int64 ndarray (n,)
        The matrix row of each leaf.
    d : float ndarray (N, N)
    n_leaves : int
    balanced : bool
        BME (balanced NNI) or OLS (FastNNI).

    Returns
    -------
    moves, rounds : int
        Interchanges made; tables built from the matrix.
    """
    m = parent.shape[0]
    M = np.zeros((m, m), np.float64)
    pre = np.empty(m, np.int64)
    pos = np.empty(m, np.int64)
    count = np.empty(m, np.int64)
    size = np.empty(m, np.int64)
    pre[0] = top
    moves = 0
    rounds = 0
    while True:
        k = build_table(M, parent, kid1, kid2, rows, d, n_leaves, pre, pos, count, size, balanced)
        rounds += 1
        made = 0
        while True:
            v, x, gain = best_interchange(M, parent, kid1, kid2, pre, k, size, n_leaves, n_leaves, balanced)
            if v < 0:
                break
            swap(v, x, parent, kid1, kid2)
            k = update_path(M, v, parent, kid1, kid2, n_leaves, pre, pos, count, size, balanced)
            made += 1
        moves += made
        if made == 0:
            return moves, rounds


@nb.njit(cache=True, nogil=True)
def hang_children(parent, top, n_leaves):
    """``kid1``, ``kid2`` of a binary tree hung from leaf ``top`` (parent −1 at ``top``)."""
    m = parent.shape[0]
    kid1 = np.full(m, -1, np.int64)
    kid2 = np.full(m, -1, np.int64)
    for w in range(m):
        p = parent[w]
        if p < 0:
            continue
        if kid1[p] < 0:
            kid1[p] = w
        else:
            kid2[p] = w
    return kid1, kid2
