"""Whole-matrix passes and the condensed (upper-triangle, row-major) layout,
shared by the distance engine and the tree builders (numba)."""

import numba as nb


@nb.njit(cache=True, nogil=True)
def mirror_upper(D):
    """Copy the upper triangle onto the lower one, in place, in cache blocks.

    A validated matrix may be asymmetric within rounding; the kernels read
    rows, so both halves must hold the very same numbers for the result not
    to depend on which half is read.
    """
    n = D.shape[0]
    bs = 64
    for i0 in range(0, n, bs):
        for j0 in range(i0, n, bs):
            for i in range(i0, min(i0 + bs, n)):
                for j in range(max(j0, i + 1), min(j0 + bs, n)):
                    D[j, i] = D[i, j]


@nb.njit(cache=True, nogil=True)
def first_non_finite(D):
    """(i, j) of the first entry of D, in row order, that is not a finite
    number, or (-1, -1): one read of the matrix, no n x n temporary."""
    n, m = D.shape
    for i in range(n):
        for j in range(m):
            x = D[i, j]
            if not (x - x == 0.0):  # false for nan and +-inf only
                return i, j
    return -1, -1


@nb.njit(cache=True, nogil=True, inline="always")
def pairs_before(i, n):
    """How many pairs (a, b), a < b < n, have a < i: the offset of row i's
    pairs in the row-major order of the upper triangle."""
    return i * (n - 1) - i * (i - 1) // 2


@nb.njit(cache=True, nogil=True)
def condense_upper(D, out):
    """Write the upper triangle of square ``D`` row by row into ``out``.

    Parameters
    ----------
    D : float ndarray (n, n)
        Read only; the lower triangle is ignored, so a matrix asymmetric
        within rounding gives one answer whichever half a reader would use.
    out : float ndarray (n (n − 1) / 2,)
        Filled row by row: entry (i, j), i < j, at ``pairs_before(i, n) + j - i - 1``
        (the layout :func:`cladewright._kernels.linkage.nn_chain_linkage` reads).
    """
    n = D.shape[0]
    k = 0
    for i in range(n - 1):
        out[k:k + n - 1 - i] = D[i, i + 1:]
        k += n - 1 - i


@nb.njit(cache=True, nogil=True)
def condense_rows(block, r0, n, out):
    """Rows r0.. of a square matrix (``block``, (b, n)) into their places in
    the condensed upper triangle ``out`` (see :func:`condense_upper`), for a
    triangle filled a block of rows at a time."""
    for a in range(block.shape[0]):
        i = r0 + a
        k = pairs_before(i, n)
        out[k:k + n - 1 - i] = block[a, i + 1:]
