"""Internal: terms shared by the distance formulas.

The terms the distance formulas share (:mod:`.nucleotide`, :mod:`.protein`):
proportions of differing sites among the shared ones, and the log correction
-ln(1 - y) with its gamma form.

References
----------
Jin, L. & Nei, M. (1990) Mol. Biol. Evol. 7:82–102 (gamma forms).
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np
from numpy.typing import NDArray

__all__ = ["neg_log", "pair_proportions"]


def neg_log(y: NDArray[np.float64], gamma: float | None) -> NDArray[np.float64]:
    """-ln(1 - y), or its gamma form a [(1 - y)^(-1/a) - 1]; NaN where y >= 1.

    The gamma form is a expm1(x) with x = -ln(1 - y) / a, which tends to
    -ln(1 - y) as a grows (the plain form is its limit, Jin & Nei 1990). For
    |x| < 1e-8 it is taken as -ln(1 - y) (1 + x/2 + x^2/6), the series of
    expm1(x)/x, whose next term (x^3/24) is below double precision: this
    also keeps full precision where x itself underflows (a near 1e300).

    Parameters
    ----------
    y : float ndarray
        The deficit 1 - w of the logarithm's argument w.
    gamma : float or None
        Shape a of the gamma distribution of rates across sites; None for
        equal rates.

    Returns
    -------
    float ndarray
        -ln(1 - y) (or its gamma form), NaN where y >= 1.

    References
    ----------
    Jin, L. & Nei, M. (1990) Mol. Biol. Evol. 7:82–102.

    Example
    -------
    >>> float(neg_log(np.array(0.5), None)) == float(np.log(2.0))
    True
    """
    y = np.where(y < 1, y, np.nan)
    plain = -np.log1p(-y)
    if gamma is None:
        return plain
    x = plain / gamma
    small = np.abs(x) < 1e-8
    return np.where(small, plain * (1.0 + x * (0.5 + x / 6.0)), gamma * np.expm1(x))


def pair_proportions(c: Mapping[str, NDArray[Any]]) -> tuple[NDArray[np.float64], NDArray[np.float64],
                                                        NDArray[np.float64] | None, NDArray[np.float64] | None,
                                                        NDArray[np.float64] | None]:
    """Proportions over the shared sites of each pair.

    Parameters
    ----------
    c : mapping of count arrays over m pairs
        ``shared`` and ``same``; ``ag`` and ``ct`` (transitions A<->G and
        C<->T) for nucleotides.

    Returns
    -------
    shared, p, p1, p2, q : float64 arrays (m,)
        The shared sites, and the proportions of differences, of A<->G and
        C<->T transitions and of transversions; p1, p2 and q are None
        without ``ag``.

    Example
    -------
    >>> c = {"shared": np.array([8]), "same": np.array([4]), "ag": np.array([2]), "ct": np.array([1])}
    >>> [float(x[0]) for x in pair_proportions(c)]
    [8.0, 0.5, 0.25, 0.125, 0.125]
    """
    shared = c["shared"].astype(np.float64)
    p = (shared - c["same"]) / shared
    if "ag" not in c:
        return shared, p, None, None, None
    p1 = c["ag"] / shared
    p2 = c["ct"] / shared
    q = p - p1 - p2
    return shared, p, p1, p2, q
