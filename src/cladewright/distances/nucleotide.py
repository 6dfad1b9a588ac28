r"""Nucleotide distance formulas on arrays of pair counts.

Every formula shares one signature, ``f(c, pi, gamma) -> d``: ``c`` holds
count arrays over m pairs (``shared``, ``same``, ``ag``, ``ct`` and, where the
model needs them, ``full`` (m, 4, 4)); ``pi`` the base frequencies A, C, G, T,
shape (4,) or (m, 4); ``gamma`` the shape alpha of the gamma distribution of
rates across sites, or None. Where a logarithm's argument is <= 0 the
distance is undefined and returned as NaN; the caller reports it.

Each -ln w below is taken as -log1p(-y) of the deficit y = 1 - w, exact for
close sequences (y near 0), and each gamma form a (w^(-1/a) - 1) as
a expm1(-ln(w) / a): written as it stands, w^(-1/a) - 1 loses digits as the
shape a grows (about 1e-7 relative at a = 1e8) and is 0 from a ~ 1e15, where
the distance should approach its limit, the plain form.

With P the proportion of transitions (P1: A<->G, P2: C<->T), Q of
transversions and p of differences, over the shared sites:

- p:      d = p
- JC69:   d = -3/4 ln(1 - 4p/3)                         (Jukes & Cantor 1969)
          gamma: d = 3/4 a [(1 - 4p/3)^(-1/a) - 1]     (Jin & Nei 1990)
- F81:    d = -B ln(1 - p/B), B = 1 - sum pi^2          (Felsenstein 1981)
          gamma: d = B a [(1 - p/B)^(-1/a) - 1]
- K2P:    d = -1/2 ln(1 - 2P - Q) - 1/4 ln(1 - 2Q)     (Kimura 1980)
          gamma: d = a/2 [(1-2P-Q)^(-1/a) + 1/2 (1-2Q)^(-1/a) - 3/2]  (Jin & Nei 1990)
- F84:    d = -2A ln(1 - P/(2A) - (A-B)Q/(2AC)) + 2(A-B-C) ln(1 - Q/(2C)),
          A = pi_A pi_G/pi_R + pi_C pi_T/pi_Y, B = pi_A pi_G + pi_C pi_T,
          C = pi_R pi_Y                                  (Felsenstein & Churchill 1996)
- T92:    d = -h ln(1 - P/h - Q) - 1/2 (1 - h) ln(1 - 2Q), h = 2 theta (1 - theta),
          theta the G+C content                          (Tamura 1992)
- TN93:   d = -2 pi_A pi_G/pi_R ln w1 - 2 pi_C pi_T/pi_Y ln w2
              - 2 (pi_R pi_Y - pi_A pi_G pi_Y/pi_R - pi_C pi_T pi_R/pi_Y) ln w3,
          w1 = 1 - pi_R P1/(2 pi_A pi_G) - Q/(2 pi_R), w2 = 1 - pi_Y P2/(2 pi_C pi_T) - Q/(2 pi_Y),
          w3 = 1 - Q/(2 pi_R pi_Y); gamma: -ln w -> a (w^(-1/a) - 1) in each term
                                                         (Tamura & Nei 1993)
- LogDet: d = -1/4 ln det F - ln 4, F the 4 x 4 table of pair proportions
                                                         (Lockhart, Steel, Hendy & Penny 1994)
- paralinear: d = -1/4 [ln det F - 1/2 (ln det Pi_x + ln det Pi_y)], Pi the
          diagonal matrices of the two sequences' base proportions   (Lake 1994)
"""

from __future__ import annotations

from typing import Any, Mapping, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .terms import neg_log, pair_proportions

__all__ = ["p_distance", "jc69", "f81", "k2p", "f84", "t92", "tn93", "logdet", "paralinear"]


