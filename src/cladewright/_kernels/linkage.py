"""Nearest-neighbour-chain agglomeration with the Lance–Williams update (numba).

One kernel serves every reducible linkage whose update is a Lance–Williams
formula: the coefficients come in as numbers, so a new method is a new row in
the table of :mod:`cladewright.build.linkage`, not new code here.

The dissimilarities are kept as the condensed upper triangle (half the
memory of the square). Entry (i, j), i < j, of a matrix
of dimension m sits at ``rs[i] + j``; row i's entries right of the diagonal
are contiguous, the ones above it (column i) are one per row. Searches and
updates visit the above-diagonal part through a sorted list of active rows,
so retired rows cost nothing there; the contiguous part is read without a
test, which is why a retired row's column is set to +inf. Once half the
stored rows are retired the triangle is compacted in place, keeping the
order of the rows, so the traffic follows the active size.

References
----------
Lance, G. N. & Williams, W. T. (1967) A general theory of classificatory
sorting strategies. 1. Hierarchical systems. Computer Journal 9:373–380.
Murtagh, F. (1983) A survey of recent advances in hierarchical clustering
algorithms. Computer Journal 26:354–359.
Müllner, D. (2011) Modern hierarchical, agglomerative clustering algorithms.
arXiv:1109.2378.
"""

import numba as nb
import numpy as np
from llvmlite import ir
from numba import types
from numba.extending import intrinsic

from .matrix import pairs_before

# Below this many stored rows the triangle fits in cache and compacting
# would not pay for itself.
_MIN_COMPACT = 256
# How many rows ahead the column reads are requested: each is a cache miss
# of its own, and the out-of-order window alone keeps too few in flight.
_AHEAD = 32


@intrinsic
def _prefetch(typingctx, arr, idx):
    """Ask for the cache line of ``arr[idx]`` (LLVM prefetch: read, high
    locality); a hint only, so an index past the end cannot fault."""
    sig = types.void(arr, idx)

    def codegen(context, builder, signature, args):
        ary = context.make_array(signature.args[0])(context, builder, args[0])
        ptr = builder.gep(ary.data, [args[1]])
        i32 = ir.IntType(32)
        fnty = ir.FunctionType(ir.VoidType(), [ptr.type, i32, i32, i32])
        fn = builder.module.declare_intrinsic("llvm.prefetch", [ptr.type], fnty)
        builder.call(fn, [ptr, ir.Constant(i32, 0), ir.Constant(i32, 3), ir.Constant(i32, 1)])
        return context.get_dummy_value()

    return sig, codegen


@nb.njit(cache=True, inline="always")
def _lance_williams(dxk, dyk, dxy, nx, ny, ai, aj, b, g, size_weighted):
    """d(k, x∪y) = a_x d(k,x) + a_y d(k,y) + b d(x,y) + g |d(k,x) − d(k,y)|.

    Grouped so that the usual special cases come out exactly: with
    a_x = a_y = a the formula is (a − g) min + (a + g) max, which is min
    itself for single linkage and max for complete linkage (no rounding);
    size weighting is evaluated as a weighted mean (n_x d + n_y d) / (n_x + n_y).
    """
    if size_weighted:
        v = (nx * dxk + ny * dyk) / (nx + ny)
    elif ai == aj:
        lo = min(dxk, dyk)
        hi = max(dxk, dyk)
        return (ai - g) * lo + (ai + g) * hi + b * dxy
    else:
        v = ai * dxk + aj * dyk
    return v + b * dxy + g * abs(dxk - dyk)


@nb.njit(cache=True)
def _row_starts(m):
    """Offsets such that entry (i, j), i < j, of dimension m is at rs[i] + j."""
    rs = np.empty(max(m, 1), np.int64)
    for i in range(m):
        rs[i] = pairs_before(i, m) - i - 1
    return rs


@nb.njit(cache=True)
def _compact(C, m, rs, act, na, size, node, chain, clen):
    """Drop retired rows from the triangle in place, keeping the row order.

    The offset of (i, j) grows with i, j and the dimension, so every entry
    moves towards the front and is read before anything is written over it.
    Returns the new row offsets; ``act``, ``size``, ``node`` and ``chain``
    are renumbered in place.
    """
    newrs = _row_starts(na)
    for a in range(na - 1):
        src = rs[act[a]]
        dst = newrs[a]
        for c in range(a + 1, na):
            C[dst + c] = C[src + act[c]]
    newid = np.empty(m, np.int64)
    for a in range(na):
        newid[act[a]] = a
        size[a] = size[act[a]]
        node[a] = node[act[a]]
        act[a] = a
    act[na:] = 0
    for c in range(clen):
        chain[c] = newid[chain[c]]
    return newrs


