r"""GTR and HKY rates estimated from an alignment, for the likelihood distances of :mod:`.likelihood`.

The divergence matrix F is pooled over every pair of sequences (``F_ab`` the weighted number of sites with
a in one sequence and b in the other, over all ordered pairs; a per-site sum over state counts, with no
loop over pairs); its margin gives the frequencies pi, and ``Pi^-1 F`` is read as ``exp(Q t_bar)`` at a
mean distance (Waddell & Steel 1997). With ``M = Pi^-1/2 F Pi^-1/2 = V diag(mu) V^T`` (symmetric), the
exchangeabilities are proportional to the off-diagonal entries of ``Pi^-1/2 V diag(x) V^T Pi^-1/2``, where
x = ln mu (equal rates), x = alpha (1 - mu^(-1/alpha)) (continuous gamma, Waddell & Steel 1997), or the root
of ``mean_c exp(r_c x) = mu`` over the discrete gamma category rates r_c (Yang 1994).

Fallbacks: an exchangeability the estimate puts below 0 (a rare change, by chance) is set to 1/1000 of
their mean; when an eigenvalue mu is not above 0 (so much divergence that the logarithm is undefined),
the exchangeabilities are all 1 (F81 with the pooled frequencies), and the caller is told. Pooling pairs
at different distances averages exp(Q t) over t, which pulls the estimated rates a little towards each
other. HKY (Hasegawa, Kishino & Yano 1985) takes the same frequencies and one ratio kappa: the mean of the
two transition exchangeabilities over the mean of the four transversion ones.

References
----------
Tavaré (1986) Lect. Math. Life Sci. 17:57-86; Hasegawa, Kishino & Yano (1985) J. Mol. Evol. 22:160-174;
Waddell & Steel (1997) Mol. Phylogenet. Evol. 8:398-414; Yang (1994) J. Mol. Evol. 39:306-314.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import optimize

from .._kernels.likelihood_blocks import state_counts
from .rate_models import discrete_gamma_rates

__all__ = ["UPPER", "TRANSITION_PAIRS", "FREQ_FLOOR", "pooled_divergence", "estimate_gtr", "gtr_from_divergence",
           "hky_exchangeabilities"]

#: The six exchangeabilities AC, AG, AT, CG, CT, GT as the upper triangle of a 4 x 4 matrix (order ACGT) ...
UPPER = np.triu_indices(4, 1)
#: ... of which these are transitions (A<->G, C<->T).
TRANSITION_PAIRS = np.array([False, True, False, False, True, False])
#: Frequency given to a base absent from the data, so that the rate matrix is defined.
FREQ_FLOOR = 1e-6


def pooled_divergence(patterns: NDArray[np.uint8], weights: ArrayLike, n_states: int,
                      use: NDArray[np.bool_] | None = None,
                      multiplicity: ArrayLike | None = None) -> NDArray[np.float64]:
    """The divergence matrix summed over every ordered pair of sequences, from per-site state counts.

    ``F_ab = sum_s w_s (c_a(s) c_b(s) - [a = b] c_a(s))``, with ``c_a(s)`` the number of sequences (each
    row counted ``multiplicity`` times) in state a at pattern s: one pass over the patterns, no loop over
    pairs.

    Parameters
    ----------
    patterns : uint8 array (n, S)
        Site patterns; states >= n_states (gaps, ambiguity) are not counted.
    weights : array_like (S,)
        Pattern weights.
    n_states : int
    use : bool array (S,), optional
        The patterns in use.
    multiplicity : array_like (n,), optional
        How many sequences each row stands for.

    Returns
    -------
    float64 ndarray (n_states, n_states)
        Symmetric; each ordered pair of sequences adds its table.

    Example
    -------
    >>> pooled_divergence(np.array([[0, 1], [0, 2], [1, 2]], dtype=np.uint8), [1, 1], 4).tolist()[:3]
    [[2.0, 2.0, 0.0, 0.0], [2.0, 0.0, 2.0, 0.0], [0.0, 2.0, 2.0, 0.0]]
    """
    w = np.asarray(weights, dtype=np.float64)
    if use is not None:
        w = np.where(use, w, 0.0)
    mult = np.ones(patterns.shape[0]) if multiplicity is None else np.asarray(multiplicity, dtype=np.float64)
    c = state_counts(np.ascontiguousarray(patterns), mult, n_states)  # (K, S)
    F = (c * w) @ c.T
    F[np.diag_indices(n_states)] -= c @ w
    return F


def estimate_gtr(patterns: NDArray[np.uint8], weights: ArrayLike, use: NDArray[np.bool_] | None = None,
                 multiplicity: ArrayLike | None = None, gamma: float | None = None,
                 categories: int | None = None) -> tuple[NDArray[np.float64], NDArray[np.float64], bool]:
    """GTR exchangeabilities and frequencies from the pooled divergence matrix (Waddell & Steel 1997).

    Parameters
    ----------
    patterns : uint8 array (n, S)
        DNA site patterns (0..3 = A, C, G, T).
    weights : int array (S,)
    use : bool array (S,), optional
        The patterns in use.
    multiplicity : int array (n,), optional
        How many sequences each row stands for.
    gamma, categories :
        The rate variation the inversion assumes (as :func:`fit_model`).

    Returns
    -------
    S : float64 (4, 4)
        Symmetric exchangeabilities, mean 1 over the six pairs.
    pi : float64 (4,)
        The pooled frequencies.
    fallback : bool
        True when the logarithm was undefined and S is all ones (see the module docstring).

    References
    ----------
    Tavaré (1986) Lect. Math. Life Sci. 17:57-86; Waddell & Steel (1997) Mol. Phylogenet. Evol. 8:398-414.

    Example
    -------
    >>> pats = np.array([[0, 1, 2, 3, 0], [0, 1, 2, 3, 2]], dtype=np.uint8)
    >>> S, pi, fallback = estimate_gtr(pats, [10, 10, 10, 10, 1])
    >>> fallback, bool(S[0, 2] == S.max())
    (False, True)
    """
    return gtr_from_divergence(pooled_divergence(patterns, weights, 4, use, multiplicity), gamma, categories)


def gtr_from_divergence(F: ArrayLike, gamma: float | None = None, categories: int | None = None
                        ) -> tuple[NDArray[np.float64], NDArray[np.float64], bool]:
    """GTR exchangeabilities and frequencies from a divergence matrix (Waddell & Steel 1997).

    Parameters
    ----------
    F : array_like (4, 4)
        Counts (or proportions) of (state in one sequence, state in the other), symmetrised here.
    gamma, categories :
        The rate variation the inversion assumes (as :func:`fit_model`).

    Returns
    -------
    S, pi, fallback :
        As :func:`estimate_gtr`.

    References
    ----------
    Waddell & Steel (1997) Mol. Phylogenet. Evol. 8:398-414.

    Example
    -------
    >>> F = np.full((4, 4), 10.0) + np.diag([200.0, 200, 200, 200])   # equal rates: JC69
    >>> S, pi, fallback = gtr_from_divergence(F)
    >>> S[0, 1:].round(9).tolist(), pi.tolist(), fallback
    ([1.0, 1.0, 1.0], [0.25, 0.25, 0.25, 0.25], False)
    """
    F = np.asarray(F, dtype=np.float64)
    F = 0.5 * (F + F.T)
    total = F.sum()
    pi = np.full(4, 0.25) if not total > 0 else np.maximum(F.sum(axis=1) / total, FREQ_FLOOR)
    pi = pi / pi.sum()
    ones = np.ones((4, 4)) - np.eye(4)
    if not total > 0:
        return ones, pi, True
    root = np.sqrt(pi)
    M = F / total / root[:, None] / root[None, :]
    mu, V = np.linalg.eigh(0.5 * (M + M.T))
    if not mu.min() > 0:
        return ones, pi, True
    x = _inverse_factor(np.minimum(mu, 1.0), gamma, categories)
    X = (V * x) @ V.T / root[:, None] / root[None, :]
    s = np.maximum(X[UPPER], 0.0)
    if not s.max() > 0:
        return ones, pi, True
    s = np.maximum(s, 1e-3 * s.mean())
    s = s / s.mean()
    S = np.zeros((4, 4))
    S[UPPER] = s
    return S + S.T, pi, False


def _inverse_factor(mu: NDArray[np.float64], gamma: float | None, categories: int | None) -> NDArray[np.float64]:
    """x with g(x) = mu for each eigenvalue mu in (0, 1] (g as in :mod:`cladewright._kernels.likelihood`)."""
    if gamma is None:
        return np.log(mu)
    a = float(gamma)
    if categories is None:
        return -a * np.expm1(-np.log(mu) / a)
    rates = discrete_gamma_rates(a, int(categories))
    x = np.zeros_like(mu)
    for k, target in enumerate(mu):  # at most 4 eigenvalues, not a loop over sites or pairs
        if target < 1.0:
            def g(y: float, target: float = float(target)) -> float:
                return float(np.mean(np.exp(rates * y))) - target
            low = -1.0
            while g(low) > 0:
                low *= 2.0
            x[k] = optimize.brentq(g, low, 0.0, xtol=1e-14, rtol=1e-14)
    return x


def hky_exchangeabilities(kappa: float) -> NDArray[np.float64]:
    """HKY exchangeabilities in the order ACGT: kappa for A<->G and C<->T, 1 for the transversions
    (Hasegawa, Kishino & Yano 1985)."""
    s = np.where(TRANSITION_PAIRS, float(kappa), 1.0)
    S = np.zeros((4, 4))
    S[UPPER] = s
    return S + S.T
