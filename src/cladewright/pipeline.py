"""From an alignment to a tree, with identical sequences entered once.

Identical sequences (same state at every site) have the same distance to
every other sequence, and zero between them, under every model but LogDet.
They are found first, the distances and the tree are computed for the
distinct sequences only (UPGMA weighting each by the size of its group, so
its averages are those of the full data), and each group comes back as a
polytomy of zero-length leaves. Then every branch of length zero is
contracted: a branch of length zero separates nothing the data tell apart.

References
----------
Sokal & Michener (1958) Univ. Kansas Sci. Bull. 38:1409–1438 (UPGMA's
size-weighted averages).
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any, Sequence

import numpy as np
from numpy.typing import ArrayLike, DTypeLike, NDArray

from .alignment import distinct_sequences
from .build import build_tree_with_info
from .choices import LINKAGE_METHODS, METHODS
from .distances import ZERO_WHEN_IDENTICAL, distance_matrix, resolve_model
from .errors import CladewrightWarning
from .polytomies import ZERO_TOLERANCE, attach_identical, collapse_zero_branches

if TYPE_CHECKING:
    from .alignment import Alignment
    from .build.criteria import LengthCriterion
    from .matrix import DistanceMatrix
    from .tree import Tree

__all__ = ["tree_from_alignment", "distinct_tree", "split_identical", "finish_tree", "zero_tolerance",
           "identical_info", "run_warnings", "few_distinct_tree", "LITTLE_DATA"]

#: Sequences with unambiguous states at fewer than this share of the sites are warned about.
LITTLE_DATA = 0.5
#: Saturated pairs and sequences with little data named in a warning at most.
LISTED = 10


def zero_tolerance(dtype: DTypeLike) -> float:
    """How close to zero, relative to the longest branch, a length counts
    as zero: rounding in float32 matrices reaches about 1e-7 of a distance."""
    return 1e-6 if np.dtype(dtype) == np.float32 else ZERO_TOLERANCE


def split_identical(alignment: Alignment, model: str | None) -> tuple[Alignment, NDArray[np.int64]]:
    """The alignment to compute on, and the row of it that stands for each sequence.

    Parameters
    ----------
    alignment : Alignment
    model : str
        Identical sequences are merged for every model that puts them at
        distance zero; LogDet does not, so there they stay apart.

    Returns
    -------
    distinct : Alignment
    group : int64 ndarray (n,)
    """
    spec = resolve_model(model, alignment.alphabet, alignment.source)
    if spec.name not in ZERO_WHEN_IDENTICAL:
        return alignment, np.arange(alignment.n_taxa, dtype=np.int64)
    return distinct_sequences(alignment)


def finish_tree(tree: Tree, names: Sequence[str], group: ArrayLike, tolerance: float = ZERO_TOLERANCE) -> Tree:
    """Groups of identical sequences put back as polytomies, and branches
    of length zero contracted (see :mod:`cladewright.polytomies`)."""
    return collapse_zero_branches(attach_identical(tree, names, group), tolerance)


def identical_info(group: NDArray[np.int64]) -> dict[str, int]:
    """How many groups of two or more identical sequences, and how many sequences they hold."""
    sizes = np.bincount(group) if group.size else np.zeros(0, np.int64)
    return {"identical_groups": int(np.count_nonzero(sizes > 1)),
            "identical_sequences": int(sizes[sizes > 1].sum())}


def tree_from_alignment(alignment: Alignment, model: str | None = None, method: str = "nj", *,
                        gamma: float | None = None, gaps: str = "pairwise", freqs: str | None = None,
                        saturated: str = "error", negative: str = "zero", dtype: DTypeLike = np.float64,
                        progress: bool = False, refine: str | None = None, criterion: LengthCriterion | None = None,
                        gamma_categories: int | None = None) -> tuple[Tree, dict[str, Any], DistanceMatrix]:
    """Distances and a tree for an alignment, identical sequences entered once.

    Parameters
    ----------
    alignment : Alignment
    model, gamma, gaps, freqs, saturated, gamma_categories : see :func:`cladewright.distance_matrix`
    method, negative, refine, criterion : see :func:`cladewright.build_tree`
    dtype : numpy dtype
        float64, or float32 for half the memory.
    progress : bool
        A progress line for the distances on a terminal.

    Returns
    -------
    tree : Tree
        Over every sequence; groups of identical sequences as polytomies of
        zero-length leaves, branches of length zero contracted.
    info : dict
        As :func:`cladewright.build_tree_with_info`, the distance matrix's
        facts, ``identical_groups``, ``identical_sequences``, ``negative``,
        and ``warnings`` (see :func:`run_warnings`).
    dm : DistanceMatrix
        The distances of the distinct sequences (one row per group, named
        after its first sequence).

    Examples
    --------
    >>> from cladewright.alignment import Alignment, encode
    >>> seqs = ["ACGTACGTAA", "ACGTACGTAA", "ACGTTCGTAC", "TCGTACCTAC"]
    >>> aln = Alignment("abcd", encode("abcd", seqs, "dna", "x"), "dna")
    >>> tree, info, dm = tree_from_alignment(aln, "p", "upgma")
    >>> info["identical_groups"], dm.names
    (1, ('a', 'c', 'd'))
    >>> tree.to_newick(digits=3)
    '(((a:0,b:0):0.1,c:0.1):0.05,d:0.15);\\n'
    """
    distinct, group = split_identical(alignment, model)
    tree, info, dm = distinct_tree(distinct, model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                   saturated=saturated, negative=negative, dtype=dtype, progress=progress,
                                   n_sequences=alignment.n_taxa, refine=refine, criterion=criterion,
                                   gamma_categories=gamma_categories)
    info.update(identical_info(group), negative=negative)
    info["warnings"] = run_warnings(info, alignment)
    return finish_tree(tree, alignment.names, group, zero_tolerance(dtype)), info, dm


def distinct_tree(distinct: Alignment, model: str | None, method: str, *, gamma: float | None = None,
                  gaps: str = "pairwise", freqs: str | None = None, saturated: str = "error",
                  negative: str = "zero", dtype: DTypeLike = np.float64, weights: ArrayLike | None = None,
                  fit: bool = True, serial: bool = False, progress: bool = False, n_sequences: int | None = None,
                  refine: str | None = None, criterion: LengthCriterion | None = None,
                  gamma_categories: int | None = None) -> tuple[Tree, dict[str, Any], DistanceMatrix]:
    """Distances and the tree of the distinct sequences (see :func:`split_identical`).

    Parameters
    ----------
    distinct : Alignment
        Rows with their ``multiplicity``.
    weights : int array, optional
        Site-pattern weights of a bootstrap replicate.
    fit, serial, progress :
        Compute the fit statistic; count on this thread only; show progress.
    refine, criterion : see :func:`cladewright.build_tree`
    n_sequences : int, optional
        How many sequences the rows stand for; with three or more of them
        but fewer than three distinct, the tree is a star or one branch
        whatever the method.

    Returns
    -------
    tree, info, dm
    """
    n_sequences = distinct.n_taxa if n_sequences is None else n_sequences
    if distinct.n_taxa < 3 <= n_sequences:
        return _few_distinct(distinct, model, gamma, gaps, freqs, saturated, method, dtype, weights,
                             gamma_categories)
    dm = distance_matrix(distinct, model, gamma, gaps, freqs, saturated=saturated, weights=weights, dtype=dtype,
                         serial=serial, progress=progress, gamma_categories=gamma_categories)
    tree, info = build_tree_with_info(dm, method, negative, sizes=distinct.multiplicity, source=distinct.source,
                                      fit=fit, refine=refine, criterion=criterion)
    info.update(dm.info)
    return tree, info, dm


def _few_distinct(distinct: Alignment, model: str | None, gamma: float | None, gaps: str, freqs: str | None,
                  saturated: str, method: str, dtype: DTypeLike, weights: ArrayLike | None,
                  gamma_categories: int | None = None) -> tuple[Tree, dict[str, Any], DistanceMatrix]:
    """The tree of one or two distinct sequences (their groups added later)."""
    from .matrix import DistanceMatrix

    m = str(method).lower()
    if m not in METHODS:
        build_tree_with_info(DistanceMatrix("abc", np.zeros((3, 3))), method)  # raises the usual error
    names = distinct.names
    if distinct.n_taxa == 1:
        dm = DistanceMatrix(names, np.zeros((1, 1), dtype=dtype), validate=False, dtype=dtype,
                            info={"model": resolve_model(model, distinct.alphabet).name, "gamma": gamma,
                                  "gaps": gaps, "freqs": None, "saturated": 0, "cap": None})
    else:
        dm = distance_matrix(distinct, model, gamma, gaps, freqs, saturated=saturated, weights=weights,
                             dtype=dtype, gamma_categories=gamma_categories)
    tree, info = few_distinct_tree(names, dm.values, m)
    info.update(dm.info)
    return tree, info, dm


def few_distinct_tree(names: Sequence[str], values: NDArray[np.floating], method: str
                      ) -> tuple[Tree, dict[str, Any]]:
    """The tree of one or two distinct sequences (``values`` their 1 x 1 or 2 x 2 distances): a
    single leaf, or one branch halved, rooted for a linkage method; their groups are added later."""
    from .tree import Tree

    m = str(method).lower()
    if len(names) == 1:
        tree = Tree([-1], [np.nan], names, rooted=m in LINKAGE_METHODS)
    else:
        half = float(values[0, 1]) / 2.0
        tree = Tree([2, 2, -1], [half, half, np.nan], names, rooted=m in LINKAGE_METHODS)
    return tree, {"method": m, "negative_branches": 0, "fit_name": None, "fit_value": None}


def run_warnings(info: dict[str, Any], alignment: Alignment | None = None) -> list[CladewrightWarning]:
    """What a user should know about a run whose result stands, one record per kind.

    Parameters
    ----------
    info : dict
        The facts of a run, as :func:`tree_from_alignment`, :func:`cladewright.bootstrap`
        or :func:`cladewright.build_tree_with_info` (with the distance matrix's ``info``)
        return them: ``saturated``, ``cap``, ``saturated_pairs``, ``rates_fallback``, ``replicates_capped``,
        ``replicates``, ``negative_branches``, ``negative``. Absent facts give no warning.
    alignment : Alignment, optional
        Sequences with unambiguous states at fewer than :data:`LITTLE_DATA` of its
        sites are warned about.

    Returns
    -------
    list of CladewrightWarning
        In the order of :data:`cladewright.choices.WARNING_KINDS`, at most one of each
        kind. Identical sequences are not a warning: they are facts of the run
        (``identical_groups``).

    Examples
    --------
    >>> [w.message for w in run_warnings({"negative_branches": 2, "negative": "keep"})]
    ['2 negative branch length(s) kept as computed']
    """
    found = []
    saturated = info.get("saturated") or 0
    if saturated:
        pairs = list(info.get("saturated_pairs") or [])[:LISTED]
        shown = "; ".join(f"{a} – {b}" for a, b in pairs)
        if shown and saturated > len(pairs):
            shown += f" and {saturated - len(pairs)} more"
        cap = info.get("cap")
        found.append(CladewrightWarning("saturated", f"{saturated} saturated pair(s): distance undefined under "
                                        "the model" + (f", set to {cap:.6g}" if cap is not None else "")
                                        + (f" ({shown})" if shown else "")))
    if info.get("rates_fallback"):
        found.append(CladewrightWarning("rates_fallback", f"the {info.get('model', 'model')} rates could not be "
                                        "estimated from this alignment (the logarithm of its pooled divergence "
                                        "matrix is undefined: the sequences are too far apart); equal rates were "
                                        "used"))
    capped = info.get("replicates_capped") or 0
    if capped:
        found.append(CladewrightWarning("replicates_capped", f"{capped} of {info.get('replicates')} bootstrap "
                                        "replicates drew sites that saturate a pair; those pairs were capped "
                                        '(as saturated="cap" does)'))
    negative = info.get("negative_branches") or 0
    if negative:
        rule = "kept as computed" if info.get("negative") == "keep" else "set to zero"
        found.append(CladewrightWarning("negative_lengths", f"{negative} negative branch length(s) {rule}"))
    if alignment is not None and alignment.n_sites:
        share = (alignment.states < alignment.n_states).mean(axis=1)
        low = np.flatnonzero(share < LITTLE_DATA)
        low = low[np.argsort(share[low], kind="stable")]
        if low.size:
            first = int(low[0])
            text = (f"sequence {alignment.names[first]} has unambiguous states at only {100 * share[first]:.0f}% "
                    f"of the {alignment.n_sites} sites")
            if low.size > 1:
                others = ", ".join(f"{alignment.names[i]} ({100 * share[i]:.0f}%)" for i in low[1:LISTED].tolist())
                more = f" and {low.size - LISTED} more" if low.size > LISTED else ""
                text += f"; {low.size - 1} more have under {100 * LITTLE_DATA:.0f}%: {others}{more}"
            found.append(CladewrightWarning("little_data", text))
    return found