@nb.njit(cache=True, nogil=True)  # bootstrap replicates build their trees side by side on threads
def nn_chain_linkage(C, n, ai, aj, b, g, size_weighted, sizes):
    """Agglomerate with the nearest-neighbour chain; C is overwritten.

    Parameters
    ----------
    C : float64 or float32 ndarray (n (n − 1) / 2,)
        Condensed upper triangle of the symmetric dissimilarities, row by row
        (as written by :func:`cladewright._kernels.matrix.condense_upper`).
        Used as work space; the updates are computed in float64 and stored
        in C's precision.
    n : int
        Number of leaves (n >= 2).
    ai, aj, b, g : float
        Lance–Williams coefficients (a_i, a_j, beta, gamma); ``i`` is the
        merged cluster on the lower matrix row, ``j`` the one on the higher.
    size_weighted : bool
        Use a_i = n_i / (n_i + n_j), a_j = n_j / (n_i + n_j) instead of
        ``ai``, ``aj`` (UPGMA).
    sizes : int64 ndarray (n,)
        Starting cluster sizes: how many sequences each row stands for (1
        each, or the size of a group of identical sequences entered once).
        Read only when ``size_weighted``; not changed.

    Returns
    -------
    parent : int64 ndarray (2n − 1,)
        Leaves are 0..n−1, internal node n + k is the k-th merge in order of
        merge height (stable), so parents always have larger indices than
        their children; the root (2n − 2) has parent −1.
    height : float64 ndarray (2n − 1,)
        Node heights: half the merge distance, leaves at 0. Heights are made
        non-decreasing towards the root (guards against rounding; exact
        arithmetic never needs it for reducible linkages).

    Notes
    -----
    Tie rule (deterministic, and the one of Müllner 2011's description of the
    chain): the chain starts at the lowest active row; the nearest neighbour of
    the chain's tip is the previous chain element if it is among the nearest,
    otherwise the lowest row index at the minimum distance; the merged cluster
    takes the higher of the two rows and the lower row is retired. Compaction
    keeps the order of the rows, so the rule is the same as on the full matrix.

    References
    ----------
    Murtagh (1983) Computer Journal 26:354–359; Müllner (2011) arXiv:1109.2378;
    Lance & Williams (1967) Computer Journal 9:373–380.
    """
    m = n                            # stored dimension (shrinks on compaction)
    rs = _row_starts(m)
    # Active rows, ascending, in the first na places; the rest (and
    # _AHEAD more) hold valid row numbers, so reading ahead needs no test.
    act = np.zeros(n + _AHEAD, np.int64)
    act[:n] = np.arange(n)
    na = n
    size = sizes.copy()
    node = np.arange(n)              # node id held by each row
    chain = np.empty(n, np.int64)
    clen = 0
    ma = np.empty(max(n - 1, 0), np.int64)
    mb = np.empty(max(n - 1, 0), np.int64)
    md = np.empty(max(n - 1, 0), np.float64)
    for k in range(n - 1):
        if clen == 0:
            chain[0] = act[0]
            clen = 1
        while True:
            x = chain[clen - 1]
            if clen > 1:
                y = chain[clen - 2]
                best = float(C[rs[min(x, y)] + max(x, y)])
            else:
                y = -1
                best = np.inf
            # Ascending row order with a strict '<' is the tie rule; +inf
            # marks retired columns, which therefore never win.
            t = 0
            while act[t] < x:
                _prefetch(C, rs[act[t + _AHEAD]] + x)
                v = C[rs[act[t]] + x]
                if v < best:
                    best = v
                    y = act[t]
                t += 1
            base = rs[x]
            for j in range(x + 1, m):
                v = C[base + j]
                if v < best:
                    best = v
                    y = j
            if y < 0:                # every distance infinite: lowest other row
                y = act[1] if act[0] == x else act[0]
                best = float(C[rs[min(x, y)] + max(x, y)])
            if clen > 1 and y == chain[clen - 2]:
                break
            chain[clen] = y
            clen += 1
        clen -= 2
        if x > y:
            x, y = y, x
        ma[k] = node[x]
        mb[k] = node[y]
        md[k] = best
        nx = float(size[x])
        ny = float(size[y])
        # Three ranges of the other active rows i, by where (x, i) and
        # (i, y) sit in the triangle.
        t = 0
        while act[t] < x:
            i = act[t]
            _prefetch(C, rs[act[t + _AHEAD]] + x)
            _prefetch(C, rs[act[t + _AHEAD]] + y)
            p = rs[i] + x
            q = rs[i] + y
            C[q] = _lance_williams(C[p], C[q], best, nx, ny, ai, aj, b, g, size_weighted)
            C[p] = np.inf
            t += 1
        tx = t
        t += 1
        rx = rs[x]
        while act[t] < y:
            i = act[t]
            _prefetch(C, rs[act[t + _AHEAD]] + y)
            q = rs[i] + y
            C[q] = _lance_williams(C[rx + i], C[q], best, nx, ny, ai, aj, b, g, size_weighted)
            t += 1
        ry = rs[y]
        for u in range(t + 1, na):
            i = act[u]
            C[ry + i] = _lance_williams(C[rx + i], C[ry + i], best, nx, ny, ai, aj, b, g,
                                        size_weighted)
        for u in range(tx, na - 1):
            act[u] = act[u + 1]
        na -= 1
        size[y] = size[x] + size[y]
        size[x] = 0
        node[y] = n + k
        if 2 * na <= m and m >= _MIN_COMPACT:
            rs = _compact(C, m, rs, act, na, size, node, chain, clen)
            m = na

    # Heights never decrease towards the root; children precede parents in
    # chain order, so one forward pass suffices.
    for k in range(n - 1):
        for c in (ma[k], mb[k]):
            if c >= n and md[c - n] > md[k]:
                md[k] = md[c - n]
    order = np.argsort(md, kind="mergesort")
    newid = np.empty(2 * n - 1, np.int64)
    for i in range(n):
        newid[i] = i
    for r in range(n - 1):
        newid[n + order[r]] = n + r
    parent = np.full(2 * n - 1, -1, np.int64)
    height = np.zeros(2 * n - 1, np.float64)
    for k in range(n - 1):
        p = newid[n + k]
        parent[newid[ma[k]]] = p
        parent[newid[mb[k]]] = p
        height[p] = 0.5 * md[k]
    return parent, height
