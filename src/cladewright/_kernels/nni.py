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

AD|BC is the same with C and D exchanged. The table holds the averages between
unrelated subtrees only; the three with D = U_p are summed from them along
the path to ``top`` (U_p is the sibling's clade and U of the parent, halved
at each step), O(depth). Each step takes the interchange of largest fall
(the falls of all branches kept in an array, those near the last change
recomputed, the chosen one recomputed before it is taken), if that fall is
positive beyond rounding, and updates the clade rows above the change
(O(n depth)). When no interchange is left every fall is recomputed and a
round with no interchange ends the search. Every interchange taken strictly
lowers the tree length, so the search ends.

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

from .averages import build_table, get, sibling, update_path, work_arrays


@nb.njit(cache=True, nogil=True)
def sides_of(M, stamp, w, a, b, c, parent, kid1, kid2, size, n_total, top, balanced):
    """Δ(U_w, X_a), Δ(U_w, X_b), Δ(U_w, X_c) for a, b, c below w, from the
    entries between unrelated subtrees: U_w is the sibling's clade and U of
    the parent (weighed 1/2 each, or by their numbers of leaves), down to
    ``top`` alone below ``top``'s child. O(depth of w)."""
    xa = 0.0
    xb = 0.0
    xc = 0.0
    mult = 1.0
    p = parent[w]
    while p != top:
        s = sibling(w, parent, kid1, kid2)
        if balanced:
            fs = 0.5
        else:
            fs = size[s] / (size[s] + n_total - size[p])
        f = mult * fs
        xa += f * get(M, stamp, s, a)
        xb += f * get(M, stamp, s, b)
        xc += f * get(M, stamp, s, c)
        mult *= 1.0 - fs
        w = p
        p = parent[w]
    return (xa + mult * get(M, stamp, top, a), xb + mult * get(M, stamp, top, b),
            xc + mult * get(M, stamp, top, c))


@nb.njit(cache=True, nogil=True)
def interchange_gain(M, stamp, v, parent, kid1, kid2, size, n_total, top, balanced):
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
    ab = get(M, stamp, a, b)
    ac = get(M, stamp, a, c)
    bc = get(M, stamp, b, c)
    ad, bd, cd = sides_of(M, stamp, p, a, b, c, parent, kid1, kid2, size, n_total, top, balanced)
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
def refresh_gain(M, stamp, v, parent, kid1, kid2, size, n_leaves, n_total, top, balanced, tol, gain):
    """Set ``gain[v]`` to the larger fall of the two interchanges at the branch
    above v when it is beyond rounding, 0 otherwise (and for every node
    without such a branch)."""
    if v < n_leaves or parent[v] < 0 or parent[v] == top:
        gain[v] = 0.0
        return
    g1, g2, scale = interchange_gain(M, stamp, v, parent, kid1, kid2, size, n_total, top, balanced)
    floor = tol * scale
    best = 0.0
    if g1 > floor:
        best = g1
    if g2 > floor and g2 > best:
        best = g2
    gain[v] = best


@nb.njit(cache=True, nogil=True)
def refresh_around(M, stamp, v, parent, kid1, kid2, size, n_leaves, n_total, top, balanced, tol, gain):
    """Recompute the falls of the branches next to the clades that changed at
    v: those below v's children, above v and its ancestors, and above each
    ancestor's other child (the others change only through the weights of
    far subtrees and are looked at again before they are taken)."""
    for c in (kid1[v], kid2[v]):
        refresh_gain(M, stamp, c, parent, kid1, kid2, size, n_leaves, n_total, top, balanced, tol, gain)
        if c >= n_leaves:
            for g in (kid1[c], kid2[c]):
                refresh_gain(M, stamp, g, parent, kid1, kid2, size, n_leaves, n_total, top, balanced, tol, gain)
    u = v
    while u != top:
        refresh_gain(M, stamp, u, parent, kid1, kid2, size, n_leaves, n_total, top, balanced, tol, gain)
        if parent[u] != top:
            s = sibling(u, parent, kid1, kid2)
            refresh_gain(M, stamp, s, parent, kid1, kid2, size, n_leaves, n_total, top, balanced, tol, gain)
        u = parent[u]


@nb.njit(cache=True, nogil=True)
def nni_search(M, tol, parent, kid1, kid2, top, rows, d, n_leaves, balanced):
    """Interchanges to a local optimum, in place on ``parent``, ``kid1``, ``kid2``.

    The fall of every branch's better interchange is kept in an array. After
    an interchange only the falls of the branches around the changed clades
    are recomputed; the others (which change only through the weights of far
    subtrees) are taken as they stand to choose the next branch, whose fall
    is recomputed from the up-to-date table before it is taken, so every
    interchange made lowers the length. When no fall is left every fall is
    recomputed, and a round without an interchange ends the search: the
    result is a local optimum. The table is built from the matrix once; its
    updates remake entries from their recurrences (never by adding
    increments), so rounding does not build up over the search.

    Parameters
    ----------
    M : float ndarray (2n − 2, 2n − 2)
        Work space for the table of subtree averages (float64, or float32
        for large trees).
    tol : float
        A fall in tree length counts only above this fraction of the
        averages it is made of (for the rounding of M's numbers).
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
        Interchanges made; passes over every branch's fall.
    """
    m = parent.shape[0]
    pre, pos, count, size, stamp, clock = work_arrays(m, top)
    gain = np.zeros(m, np.float64)
    moves = 0
    rounds = 0
    k = build_table(M, stamp, clock, parent, kid1, kid2, rows, d, n_leaves, pre, pos, count, size, balanced, False)
    while True:
        rounds += 1
        for t in range(k):
            refresh_gain(M, stamp, pre[t], parent, kid1, kid2, size, n_leaves, n_leaves, top, balanced, tol, gain)
        made = 0
        while True:
            v = np.argmax(gain)
            if gain[v] <= 0.0:
                break
            g1, g2, scale = interchange_gain(M, stamp, v, parent, kid1, kid2, size, n_leaves, top, balanced)
            refresh_gain(M, stamp, v, parent, kid1, kid2, size, n_leaves, n_leaves, top, balanced, tol, gain)
            if gain[v] <= 0.0 or np.argmax(gain) != v:
                continue  # its fall was out of date: look again
            x = kid2[v] if gain[v] == g1 else kid1[v]
            swap(v, x, parent, kid1, kid2)
            k = update_path(M, stamp, clock, v, parent, kid1, kid2, n_leaves, pre, pos, count, size, balanced, False)
            refresh_around(M, stamp, v, parent, kid1, kid2, size, n_leaves, n_leaves, top, balanced, tol, gain)
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
