"""Row bounds kept between joins: the neighbour-joining search for matrices
far from tree-like (numba).

The sorted lists of :mod:`.nj` prune by c d(i, k) − R_i − R_max, which is weak
when the distances of a row are close to one another and R is widely spread
(points in many dimensions, say): then most lists run out and rows are read
in full every join. Here every row is read in full when it is read at all,
and what that read finds is kept as a lower bound on the Q of the row's pairs
that stays true in later joins without reading the row again.

For a row s read when the clusters numbered r0 (c0 = r0 − 2) it keeps
m = min_k Q(s, k), e = min_k (Q(s, k) − X d(s, k)), dmax = max_k d(s, k),
c0 and b = R_s − Δ. Between then and now (c = r − 2, x = c0 − c joins later)
a pair of two clusters that both still stand has the same d(s, k), and

    Q_now(s, k) = Q_then(s, k) − x d(s, k) + (R_s,then − R_s,now)
                  + (R_k,then − R_k,now),

where Δ adds up, join by join, the least fall of any R (the last term is at
least Δ_now − Δ_then). Q_then − x d is a least-of-lines in x, so it is
concave: at least m + (x/X)(e − m) for x <= X and e − (x − X) dmax beyond.
Pairs with a cluster made since the read are bounded by that cluster's row,
which is read in full before it is first used (its bound starts at −inf).
So min over rows of these bounds is at most the least Q: the search reads the
row of least bound, then every row whose bound is still at most the best Q
found, in row order, and the pair it returns is that of the full scan, ties
included. With the rows read in full, each row must hold all its distances:
:func:`mirror_rows` copies them onto the older rows when the search moves
here, and the join writes the new cluster's column too.

Rounding: let S be the largest of (c + X) |d|, |R|, |Δ|, |m| and |e| seen
(kept in ``scale``; every value above is at most 8 S) and u = 2^-53. The Q
of the scan as computed is within 9 u S of its exact value, m and e within
14 u S; each join since the read adds at most 3 u S (the rounded fall of R,
the running sum Δ) and the bound's own dozen operations at most 40 u S. So
``slack`` = (8 n + 256) 2^-52 S, subtracted from the bound, covers it all
((3 n + 63) u S at most): the bound stays below the Q of the full scan as
computed, and the pair found is the scan's bit for bit.

Reference
---------
Simonsen, M., Mailund, T. & Pedersen, C. N. S. (2008) Rapid neighbour-joining.
WABI 2008, LNCS 5251 (the bound on Q from an upper bound on R).
"""

import numba as nb
import numpy as np

from .nj_lists import better

BEND = 32.0     # X: joins after a read at which the second line of the bound is kept (speed only)
M, E, DMAX, C0, BASE = 0, 1, 2, 3, 4     # columns of the row record


@nb.njit(cache=True)
def mirror_rows(D, born, live, r):
    """Copy each live pair from the newer row onto the older one, so that
    every live row holds all its current distances (read row by row: the
    newer rows are few when the search moves to row bounds)."""
    for a in range(r):
        k = live[a]
        bk = born[k]
        if bk == 0:
            continue
        row = D[k]
        for b in range(r):
            s = live[b]
            if born[s] < bk:
                D[s, k] = row[s]


@nb.njit(cache=True)
def read_row(D, s, pos, live, r, c, R):
    """Read row s (at pos in live) in full: (m, k, e, dmax, amax), where m
    is its least Q, k the column of the first such pair, e the least
    Q − X d, dmax the largest d and amax the largest |d|."""
    Rs = R[s]
    row = D[s]
    m = np.inf
    at = -1
    e = np.inf
    dmax = -np.inf
    amax = 0.0
    for b in range(r):
        if b == pos:
            continue
        k = live[b]
        d = row[k]
        q = c * d - (Rs + R[k])
        if q < m:
            m = q
            at = k
        e = min(e, q - BEND * d)
        dmax = max(dmax, d)
        amax = max(amax, abs(d))
    return m, at, e, dmax, amax


@nb.njit(cache=True)
def row_search(D, live, r, R, rec, scale, delta, B, cand):
    """The pair of least Q (ties: lowest rows) as rows (i, j), i < j, by the
    row bounds (see the module doc): every row whose bound is at most the
    best Q found is read, so the order they are read in does not matter.
    ``rec`` (n, 5) holds each row's record, C0 = −1 for a row never read; ``scale`` (1,) is S, raised here as rows
    are read; ``B`` and ``cand`` are work space of n. Returns i, j and the
    number of rows read."""
    n = rec.shape[0]
    c = float(r - 2)
    slack = (8.0 * n + 256.0) * 2.0 ** -52 * scale[0]
    first = 0
    for a in range(r):
        s = live[a]
        c0 = rec[s, C0]
        if c0 < 0.0:
            b = -np.inf
        else:
            x = c0 - c
            if x <= BEND:
                env = rec[s, M] + (x / BEND) * (rec[s, E] - rec[s, M])
            else:
                env = rec[s, E] - (x - BEND) * rec[s, DMAX]
            b = env + rec[s, BASE] - R[s] + delta - slack
        B[a] = b
        if b < B[first]:
            first = a
    bq, bi, bj = np.inf, n, n
    reads = 0
    m = 1
    cand[0] = first
    t = 0
    while t < m:
        a = cand[t]
        t += 1
        if B[a] > bq:
            continue
        s = live[a]
        q, k, e, dmax, amax = read_row(D, s, a, live, r, c, R)
        reads += 1
        rec[s, M] = q
        rec[s, E] = e
        rec[s, DMAX] = dmax
        rec[s, C0] = c
        rec[s, BASE] = R[s] - delta
        scale[0] = max(scale[0], (c + BEND) * amax, abs(q), abs(e))
        if k >= 0:
            lo, hi = min(s, k), max(s, k)
            if better(q, lo, hi, bq, bi, bj):
                bq, bi, bj = q, lo, hi
        if t == 1:
            # then every other row the bound lets through, in row order
            # (in order of bound they are fewer, but measured slower)
            for a2 in range(r):
                cand[m] = a2
                m += (B[a2] <= bq) & (a2 != first)
    return bi, bj, reads
