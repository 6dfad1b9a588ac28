"""Pairwise distances: one registry of models over one counting engine.

:func:`distance_matrix` packs the site patterns once, counts every pair in
compiled blocks (:mod:`.counts`), and applies the model's formula
(:mod:`.nucleotide`, :mod:`.protein`) to the counts of a block at a time.
The models without a closed form (JTT, WAG, LG, DCMut, GTR, HKY) give each
pair its maximum-likelihood distance (:mod:`.likelihood`), computed in
compiled blocks from the same weighted site patterns.
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass
from typing import Any, Callable, Iterator, Mapping, Optional

import numpy as np
from numpy.typing import ArrayLike, DTypeLike, NDArray

from ..alignment import Alignment, distinct_sequences
from ..choices import FREQ_MODES, GAP_MODES, SATURATED_MODES, Alphabet
from ..errors import InputError, SaturationError
from .._kernels import counts as kc
from .._kernels.matrix import mirror_upper, pairs_before
from ..matrix import DistanceMatrix, as_float_dtype
from ..progress import Progress
from . import likelihood as lik
from . import nucleotide as nuc
from . import protein as prot
from .counts import count_dict, iter_count_blocks, pack, state_frequencies

__all__ = ["distance_matrix", "check_settings", "MODELS", "Model"]


#: A distance formula: ``f(c, pi, gamma) -> d`` over the pair counts ``c`` of m pairs, the base
#: frequencies ``pi`` ((4,) or (m, 4); None where the model does not use them) and the gamma shape (or None).
Formula = Callable[[Mapping[str, NDArray[Any]], Any, Optional[float]], NDArray[np.float64]]


@dataclass(frozen=True)
class Model:
    """A substitution model: its name, alphabet, formula and what the formula needs."""

    name: str
    alphabet: Alphabet
    formula: Optional[Formula]  # None for the models computed by likelihood
    counts: int              # which pair counts the formula needs (_kernels.counts constants)
    uses_freqs: bool
    gamma: bool
    summary: str
    citation: str
    likelihood: bool = False  # each pair's distance by maximum likelihood (distances/likelihood.py)


MODELS: dict[str, Model] = {m.name: m for m in [
    Model("p", "dna", nuc.p_distance, kc.IDENTITY, False, False,
          "proportion of differing sites, uncorrected", "Jukes & Cantor 1969"),
    Model("jc69", "dna", nuc.jc69, kc.IDENTITY, False, True,
          "equal rates and base frequencies", "Jukes & Cantor 1969; gamma: Jin & Nei 1990"),
    Model("k2p", "dna", nuc.k2p, kc.TRANSITIONS, False, True,
          "transitions and transversions at different rates", "Kimura 1980; gamma: Jin & Nei 1990"),
    Model("f81", "dna", nuc.f81, kc.IDENTITY, True, True,
          "equal rates, unequal base frequencies", "Felsenstein 1981"),
    Model("f84", "dna", nuc.f84, kc.TRANSITIONS, True, False,
          "transition bias and unequal base frequencies", "Felsenstein & Churchill 1996"),
    Model("t92", "dna", nuc.t92, kc.TRANSITIONS, True, False,
          "transition bias and G+C content bias", "Tamura 1992"),
    Model("tn93", "dna", nuc.tn93, kc.TRANSITIONS, True, True,
          "two transition rates, unequal base frequencies", "Tamura & Nei 1993"),
    Model("logdet", "dna", nuc.logdet, kc.FULL, False, False,
          "robust to base composition differing between lineages", "Lockhart, Steel, Hendy & Penny 1994"),
    Model("paralinear", "dna", nuc.paralinear, kc.FULL, False, False,
          "LogDet scaled by each sequence's composition", "Lake 1994"),
    Model("gtr", "dna", None, kc.FULL, True, True, "general reversible rates estimated from the alignment; "
          "maximum likelihood", "Tavaré 1986; rates: Waddell & Steel 1997", True),
    Model("hky", "dna", None, kc.FULL, True, True, "transition/transversion ratio and base frequencies "
          "estimated from the alignment; maximum likelihood", "Hasegawa, Kishino & Yano 1985", True),
    Model("protein-p", "protein", nuc.p_distance, kc.IDENTITY, False, False,
          "proportion of differing residues, uncorrected", "common practice"),
    Model("poisson", "protein", prot.poisson, kc.IDENTITY, False, True,
          "equal rates among amino acids", "Zuckerkandl & Pauling 1965"),
    Model("kimura", "protein", prot.kimura_protein, kc.IDENTITY, False, False,
          "Kimura's approximation for protein", "Kimura 1983"),
    Model("jtt", "protein", None, kc.IDENTITY, True, True, "empirical amino-acid replacement rates; maximum "
          "likelihood", "Jones, Taylor & Thornton 1992", True),
    Model("wag", "protein", None, kc.IDENTITY, True, True, "empirical amino-acid replacement rates; maximum "
          "likelihood", "Whelan & Goldman 2001", True),
    Model("lg", "protein", None, kc.IDENTITY, True, True, "empirical amino-acid replacement rates; maximum "
          "likelihood", "Le & Gascuel 2008", True),
    Model("dcmut", "protein", None, kc.IDENTITY, True, True, "Dayhoff's replacement rates (DCMut form); "
          "maximum likelihood", "Kosiol & Goldman 2005", True),
]}

#: The model each alphabet gets when none is named.
DEFAULT_MODELS: dict[str, str] = {"dna": "k2p", "protein": "lg"}

MAX_LISTED = 10
# Models whose formula gives 0 for two identical sequences whatever the base
# frequencies; LogDet (-1/4 ln det F - ln 4, Lockhart et al. 1994) does not.
ZERO_WHEN_IDENTICAL = frozenset(MODELS) - {"logdet"}


def resolve_model(model: str | None, alphabet: str, source: str | None = None) -> Model:
    """The :class:`Model` for a name, checked against the data's alphabet.

    ``p`` means the protein p-distance on protein data; None the alphabet's
    default (:data:`DEFAULT_MODELS`: k2p for DNA, lg for protein).
    """
    key = DEFAULT_MODELS.get(alphabet, "k2p") if model is None else str(model).lower()
    if key == "p" and alphabet == "protein":
        key = "protein-p"
    if key not in MODELS:
        names = ", ".join(n for n in MODELS if n != "protein-p")
        raise InputError(f"unknown model {model!r}; choose one of {names}", source=source)
    spec = MODELS[key]
    if spec.alphabet != alphabet:
        fit = ", ".join(n if n != "protein-p" else "p" for n, m in MODELS.items() if m.alphabet == alphabet)
        raise InputError(f"model {model!r} is for {spec.alphabet} but the alignment is {alphabet}; "
                         f"choose one of {fit} (or alphabet=\"{spec.alphabet}\" if the alphabet was misdetected)",
                         source=source)
    return spec


def check_settings(alignment: Alignment, model: str | None, gamma: float | None, gaps: str, freqs: str | None,
                   gamma_categories: int | None, saturated: str = "error"
                   ) -> tuple[Model, float | None, str, int | None]:
    """Check an alignment and a model's settings as :func:`distance_matrix` takes them (the tiled store
    takes the same).

    Returns
    -------
    spec, gamma, freqs, gamma_categories
        The model, the gamma shape as a float (or None), the frequency source (its default filled in:
        "model" for the protein likelihood models, "alignment" otherwise) and the number of discrete
        gamma categories.

    Raises
    ------
    InputError
        Naming the parameter and the values it takes.
    """
    if not isinstance(alignment, Alignment):
        raise InputError(f"alignment is {type(alignment).__name__}, not an Alignment; read one with "
                         "read_alignment(path)")
    source = alignment.source
    spec = resolve_model(model, alignment.alphabet, source)
    if gamma is not None:
        gamma = _gamma_shape(gamma, source)
        if not spec.gamma:
            with_gamma = ", ".join(n for n, m in MODELS.items() if m.gamma)
            raise InputError(f"model {spec.name} has no gamma form; set gamma=None or choose one of {with_gamma}",
                             source=source)
    if not isinstance(gaps, str) or gaps not in GAP_MODES:
        raise InputError(f"unknown gap mode gaps={gaps!r}; choose gaps=\"pairwise\" or \"complete\"", source=source)
    if freqs is None:
        freqs = "model" if spec.likelihood and spec.alphabet == "protein" else "alignment"
    if not isinstance(freqs, str) or freqs not in FREQ_MODES:
        raise InputError(f"unknown base-frequency source freqs={freqs!r}; choose freqs=\"alignment\", \"pair\" "
                         "or \"model\"", source=source)
    if freqs == "model" and spec.uses_freqs and not (spec.likelihood and spec.alphabet == "protein"):
        raise InputError(f"freqs=\"model\" is for the protein models jtt, wag, lg and dcmut; for {spec.name} "
                         "choose freqs=\"alignment\"" + ("" if spec.likelihood else " or \"pair\""),
                         source=source)
    if gamma_categories is not None:
        gamma_categories = lik.check_categories(gamma_categories, gamma, spec.likelihood, source)
    if not isinstance(saturated, str) or saturated not in SATURATED_MODES:
        raise InputError(f"unknown saturation rule saturated={saturated!r}; choose saturated=\"error\" or "
                         "\"cap\"", source=source)
    return spec, gamma, freqs, gamma_categories


def distance_matrix(alignment: Alignment, model: str | None = None, gamma: float | None = None,
                    gaps: str = "pairwise", freqs: str | None = None, *, saturated: str = "error",
                    weights: ArrayLike | None = None, dtype: DTypeLike = np.float64, serial: bool = False,
                    progress: bool = False, gamma_categories: int | None = None) -> DistanceMatrix:
    """All pairwise distances of an alignment under a substitution model.

    Parameters
    ----------
    alignment : Alignment
    model : str, optional
        One of :data:`MODELS` (``p``, ``jc69``, ``k2p``, ``f81``, ``f84``,
        ``t92``, ``tn93``, ``logdet``, ``paralinear``, and by maximum
        likelihood ``gtr``, ``hky``; protein ``p``, ``poisson``, ``kimura``,
        and by maximum likelihood ``jtt``, ``wag``, ``lg``, ``dcmut``).
        Default: k2p for DNA, lg for protein.
    gamma : float, optional
        Shape alpha > 0 (finite) of the gamma distribution of rates across
        sites, for jc69, k2p, f81, tn93, poisson and the likelihood models;
        None for equal rates (the limit as alpha grows without bound).
    gaps : {"pairwise", "complete"}
        ``pairwise``: each pair uses the sites where both sequences are
        unambiguous; ``complete``: only the sites unambiguous in every sequence.
    freqs : {"alignment", "pair", "model"}, optional
        Base frequencies for f81, f84, t92 and tn93: from every unambiguous
        state of the sites in use, or from the two sequences compared; for
        jtt, wag, lg and dcmut, the model's own amino-acid frequencies
        ("model") or the alignment's. Default: "model" for those four,
        "alignment" for the others (gtr and hky take only "alignment").
    saturated : {"error", "cap"}
        What to do with pairs whose distance is undefined (a logarithm's
        argument <= 0): stop with an error naming them, or replace them with
        a cap, twice the largest defined distance (at least 1), and count them
        in ``info["saturated"]``.
    weights : int array (S,), optional
        A whole, non-negative weight per site pattern (a bootstrap
        replicate); default: the pattern counts of the alignment.
    dtype : numpy dtype
        float64, or float32 to halve the memory of very large matrices.
    serial : bool
        Count on the calling thread only (for runs that are already parallel
        across bootstrap replicates).
    progress : bool
        A progress line with the time left on stderr, when it is a terminal
        (worth it from some thousands of taxa).
    gamma_categories : int, optional
        With ``gamma`` and a likelihood model: k equal-probability
        categories of discrete gamma rates (Yang 1994) in place of the
        continuous gamma distribution.

    Returns
    -------
    DistanceMatrix

    Raises
    ------
    InputError
        For a parameter outside the values above (naming it), or data the
        model cannot use; :class:`SaturationError` for undefined distances
        with ``saturated="error"``.

    References
    ----------
    See :mod:`cladewright.distances.nucleotide` and :mod:`.protein` for each
    formula, and :mod:`.likelihood` for the likelihood models.

    Examples
    --------
    >>> from cladewright.alignment import Alignment, encode
    >>> aln = Alignment(["a", "b"], encode(["a", "b"], ["ACGTACGTAC", "ACGTACGTAA"], "dna", "x"), "dna")
    >>> round(float(distance_matrix(aln, "p").values[0, 1]), 3)
    0.1
    """
    spec, gamma, freqs, gamma_categories = check_settings(alignment, model, gamma, gaps, freqs, gamma_categories,
                                                          saturated)
    src = alignment.source
    dtype = as_float_dtype(dtype, src)
    n = alignment.n_taxa
    if n < 2:
        raise InputError(f"the alignment has {n} sequence(s); distances need at least two: add sequences",
                         source=src)

    if weights is None and spec.name in ZERO_WHEN_IDENTICAL:
        # Identical sequences are counted once and their rows copied: a
        # group of identical sequences costs what one sequence costs.
        distinct, group = distinct_sequences(alignment)
        if distinct is not alignment and distinct.n_taxa >= 2:
            try:
                return _expanded(distance_matrix(distinct, spec.name, gamma, gaps, freqs, saturated=saturated,
                                                 dtype=dtype, serial=serial, progress=progress,
                                                 gamma_categories=gamma_categories),
                                 alignment.names, group)
            except InputError:
                pass  # computed again on every row below, so that the message names every pair

    k = alignment.n_states
    patterns = alignment.patterns
    weights = alignment.weights if weights is None else _pattern_weights(weights, alignment.n_patterns, src)
    use = None
    if gaps == "complete":
        use = np.all(patterns < k, axis=0)
        if not np.any(use & (weights > 0)):
            raise InputError("no site is unambiguous in every sequence, so complete deletion leaves nothing; "
                             "use gaps=\"pairwise\"", source=src)

    fitted = None
    if spec.likelihood:
        fitted = lik.model_for(spec.name, patterns, weights, use, alignment.multiplicity, freqs, gamma,
                               gamma_categories, src)
        blocks = lik.likelihood_blocks(fitted, patterns, weights, use, serial)
        n_sites = int(weights[(weights > 0) if use is None else (weights > 0) & use].sum())
    else:
        kind = spec.counts
        pi = None
        if spec.uses_freqs:
            if freqs == "pair":
                kind = kc.COMPOSITION
            else:
                pi = state_frequencies(patterns, weights, k, use, alignment.multiplicity)
                _check_frequencies(spec, pi, src)
        packed = pack(patterns, weights, k, use)
        n_sites = int(packed.n_sites)
        blocks = _formula_blocks(spec, packed, kind, pi, gamma, serial)
    values = np.zeros((n, n), dtype=dtype)
    undefined: list[tuple[int, int]] = []
    empty: list[tuple[int, int]] = []
    n_undefined = 0
    with np.errstate(all="ignore"), Progress("distances", n * (n - 1) // 2, enabled=progress) as bar:
        for r0, d, shared in blocks:
            no_sites = shared == 0
            if no_sites.any():
                empty.extend(_pairs_at(no_sites, r0, n, 1))
                break
            bad = ~np.isfinite(d)
            if bad.any():
                n_undefined += int(bad.sum())
                if len(undefined) < MAX_LISTED:
                    undefined.extend(_pairs_at(bad, r0, n, MAX_LISTED - len(undefined)))
            kc.put_pairs(values, r0, d.astype(dtype, copy=False))
            bar.advance(d.shape[0])
    names = alignment.names
    if empty:
        i, j = empty[0]
        raise InputError(f"sequences {names[i]!r} and {names[j]!r} share no unambiguous site, so their "
                         "distance is undefined; remove one of them or trim the alignment", source=src)
    info: dict[str, Any] = {"model": spec.name, "gamma": gamma, "gaps": gaps,
                            "freqs": freqs if spec.uses_freqs else None, "sites_used": n_sites,
                            "saturated": 0, "cap": None}
    if fitted is not None:
        info.update(fitted.info, gamma_categories=gamma_categories)
    if n_undefined:
        listed = "; ".join(f"{names[i]}-{names[j]}" for i, j in undefined)
        more = f" and {n_undefined - len(undefined)} more" if n_undefined > len(undefined) else ""
        why = (f"saturated: the likelihood still rises at distance {fitted.t_max:.3g}" if fitted is not None else
               "saturated: a logarithm's argument <= 0" if not (spec.uses_freqs or spec.counts == kc.FULL) else
               "saturated, or a base the model needs is absent: a logarithm's argument <= 0")
        if saturated == "error":
            raise SaturationError(
                f"model {spec.name}: distance undefined ({why}) for "
                f"{n_undefined} pair(s): {listed}{more}; choose a model that saturates later (e.g. p) or pass "
                "saturated=\"cap\" to set them to a cap and go on", undefined, source=src)
        finite = values[np.isfinite(values)]
        cap = max(1.0, 2.0 * float(finite.max()) if finite.size else 1.0)
        values[~np.isfinite(values)] = cap
        info.update(saturated=n_undefined, cap=cap, saturated_pairs=[(names[i], names[j]) for i, j in undefined])
    mirror_upper(values)
    return DistanceMatrix._adopt(names, values, info=info)


def _formula_blocks(spec: Model, packed: Any, kind: int, pi: Any, gamma: float | None,
                    serial: bool) -> Iterator[tuple[int, NDArray[np.float64], NDArray[np.int64]]]:
    """``(r0, d, shared)`` per block of rows: the model's formula on the counting engine's counts."""
    assert spec.formula is not None  # the closed-form models
    for r0, _, block in iter_count_blocks(packed, kind, serial=serial):
        c = count_dict(block, kind, serial)
        pair_pi = pi
        if kind == kc.COMPOSITION:
            pair_pi = (c["comp_i"] + c["comp_j"]) / (2.0 * c["shared"][:, None])
        d = spec.formula(c, pair_pi, gamma)
        if spec.name in ZERO_WHEN_IDENTICAL:
            # A pair with no difference is at distance 0 in these models
            # (every log term is ln 1 = 0), even where a frequency term
            # is 0/0 (a base absent from a constant alignment).
            d = np.where(c["same"] == c["shared"], 0.0, d)
        yield r0, d + 0.0, c["shared"]  # + 0.0: -0.0 (from -ln 1) would be written as '-0.0'


def _gamma_shape(gamma: float, source: str | None) -> float:
    """The gamma shape as a float, or an error naming ``gamma``."""
    ok = isinstance(gamma, numbers.Real) and not isinstance(gamma, bool)
    if not (ok and math.isfinite(gamma) and gamma > 0):
        raise InputError(f"gamma shape {gamma!r} must be a positive number (a finite alpha > 0, e.g. 0.5; "
                         "gamma=None for equal rates)", source=source)
    return float(gamma)


def _pattern_weights(weights: ArrayLike, n_patterns: int, source: str | None) -> NDArray[np.int64]:
    """Whole, non-negative weights, one per site pattern (int64): a float
    weight would otherwise be truncated without a word."""
    try:
        w = np.asarray(weights)
    except (TypeError, ValueError):
        w = np.asarray(None)
    if w.shape != (n_patterns,) or w.dtype.kind not in "iuf" or (w.dtype.kind == "f" and not
                                                                  np.all(np.isfinite(w) & (w == np.round(w)))):
        raise InputError(f"weights must be {n_patterns} whole numbers, one per site pattern (got {w.dtype} of "
                         f"shape {w.shape}); give a count for each column of alignment.patterns", source=source)
    if np.any(w < 0):
        raise InputError("weights must be >= 0 (a site pattern's count in the replicate)", source=source)
    return w.astype(np.int64)


def _expanded(dm: DistanceMatrix, names: tuple[str, ...], group: NDArray[np.int64]) -> DistanceMatrix:
    """The matrix over every sequence from the matrix of the distinct ones."""
    values = dm.values[np.ix_(group, group)]
    info = dict(dm.info)
    sizes = np.bincount(group)
    info["identical_groups"] = int(np.count_nonzero(sizes > 1))
    info["identical_sequences"] = int(sizes[sizes > 1].sum())
    if info.get("saturated"):
        # every copy of a saturated pair is saturated; only they hold the cap
        info["saturated"] = int(np.count_nonzero(np.triu(values == info["cap"], 1)))
    return DistanceMatrix._adopt(names, values, info=info)  # values is a new array: no second copy


def _pairs_at(flags: NDArray[np.bool_], r0: int, n: int, limit: int) -> list[tuple[int, int]]:
    """(i, j) of the first ``limit`` flagged pairs of a block that starts at row r0."""
    offset = pairs_before.py_func  # the same formula, on numpy arrays
    hit = np.flatnonzero(flags)[:limit] + offset(r0, n)
    # The row i of condensed index p is the largest i with pairs_before(i) <= p.
    rows = np.arange(r0, n)
    i = rows[np.searchsorted(offset(rows, n), hit, side="right") - 1]
    j = hit - offset(i, n) + i + 1
    return [(int(a), int(b)) for a, b in zip(i, j)]


def _check_frequencies(spec: Model, pi: NDArray[np.float64], source: str | None) -> None:
    if not np.all(np.isfinite(pi)):
        raise InputError("no unambiguous base to estimate base frequencies from; check the alignment",
                         source=source)
    need_all = spec.name in ("tn93", "f84")
    if need_all and np.any(pi <= 0):
        absent = "ACGT"[int(np.flatnonzero(pi <= 0)[0])]
        raise InputError(f"base {absent} never occurs, so model {spec.name} is undefined; choose k2p or jc69",
                         source=source)