def _bases(pi: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    pi = np.asarray(pi, dtype=np.float64)
    return pi[..., 0], pi[..., 1], pi[..., 2], pi[..., 3]


def _transitions(c: Mapping[str, NDArray[Any]]) -> tuple[NDArray[np.float64], NDArray[np.float64],
                                                         NDArray[np.float64]]:
    """p1, p2 and q of :func:`pair_proportions`, for the counts of the models
    that read transitions (``ag`` and ``ct`` are there, so none is None)."""
    _, _, p1, p2, q = pair_proportions(c)
    return cast(NDArray[np.float64], p1), cast(NDArray[np.float64], p2), cast(NDArray[np.float64], q)


def p_distance(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None,
               gamma: float | None = None) -> NDArray[np.float64]:
    """Proportion of differing sites among the shared ones."""
    return pair_proportions(c)[1]


def _equal_input(p: NDArray[np.float64], b: float | NDArray[np.float64], gamma: float | None) -> NDArray[np.float64]:
    return b * neg_log(p / b, gamma)


def jc69(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None, gamma: float | None = None) -> NDArray[np.float64]:
    """JC69 (Jukes & Cantor 1969); gamma form of Jin & Nei (1990)."""
    return _equal_input(pair_proportions(c)[1], 0.75, gamma)


def f81(c: Mapping[str, NDArray[Any]], pi: ArrayLike, gamma: float | None = None) -> NDArray[np.float64]:
    """F81 (Felsenstein 1981): the equal-input correction with B = 1 - sum pi^2."""
    b = 1.0 - np.sum(np.asarray(pi, dtype=np.float64) ** 2, axis=-1)
    return _equal_input(pair_proportions(c)[1], b, gamma)


def k2p(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None, gamma: float | None = None) -> NDArray[np.float64]:
    """K2P (Kimura 1980); gamma form of Jin & Nei (1990)."""
    p1, p2, q = _transitions(c)
    ts = p1 + p2
    return 0.5 * neg_log(2.0 * ts + q, gamma) + 0.25 * neg_log(2.0 * q, gamma)


def f84(c: Mapping[str, NDArray[Any]], pi: ArrayLike, gamma: float | None = None) -> NDArray[np.float64]:
    """F84 (Felsenstein & Churchill 1996, the model of 1984)."""
    p1, p2, q = _transitions(c)
    ts = p1 + p2
    a_, c_, g_, t_ = _bases(pi)
    pr, py = a_ + g_, c_ + t_
    big_a = a_ * g_ / pr + c_ * t_ / py
    big_b = a_ * g_ + c_ * t_
    big_c = pr * py
    y1 = ts / (2.0 * big_a) + (big_a - big_b) * q / (2.0 * big_a * big_c)
    y2 = q / (2.0 * big_c)
    return 2.0 * big_a * neg_log(y1, None) - 2.0 * (big_a - big_b - big_c) * neg_log(y2, None)


def t92(c: Mapping[str, NDArray[Any]], pi: ArrayLike, gamma: float | None = None) -> NDArray[np.float64]:
    """T92 (Tamura 1992), theta the G+C content of ``pi``."""
    p1, p2, q = _transitions(c)
    ts = p1 + p2
    _, c_, g_, _ = _bases(pi)
    theta = c_ + g_
    h = 2.0 * theta * (1.0 - theta)
    # h = 0 (no G+C, or only G+C) leaves no transitions possible (P = 0), and
    # h ln(1 - P/h - Q) -> 0 as h -> 0: the first term vanishes.
    with np.errstate(divide="ignore", invalid="ignore"):
        first = np.where(h > 0, h * neg_log(ts / np.where(h > 0, h, 1.0) + q, None), 0.0)
    return first + 0.5 * (1.0 - h) * neg_log(2.0 * q, None)


def tn93(c: Mapping[str, NDArray[Any]], pi: ArrayLike, gamma: float | None = None) -> NDArray[np.float64]:
    """TN93 (Tamura & Nei 1993), with its gamma form."""
    p1, p2, q = _transitions(c)
    a_, c_, g_, t_ = _bases(pi)
    pr, py = a_ + g_, c_ + t_
    y1 = pr * p1 / (2.0 * a_ * g_) + q / (2.0 * pr)
    y2 = py * p2 / (2.0 * c_ * t_) + q / (2.0 * py)
    y3 = q / (2.0 * pr * py)
    k3 = pr * py - a_ * g_ * py / pr - c_ * t_ * pr / py
    return (2.0 * a_ * g_ / pr * neg_log(y1, gamma) + 2.0 * c_ * t_ / py * neg_log(y2, gamma)
            + 2.0 * k3 * neg_log(y3, gamma))


def _logdet_parts(c: Mapping[str, NDArray[Any]]) -> NDArray[np.float64]:
    """ln det F of each pair (nan where det F <= 0), F the pair's 4 x 4 table of
    state-pair frequencies, from the counting engine (``logdet_f``)."""
    return np.asarray(c["logdet_f"], dtype=np.float64)


def logdet(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None,
           gamma: float | None = None) -> NDArray[np.float64]:
    """LogDet (Lockhart et al. 1994): zero for identical sequences with equal base frequencies."""
    ld = _logdet_parts(c)
    return -0.25 * ld - np.log(4.0)


def paralinear(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None,
               gamma: float | None = None) -> NDArray[np.float64]:
    """Paralinear distance (Lake 1994)."""
    ld = _logdet_parts(c)
    total = np.asarray(c["shared"], dtype=np.float64)[:, None]
    table = np.asarray(c["table"]).reshape(4, 4, -1)  # the (16, m) count block: row 4a + b is state pair (a, b)
    rows = table.sum(axis=1).T / total
    cols = table.sum(axis=0).T / total
    with np.errstate(divide="ignore", invalid="ignore"):
        diag = np.log(rows).sum(axis=1) + np.log(cols).sum(axis=1)
    diag = np.where(np.isfinite(diag), diag, np.nan)
    return -0.25 * (ld - 0.5 * diag)
