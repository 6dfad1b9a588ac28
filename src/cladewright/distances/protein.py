r"""Protein distance formulas on arrays of pair counts (shared signature
``f(c, pi, gamma) -> d``, as in :mod:`cladewright.distances.nucleotide`;
shared terms in :mod:`cladewright.distances.terms`).

With p the proportion of differing residues among the shared sites:

- p:       d = p
- Poisson: d = -ln(1 - p)                      (Zuckerkandl & Pauling 1965)
           gamma: d = a [(1 - p)^(-1/a) - 1]
- Kimura:  d = -ln(1 - p - p^2 / 5)            (Kimura 1983, The Neutral Theory of Molecular Evolution)
"""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .terms import neg_log, pair_proportions

__all__ = ["poisson", "kimura_protein"]


def poisson(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None,
            gamma: float | None = None) -> NDArray[np.float64]:
    """Poisson correction (Zuckerkandl & Pauling 1965), with its gamma form."""
    return neg_log(pair_proportions(c)[1], gamma)


def kimura_protein(c: Mapping[str, NDArray[Any]], pi: ArrayLike | None = None,
                   gamma: float | None = None) -> NDArray[np.float64]:
    """Kimura's (1983) approximation to the PAM correction."""
    p = pair_proportions(c)[1]
    return neg_log(p + 0.2 * p * p, None)
