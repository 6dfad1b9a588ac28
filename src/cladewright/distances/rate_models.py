r"""Reversible substitution models for the maximum-likelihood pair distances.

A time-reversible model is given by its symmetric exchangeabilities ``S`` (zero diagonal) and its
equilibrium frequencies ``pi``. Its rate matrix is

    Q_ij = S_ij pi_j / mu   (i != j),   Q_ii = -sum_{j != i} Q_ij,   mu = sum_i sum_{j != i} pi_i S_ij pi_j

so the mean rate -sum_i pi_i Q_ii is 1 and a branch length t counts expected substitutions per site
(Tavaré 1986). ``Pi^(1/2) Q Pi^(-1/2)`` is symmetric, so Q is diagonalised stably with a symmetric
eigen-solver, ``Q = R diag(lambda) L`` with ``L = R^-1``, and

    P(t) = R diag(f(lambda t)) L,

with ``f(x) = exp(x)`` for equal rates at all sites, ``f(x) = (1 - x / a)^(-a)`` (the mean of exp(x r) over
rates r drawn from a gamma distribution of shape a and mean 1; Jin & Nei 1990) for continuous gamma rates,
and the mean of ``exp(x r_c)`` over the k category mean rates of Yang (1994) for discrete gamma rates.

The empirical amino-acid models JTT, WAG, LG and Dayhoff (DCMut) are read from the data file
``distances/data/protein_models.txt`` (its header says where the digits come from), and are returned in
cladewright's state order ``ACDEFGHIKLMNPQRSTVWY``.
"""

from __future__ import annotations

import math
import numbers
from importlib import resources
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import special

from ..alignment import PROTEIN_STATES
from ..errors import InputError

__all__ = [
    "PROTEIN_MODELS", "PROTEIN_MODEL_CITATIONS", "EigenSystem", "protein_model", "rate_matrix",
    "eigen_system", "transition_matrix", "spectral_factors", "discrete_gamma_rates",
]

#: The empirical amino-acid models carried by the data file, by the name ``protein_model`` takes.
PROTEIN_MODELS: tuple[str, ...] = ("jtt", "wag", "lg", "dcmut")

#: The paper each empirical amino-acid model is published in.
PROTEIN_MODEL_CITATIONS: dict[str, str] = {
    "jtt": "Jones, Taylor & Thornton (1992) CABIOS 8:275-282",
    "wag": "Whelan & Goldman (2001) Mol. Biol. Evol. 18:691-699",
    "lg": "Le & Gascuel (2008) Mol. Biol. Evol. 25:1307-1320",
    "dcmut": "Kosiol & Goldman (2005) Mol. Biol. Evol. 22:193-199 (Dayhoff's model in its DCMut form)",
}

_DATA_FILE = "protein_models.txt"


class EigenSystem(NamedTuple):
    """The spectral form ``Q = right @ diag(values) @ left`` of a reversible rate matrix.

    ``values`` (K,) are the eigenvalues, all <= 0, in ascending order (the last is the zero of the
    stationary distribution); ``right`` (K, K) holds the right eigenvectors as columns and ``left`` (K, K)
    its inverse (the left eigenvectors as rows). The arrays are float64, C-contiguous and read-only.
    """

    values: NDArray[np.float64]
    right: NDArray[np.float64]
    left: NDArray[np.float64]


