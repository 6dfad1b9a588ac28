r"""Maximum-likelihood pair distances under reversible substitution models.

Each pair's distance t maximises the likelihood of its table ``n_ab`` of (state in one sequence, state in
the other) over the sites where both are unambiguous,

    ln L(t) = sum_ab n_ab ln(pi_a P_ab(t)),    P(t) = exp(Q t),

with Q scaled to one expected substitution per unit time, so t counts substitutions per site
(Felsenstein 1981; Tavaré 1986). With gamma-distributed rates across sites (shape alpha, mean 1),
P(t) = (I - Q t / alpha)^(-alpha), the mean of exp(Q r t) over r (Jin & Nei 1990), or the mean of
exp(Q r_c t) over the mean rates r_c of k equal-probability categories (Yang 1994). Each P(t) is taken
through the eigendecomposition of Q (:mod:`.rate_models`) and each t found by safeguarded Halley and
Newton steps in compiled code (:mod:`cladewright._kernels.likelihood`), one pair at a time, straight from
the weighted site patterns (DNA from their bit planes; :mod:`cladewright._kernels.likelihood_blocks`), so
that bootstrap weights enter as they do for the closed forms.

Models
------
- ``jtt``, ``wag``, ``lg``, ``dcmut``: the published amino-acid exchangeabilities and frequencies (Jones,
  Taylor & Thornton 1992; Whelan & Goldman 2001; Le & Gascuel 2008; Kosiol & Goldman 2005), with the
  model's frequencies (``freqs="model"``) or the alignment's (``freqs="alignment"``).
- ``gtr`` (Tavaré 1986): the six exchangeabilities and four frequencies estimated once from the alignment's
  divergence matrix, pooled over all pairs, by the method of Waddell & Steel (1997) (:mod:`.rate_estimates`,
  with its fallbacks); each pair's distance is then the maximum-likelihood one under these rates.
- ``hky`` (Hasegawa, Kishino & Yano 1985): the same frequencies, and one transition/transversion ratio
  kappa from the same estimate.

States a model puts at frequency 0 (an amino acid absent from the alignment) are given 1e-6, so that the
rate matrix is defined; their cells are never observed.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field
from typing import Any, Iterator

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .._kernels import likelihood as kl
from .._kernels import likelihood_blocks as kb
from .._kernels.matrix import pairs_before
from ..errors import InputError
from .counts import pack, state_frequencies
from .rate_estimates import FREQ_FLOOR, TRANSITION_PAIRS, UPPER, estimate_gtr, hky_exchangeabilities
from .rate_models import PROTEIN_MODELS, discrete_gamma_rates, eigen_system, protein_model

__all__ = ["LIKELIHOOD_MODELS", "FittedModel", "fit_model", "model_for", "likelihood_blocks", "pair_distances",
           "check_categories"]

#: The models whose distances are computed by maximum likelihood.
LIKELIHOOD_MODELS: tuple[str, ...] = PROTEIN_MODELS + ("gtr", "hky")
#: A pair is saturated when its likelihood still rises where every term of P(t) but the stationary one
#: has fallen to this share of its start ...
SATURATION = 1e-8
#: ... or at this distance, whichever comes first.
T_CAP = 1e6
#: Pairs per compiled call: bounds the working memory beside the output matrix.
BLOCK_PAIRS = 1 << 16


@dataclass(frozen=True)
class FittedModel:
    """A reversible model made ready for the compiled search: its folded spectral terms and rate variation.

    Made by :func:`fit_model`; ``info`` holds what the distance matrix reports of it (estimated rates).
    """

    S: NDArray[np.float64]        # (K, K) symmetric exchangeabilities
    pi: NDArray[np.float64]       # (K,) equilibrium frequencies
    coef: NDArray[np.float64]     # (K * K, K - 1) folded pi_a R_ak L_kb of the nonzero eigenvalues
    base: NDArray[np.float64]     # (K * K,) pi_a where a = b, else 0
    lam: NDArray[np.float64]      # (K - 1,) the nonzero eigenvalues
    mode: int                     # kl.EQUAL, kl.GAMMA or kl.DISCRETE
    alpha: float
    rates: NDArray[np.float64]    # discrete gamma category rates (one 1.0 otherwise)
    b_start: float                # 1 - sum pi^2, the start's equal-input constant
    t_max: float                  # the saturation cap
    info: dict[str, Any] = field(default_factory=dict)


def fit_model(S: ArrayLike, pi: ArrayLike, gamma: float | None = None, categories: int | None = None,
              info: dict[str, Any] | None = None) -> FittedModel:
    """Fold a reversible model ``(S, pi)`` and its rate variation for the compiled search.

    Parameters
    ----------
    S : array_like (K, K)
        Symmetric exchangeabilities >= 0, any scale.
    pi : array_like (K,)
        Equilibrium frequencies; values below :data:`FREQ_FLOOR` are raised to it.
    gamma : float, optional
        Gamma shape alpha of rates across sites; None for equal rates.
    categories : int, optional
        With ``gamma``, k discrete categories (Yang 1994); None for the continuous gamma.
    info : dict, optional
        Facts to carry to the distance matrix's ``info``.

    Returns
    -------
    FittedModel

    Example
    -------
    >>> m = fit_model(np.ones((4, 4)), np.full(4, 0.25))
    >>> m.lam.round(6).tolist()
    [-1.333333, -1.333333, -1.333333]
    """
    pi = np.maximum(np.asarray(pi, dtype=np.float64), FREQ_FLOOR)
    pi = pi / pi.sum()
    S = np.asarray(S, dtype=np.float64)
    k = pi.shape[0]
    eig = eigen_system(S, pi)
    coef = pi[:, None, None] * eig.right[:, None, :-1] * eig.left.T[None, :, :-1]
    coef = 0.5 * (coef + coef.transpose(1, 0, 2))
    lam = np.ascontiguousarray(eig.values[:-1])
    if gamma is None:
        mode, alpha, rates = kl.EQUAL, 1.0, np.ones(1)
    elif categories is None:
        mode, alpha, rates = kl.GAMMA, float(gamma), np.ones(1)
    else:
        mode, alpha, rates = kl.DISCRETE, float(gamma), discrete_gamma_rates(float(gamma), int(categories))
    return FittedModel(S, pi, np.ascontiguousarray(coef.reshape(k * k, k - 1)), np.diag(pi).reshape(-1).copy(),
                       lam, mode, alpha, rates, float(1.0 - np.sum(pi * pi)),
                       _saturation_cap(lam, mode, alpha, rates), dict(info or {}))


def _saturation_cap(lam: NDArray[np.float64], mode: int, alpha: float, rates: NDArray[np.float64]) -> float:
    """The t at which the slowest term of P(t) has fallen to SATURATION, at most T_CAP."""
    slowest = float(-lam.max()) if lam.size else 0.0
    if not slowest > 0:
        return T_CAP
    if mode == kl.EQUAL:
        t = -math.log(SATURATION) / slowest
    elif mode == kl.GAMMA:
        t = alpha / slowest * math.expm1(min(-math.log(SATURATION) / alpha, 700.0))
    else:
        t = -math.log(SATURATION) / (slowest * float(rates.min()))
    return min(t, T_CAP)


def pair_distances(tables: ArrayLike, S: ArrayLike, pi: ArrayLike, gamma: float | None = None,
                   categories: int | None = None) -> NDArray[np.float64]:
    """Maximum-likelihood distances of pairs given by their tables of site counts.

    Parameters
    ----------
    tables : array_like (m, K, K) or (K, K)
        Weighted counts of (state in the first sequence, state in the second).
    S, pi, gamma, categories :
        The model, as :func:`fit_model`.

    Returns
    -------
    float64 ndarray (m,) or float
        The distance of each pair (expected substitutions per site); NaN for a saturated pair or one
        without any site.

    References
    ----------
    Felsenstein (1981) J. Mol. Evol. 17:368-376; Tavaré (1986); Jin & Nei (1990); Yang (1994).

    Example
    -------
    >>> table = np.diag([30.0, 20, 25, 25]); table[0, 2] = 10   # 10 of 110 sites differ
    >>> d = pair_distances(table, np.ones((4, 4)), np.full(4, 0.25))
    >>> bool(abs(d + 0.75 * np.log(1 - 4 / 3 * 10 / 110)) < 1e-12)   # JC69 (Jukes & Cantor 1969)
    True
    """
    t = np.asarray(tables, dtype=np.float64)
    one = t.ndim == 2
    t = np.ascontiguousarray(t.reshape((-1,) + t.shape[-2:]))
    m = fit_model(S, pi, gamma, categories)
    d = np.empty(t.shape[0])
    kl.table_distances(t, m.coef, m.base, m.lam, m.mode, m.alpha, m.rates, m.b_start, m.t_max, d)
    return float(d[0]) if one else d


def check_categories(categories: Any, gamma: float | None, likelihood: bool, source: str | None = None) -> int:
    """The number of discrete gamma categories, checked.

    Parameters
    ----------
    categories : object
        What the caller gave as ``gamma_categories``: a whole number from 1 to 256.
    gamma : float or None
        The gamma shape given with it (required).
    likelihood : bool
        Whether the model is one of :data:`LIKELIHOOD_MODELS` (required).
    source : str, optional
        For the message.

    Returns
    -------
    int

    Raises
    ------
    InputError
        Naming ``gamma_categories`` and the fix.

    Example
    -------
    >>> check_categories(4, 0.5, True)
    4
    """
    ok = isinstance(categories, numbers.Integral) and not isinstance(categories, bool)
    if not (ok and 1 <= categories <= 256):
        raise InputError(f"gamma_categories={categories!r} must be a whole number from 1 to 256 (e.g. 4)",
                         source=source)
    if gamma is None:
        raise InputError(f"gamma_categories={categories!r} needs a gamma shape: give gamma=ALPHA as well (e.g. 0.5)",
                         source=source)
    if not likelihood:
        raise InputError(f"gamma_categories={categories!r} is for the likelihood models "
                         f"({', '.join(LIKELIHOOD_MODELS)}); drop it or choose one of them", source=source)
    return int(categories)


def model_for(name: str, patterns: NDArray[np.uint8], weights: NDArray[np.int64], use: NDArray[np.bool_] | None,
              multiplicity: ArrayLike, freqs: str, gamma: float | None, categories: int | None,
              source: str | None = None) -> FittedModel:
    """The fitted model a distance matrix under ``name`` uses (see the module docstring).

    Parameters
    ----------
    name : str
        One of :data:`LIKELIHOOD_MODELS`.
    patterns, weights, use, multiplicity :
        The alignment's site patterns (n, S), their weights (a bootstrap replicate's, or the site counts),
        the patterns in use (complete deletion) and how many sequences each row stands for.
    freqs : {"model", "alignment"}
        Frequencies of a protein model: its own, or the alignment's; GTR and HKY take "alignment" only.
    gamma, categories :
        Rate variation, as :func:`fit_model`.
    source : str, optional
        For messages.

    Returns
    -------
    FittedModel
        With ``info``: ``rates`` (GTR, mean 1) or ``kappa`` (HKY), ``base_freqs`` and ``rates_fallback``.

    Example
    -------
    >>> pats = np.array([[0, 1, 2, 3, 0], [0, 1, 2, 3, 2]], dtype=np.uint8)
    >>> m = model_for("hky", pats, np.array([10, 10, 10, 10, 1]), None, np.ones(2), "alignment", None, None)
    >>> m.info["kappa"] > 1
    True
    """
    if name in PROTEIN_MODELS:
        if freqs not in ("model", "alignment"):
            raise InputError(f"model {name} takes its frequencies from the model or the alignment; choose "
                             "freqs=\"model\" or freqs=\"alignment\"", source=source)
        S, pi = protein_model(name)
        if freqs == "alignment":
            pi = state_frequencies(patterns, weights, 20, use, multiplicity)
            if not np.all(np.isfinite(pi)):
                raise InputError("no unambiguous residue to estimate frequencies from; use freqs=\"model\"",
                                 source=source)
        return fit_model(S, pi, gamma, categories)
    if freqs != "alignment":
        raise InputError(f"model {name} estimates its frequencies from the alignment; choose "
                         "freqs=\"alignment\"", source=source)
    S, pi, fallback = estimate_gtr(patterns, weights, use, multiplicity, gamma, categories)
    info: dict[str, Any] = {"rates_fallback": fallback}
    if name == "hky":
        s = S[UPPER]
        kappa = float(s[TRANSITION_PAIRS].mean() / s[~TRANSITION_PAIRS].mean())
        S = hky_exchangeabilities(kappa)
        info["kappa"] = kappa
    else:
        info["rates"] = {a + b: float(S["ACGT".index(a), "ACGT".index(b)])
                         for a, b in ("AC", "AG", "AT", "CG", "CT", "GT")}
    info["base_freqs"] = [float(x) for x in pi]
    return fit_model(S, pi, gamma, categories, info)


def likelihood_blocks(model: FittedModel, patterns: NDArray[np.uint8], weights: NDArray[np.int64],
                      use: NDArray[np.bool_] | None, serial: bool = False
                      ) -> Iterator[tuple[int, NDArray[np.float64], NDArray[np.float64]]]:
    """The distances of all pairs, a block of rows at a time.

    Parameters
    ----------
    model : FittedModel
    patterns : uint8 array (n, S)
        Site patterns; states >= K (gaps, ambiguity) are not counted.
    weights : int array (S,)
        Pattern weights (site counts, or a bootstrap replicate's draw).
    use : bool array (S,), optional
        The patterns in use (complete deletion).
    serial : bool
        Compute on the calling thread only.

    Yields
    ------
    r0, d, shared :
        The first row of the block, and the distances and weighted shared sites of its pairs (i, j),
        i >= r0, j > i, in row-major order of the upper triangle (as the counting engine's blocks); NaN
        where a pair is saturated or shares no site. The arrays are reused by the next block.

    Example
    -------
    >>> pats = np.array([[0, 1, 2, 3], [0, 1, 2, 2], [1, 1, 2, 3]], dtype=np.uint8)
    >>> m = fit_model(np.ones((4, 4)), np.full(4, 0.25))
    >>> [(r0, d.round(4).tolist()) for r0, d, _ in likelihood_blocks(m, pats, np.array([5, 5, 5, 5]), None)]
    [(0, [0.3041, 0.3041, 0.824])]
    """
    n = patterns.shape[0]
    k = model.pi.shape[0]
    args = (model.coef, model.base, model.lam, model.mode, model.alpha, model.rates, model.b_start, model.t_max)
    if k == 4:
        packed = pack(patterns, weights, 4, use)
        data: tuple[Any, ...] = (np.ascontiguousarray(packed.planes.transpose(0, 2, 1)), packed.word_weight)
        run = kb.pair_distances_planes_serial if serial else kb.pair_distances_planes
    else:
        keep = weights > 0 if use is None else (weights > 0) & use
        fold = np.arange(k * k).reshape(k, k)
        fold = np.minimum(fold, fold.T).reshape(-1).astype(np.int64)
        data = (np.ascontiguousarray(patterns[:, keep]), weights[keep].astype(np.float64), fold)
        run = kb.pair_distances_states_serial if serial else kb.pair_distances_states
    offsets = pairs_before.py_func(np.arange(n + 1), n)
    d = np.empty(BLOCK_PAIRS)
    shared = np.empty(BLOCK_PAIRS)
    r0 = 0
    while r0 < n - 1:
        # as many rows as fit in BLOCK_PAIRS, at least one
        r1 = max(r0 + 1, int(np.searchsorted(offsets, offsets[r0] + BLOCK_PAIRS, side="right")) - 1)
        r1 = min(r1, n)
        m = int(offsets[r1] - offsets[r0])
        if m > d.shape[0]:
            d, shared = np.empty(m), np.empty(m)
        run(*data, r0, m, *args, d, shared)
        yield r0, d[:m], shared[:m]
        r0 = r1