def _read_models() -> dict[str, tuple[str, list[float], list[float]]]:
    """Parse the data file: name -> (order, 190 lower-triangle values, 20 frequencies)."""
    text = (resources.files("cladewright.distances") / "data" / _DATA_FILE).read_text(encoding="utf-8")
    models: dict[str, tuple[str, list[float], list[float]]] = {}
    name, order, section = None, "", ""
    tri: list[float] = []
    freqs: list[float] = []
    for number, raw in enumerate(text.splitlines(), 1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        word, _, rest = line.partition(" ")
        if word == "model":
            name, order, section, tri, freqs = rest.strip(), "", "", [], []
        elif word == "order":
            order = rest.strip()
        elif word in ("exchangeabilities", "frequencies"):
            section = word
        elif word == "end" and name is not None:
            models[name] = (order, tri, freqs)
            name = None
        elif name is not None and section:
            try:
                values = [float(x) for x in line.split()]
            except ValueError:
                raise InputError(f"line {number}: not a list of numbers", source=_DATA_FILE) from None
            (tri if section == "exchangeabilities" else freqs).extend(values)
        else:
            raise InputError(f"line {number}: unexpected {word!r}", source=_DATA_FILE)
    return models


def protein_model(name: str) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """The exchangeabilities and equilibrium frequencies of an empirical amino-acid model.

    Parameters
    ----------
    name : str
        One of ``PROTEIN_MODELS`` (``"jtt"``, ``"wag"``, ``"lg"``, ``"dcmut"``), in any case.

    Returns
    -------
    S : ndarray, shape (20, 20)
        Symmetric exchangeabilities with a zero diagonal, in cladewright's order ``ACDEFGHIKLMNPQRSTVWY``,
        at the scale the paper prints them (only their ratios matter: see :func:`rate_matrix`).
    pi : ndarray, shape (20,)
        Equilibrium frequencies in the same order, divided by their sum so that they sum to 1.

    References
    ----------
    See ``PROTEIN_MODEL_CITATIONS``: Jones, Taylor & Thornton (1992); Whelan & Goldman (2001);
    Le & Gascuel (2008); Kosiol & Goldman (2005).

    Example
    -------
    >>> S, pi = protein_model("lg")
    >>> S.shape, round(float(pi.sum()), 12)
    ((20, 20), 1.0)
    """
    key = name.lower() if isinstance(name, str) else name
    if key not in PROTEIN_MODELS:
        raise InputError(f"protein model {name!r} is unknown: choose one of {', '.join(PROTEIN_MODELS)}")
    models = _read_models()
    if key not in models:
        raise InputError(f"protein model {key!r} is missing from the package's data file; reinstall cladewright",
                         source=_DATA_FILE)
    order, tri, freqs = models[key]
    k = len(PROTEIN_STATES)
    if sorted(order) != sorted(PROTEIN_STATES) or len(tri) != k * (k - 1) // 2 or len(freqs) != k:
        raise InputError(f"model {key!r} is malformed (order, 190 exchangeabilities, 20 frequencies)",
                         source=_DATA_FILE)
    listed = np.zeros((k, k))
    listed[np.tril_indices(k, -1)] = tri  # row by row: S[1][0], S[2][0], S[2][1], ...
    listed = listed + listed.T
    to_ours = np.array([order.index(c) for c in PROTEIN_STATES])
    S = listed[np.ix_(to_ours, to_ours)]
    pi = np.asarray(freqs, dtype=np.float64)[to_ours]
    return S, pi / pi.sum()


def _checked_model(S: ArrayLike, pi: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Copies of ``(S, pi)`` checked for a reversible model: S symmetrised with a zero diagonal."""
    s = np.array(S, dtype=np.float64)
    p = np.array(pi, dtype=np.float64)
    if s.ndim != 2 or s.shape[0] != s.shape[1] or s.shape[0] < 2:
        raise InputError(f"S must be a square K x K matrix with K >= 2, not of shape {s.shape}")
    k = s.shape[0]
    if p.shape != (k,):
        raise InputError(f"pi must hold {k} frequencies, one per state of S, not shape {p.shape}")
    if not (np.all(np.isfinite(s)) and np.all(np.isfinite(p))):
        raise InputError("S and pi must be finite numbers")
    off = ~np.eye(k, dtype=bool)
    if np.any(s[off] < 0) or not np.allclose(s, s.T, rtol=1e-12, atol=0.0):
        raise InputError("S must be symmetric with exchangeabilities >= 0 (a reversible model)")
    if np.any(p <= 0) or abs(p.sum() - 1.0) > 1e-6:
        raise InputError("pi must be frequencies > 0 that sum to 1 (give every state a small frequency)")
    s = 0.5 * (s + s.T)
    s[~off] = 0.0
    return s, p / p.sum()


def _mean_rate(S: NDArray[np.float64], pi: NDArray[np.float64]) -> float:
    """``mu = sum_i sum_j pi_i S_ij pi_j``, the mean rate before scaling (S has a zero diagonal)."""
    mu = float(pi @ S @ pi)
    if not mu > 0:
        raise InputError("S has no positive exchangeability: the model never changes state")
    return mu


def rate_matrix(S: ArrayLike, pi: ArrayLike) -> NDArray[np.float64]:
    """The rate matrix of a reversible model, scaled to one expected substitution per unit time.

    Parameters
    ----------
    S : array_like, shape (K, K)
        Symmetric exchangeabilities >= 0 (the diagonal is ignored); any overall scale.
    pi : array_like, shape (K,)
        Equilibrium frequencies, each > 0, summing to 1.

    Returns
    -------
    Q : ndarray, shape (K, K)
        ``Q_ij = S_ij pi_j / mu`` off the diagonal, rows summing to 0, and mean rate
        ``-sum_i pi_i Q_ii = 1``; ``pi`` is its stationary distribution (``pi @ Q = 0``).

    References
    ----------
    Tavaré (1986) Lect. Math. Life Sci. 17:57-86 (the general time-reversible model).

    Example
    -------
    >>> Q = rate_matrix([[0, 1], [1, 0]], [0.5, 0.5])
    >>> Q.tolist()
    [[-1.0, 1.0], [1.0, -1.0]]
    """
    S, pi = _checked_model(S, pi)
    mu = _mean_rate(S, pi)
    Q = S * pi[None, :] / mu
    np.fill_diagonal(Q, 0.0)
    np.fill_diagonal(Q, -Q.sum(axis=1))
    return Q


def eigen_system(S: ArrayLike, pi: ArrayLike) -> EigenSystem:
    """Diagonalise the scaled rate matrix of ``(S, pi)`` through its symmetric form.

    With ``D = diag(sqrt(pi))``, ``B = D Q D^-1`` has entries ``sqrt(pi_i) S_ij sqrt(pi_j) / mu`` off the
    diagonal, so it is symmetric; ``B = U diag(lambda) U^T`` (``numpy.linalg.eigh``) gives
    ``right = D^-1 U`` and ``left = U^T D``. The largest eigenvalue, that of the stationary distribution,
    is set to exactly 0, and any other that rounding leaves above 0 to 0 as well.

    Parameters
    ----------
    S : array_like, shape (K, K)
        Symmetric exchangeabilities >= 0, any overall scale (for example the 4 x 4 of a GTR model in the
        order ACGT, or :func:`protein_model`'s 20 x 20).
    pi : array_like, shape (K,)
        Equilibrium frequencies, each > 0, summing to 1.

    Returns
    -------
    EigenSystem
        ``values`` (K,), ``right`` (K, K) and ``left`` (K, K), read-only, with
        ``rate_matrix(S, pi) == right @ diag(values) @ left`` to rounding.

    References
    ----------
    Tavaré (1986); the symmetric form of a reversible rate matrix is common practice.

    Example
    -------
    >>> eig = eigen_system(*protein_model("wag"))
    >>> round(float(eig.values[-1]), 12), bool((eig.values <= 0).all())
    (0.0, True)
    """
    S, pi = _checked_model(S, pi)
    mu = _mean_rate(S, pi)
    Q = S * pi[None, :] / mu
    np.fill_diagonal(Q, 0.0)
    diagonal = -Q.sum(axis=1)
    root = np.sqrt(pi)
    B = root[:, None] * S * root[None, :] / mu
    np.fill_diagonal(B, diagonal)
    B = 0.5 * (B + B.T)
    values, U = np.linalg.eigh(B)
    values = np.minimum(values, 0.0)
    values[-1] = 0.0  # the stationary distribution's eigenvalue, exactly
    right = U / root[:, None]
    left = np.ascontiguousarray(U.T * root[None, :])
    for a in (values, right, left):
        a.setflags(write=False)
    return EigenSystem(values, right, left)


def _check_rates(gamma: float | None, categories: int | None) -> None:
    if gamma is not None:
        if isinstance(gamma, bool) or not isinstance(gamma, numbers.Real) or not (0 < gamma < math.inf):
            raise InputError(f"gamma must be a finite shape parameter > 0 (or None for equal rates), not {gamma!r}")
    if categories is not None:
        if gamma is None:
            raise InputError("categories needs gamma: give a gamma shape as well, or leave categories=None")
        if isinstance(categories, bool) or not isinstance(categories, numbers.Integral) or categories < 1:
            raise InputError(f"categories must be a whole number >= 1 (or None for continuous gamma), "
                             f"not {categories!r}")


def spectral_factors(values: ArrayLike, t: float, gamma: float | None = None, categories: int | None = None,
                     derivative: int = 0) -> NDArray[np.float64]:
    """The factors ``f(lambda t)`` of ``P(t) = right diag(f) left``, or their first or second t-derivative.

    Parameters
    ----------
    values : array_like, shape (K,)
        Eigenvalues ``lambda`` of a rate matrix (all <= 0), as in ``EigenSystem.values``.
    t : float
        Branch length (expected substitutions per site), >= 0.
    gamma : float or None
        Shape ``a`` of gamma-distributed rates with mean 1; None for equal rates.
    categories : int or None
        With ``gamma``: the number k of equal-probability rate categories (Yang 1994); None for the
        continuous gamma distribution.
    derivative : {0, 1, 2}
        0 for ``f``, 1 for ``df/dt``, 2 for ``d2f/dt2`` (for Newton steps on t).

    Returns
    -------
    ndarray, shape (K,)
        Equal rates: ``lambda^n exp(lambda t)``. Continuous gamma:
        ``(1 - lambda t / a)^(-a)``, ``lambda (1 - lambda t / a)^(-a-1)`` and
        ``lambda^2 (1 + 1/a) (1 - lambda t / a)^(-a-2)``. Discrete gamma: the mean over the category rates
        r_c of ``(lambda r_c)^n exp(lambda r_c t)``.

    References
    ----------
    Jin & Nei (1990) Mol. Biol. Evol. 7:82-102 (the gamma mean of exp); Yang (1994) J. Mol. Evol.
    39:306-314 (discrete gamma).

    Example
    -------
    >>> spectral_factors([0.0, -1.0], 0.5, gamma=1.0).tolist()
    [1.0, 0.6666666666666666]
    """
    lam = np.minimum(np.asarray(values, dtype=np.float64), 0.0)
    t = _check_length(t)
    _check_rates(gamma, categories)
    if derivative not in (0, 1, 2):
        raise InputError(f"derivative must be 0, 1 or 2, not {derivative!r}")
    if gamma is None:
        return lam ** derivative * np.exp(lam * t)
    a = float(gamma)
    if categories is None:
        log_base = np.log1p(-lam * t / a)  # log(1 - lambda t / a), exact to rounding for large a
        coefficient = (1.0, 1.0, 1.0 + 1.0 / a)[derivative]
        return coefficient * lam ** derivative * np.exp((-a - derivative) * log_base)
    rates = discrete_gamma_rates(a, int(categories))
    x = lam[:, None] * rates[None, :]
    return np.mean(x ** derivative * np.exp(x * t), axis=1)


def _check_length(t: float) -> float:
    if isinstance(t, bool) or not isinstance(t, numbers.Real) or not (0 <= t < math.inf):
        raise InputError(f"branch length t must be a finite number >= 0, not {t!r}")
    return float(t)


def transition_matrix(eig: EigenSystem, t: float, gamma: float | None = None,
                      categories: int | None = None) -> NDArray[np.float64]:
    """Transition probabilities ``P(t)`` over a branch of length t.

    Parameters
    ----------
    eig : EigenSystem
        From :func:`eigen_system`.
    t : float
        Branch length in expected substitutions per site, >= 0.
    gamma : float or None
        Shape of gamma-distributed rates across sites (mean 1); None for equal rates.
    categories : int or None
        With ``gamma``, the number of discrete gamma categories (Yang 1994); None for continuous gamma.

    Returns
    -------
    P : ndarray, shape (K, K)
        ``P_ij`` the probability of state j at the end of the branch given state i at its start;
        rows sum to 1 and ``pi_i P_ij = pi_j P_ji``. Entries near 0 may be off by rounding (about 1e-16).

    References
    ----------
    Jin & Nei (1990) Mol. Biol. Evol. 7:82-102; Yang (1994) J. Mol. Evol. 39:306-314.

    Example
    -------
    >>> eig = eigen_system(*protein_model("jtt"))
    >>> P = transition_matrix(eig, 0.1, gamma=0.5, categories=4)
    >>> bool(np.allclose(P.sum(axis=1), 1.0))
    True
    """
    f = spectral_factors(eig.values, t, gamma, categories)
    return (eig.right * f[None, :]) @ eig.left


def discrete_gamma_rates(alpha: float, k: int) -> NDArray[np.float64]:
    """Mean rates of k equal-probability categories of the gamma distribution of shape alpha, mean 1.

    The category boundaries are the quantiles ``x_c`` with ``P(alpha, alpha x_c) = c / k``
    (``P`` the regularised lower incomplete gamma function), and the mean rate of category c is
    ``k [P(alpha + 1, alpha x_c) - P(alpha + 1, alpha x_{c-1})]``. The rates are divided by their mean,
    which is 1 to rounding, so that it is 1.

    Parameters
    ----------
    alpha : float
        Gamma shape, finite and > 0.
    k : int
        Number of categories, >= 1.

    Returns
    -------
    ndarray, shape (k,)
        Category mean rates, ascending, with mean 1.

    References
    ----------
    Yang (1994) J. Mol. Evol. 39:306-314 (the mean of each category).

    Example
    -------
    >>> discrete_gamma_rates(0.5, 4).round(4).tolist()
    [0.0334, 0.2519, 0.8203, 2.8944]
    """
    _check_rates(alpha, k)
    a, k = float(alpha), int(k)
    if k == 1:
        return np.ones(1)
    z = special.gammaincinv(a, np.arange(1, k) / k)  # alpha x_c, c = 1..k-1
    lower = special.gammainc(a + 1.0, z)
    upper = special.gammaincc(a + 1.0, z)
    # each category's mass of the shape a+1 distribution, taken from whichever tail is smaller, so that
    # the differences keep their digits
    cdf = np.concatenate(([0.0], lower, [1.0]))
    sf = np.concatenate(([1.0], upper, [0.0]))
    use_upper = cdf[:-1] > 0.5
    mass = np.where(use_upper, sf[:-1] - sf[1:], cdf[1:] - cdf[:-1])
    rates = k * mass
    return rates / rates.mean()
