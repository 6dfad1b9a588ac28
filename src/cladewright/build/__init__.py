"""Trees from distance matrices: linkage (UPGMA, WPGMA, single, complete),
neighbour joining, BIONJ and greedy balanced minimum evolution, refined by
nearest-neighbour interchanges or subtree pruning and regrafting.

References
----------
Lance & Williams (1967) Computer Journal 9:373–380; Sokal & Michener (1958);
Saitou & Nei (1987) Mol. Biol. Evol. 4:406–425; Studier & Keppler (1988)
Mol. Biol. Evol. 5:729–731; Gascuel (1997) Mol. Biol. Evol. 14:685–695;
Desper & Gascuel (2002) J. Comput. Biol. 9:687–705; Hordijk & Gascuel (2005)
Bioinformatics 21:4338–4347.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..choices import METHODS, NEGATIVE_RULES as NEGATIVE
from ..errors import InputError
from .._kernels.matrix import first_non_finite
from .criteria import LengthCriterion
from .fit import fit_statistic
from .insertion import insertion_arrays
from .linkage import LINKAGE_METHODS, linkage_arrays
from .nj import nj_arrays
from .search import refine_tree, refine_tree_with_info, refinement_name

if TYPE_CHECKING:
    from ..matrix import DistanceMatrix
    from ..tree import Tree

__all__ = ["METHODS", "LINKAGE_METHODS", "build_tree", "build_tree_with_info", "fit_statistic",
           "linkage_arrays", "nj_arrays", "zero_negative", "insertion_arrays", "refine_tree", "refine_tree_with_info"]

# METHODS (every method name build_tree accepts) and NEGATIVE (the negative-length rules) are
# cladewright.choices' vocabularies, named here as the package has always named them.


def build_tree_with_info(dm: DistanceMatrix, method: str = "nj", negative: str = "zero", *, source: str | None = None,
                         fit: bool = True, sizes: ArrayLike | None = None, refine: str | None = None,
                         criterion: LengthCriterion | None = None) -> tuple[Tree, dict[str, Any]]:
    """Build a tree and report on it.

    Parameters
    ----------
    dm : cladewright.matrix.DistanceMatrix
        Names and distances (float64 or float32); not modified.
    method : str
        One of :data:`METHODS` (case-insensitive). Linkage methods give a
        rooted ultrametric tree; nj, bionj and bme (greedy balanced minimum
        evolution insertion, Desper & Gascuel 2002) an unrooted tree with a
        basal trifurcation.
    negative : {"zero", "keep"}
        What to do with negative branch lengths of the unrooted methods: set
        them to zero (default) or keep them. Linkage trees never have any.
    source : str, optional
        File name to put in error messages.
    fit : bool
        Compute the fit statistic (an O(n^2) pass over the path lengths);
        without it ``fit_name`` and ``fit_value`` are None.
    sizes : int array_like (n,), optional
        How many sequences each taxon of ``dm`` stands for (a group of
        identical sequences entered once); UPGMA weights its averages by
        them. The other methods do not use them.
    refine : {None, "none", "nni", "spr"}
        Nearest-neighbour interchanges, or subtree pruning and regrafting
        (BME only), from the nj, bionj or bme tree to a local optimum of
        ``criterion`` (:func:`cladewright.build.search.refine_tree`).
    criterion : {"bme", "ols"}, optional
        The criterion of the search and of the branch lengths of refined and
        bme trees (default "bme": balanced NNI and BME lengths; "ols":
        FastNNI and OLS lengths). Only for those trees.

    Returns
    -------
    tree : cladewright.tree.Tree
    info : dict
        ``negative_branches`` (int, how many computed lengths were < 0, before
        any zeroing), ``fit_name`` and ``fit_value`` (see :func:`fit_statistic`),
        ``method``, ``refine`` ("none", "nni" or "spr"), ``criterion`` (None for nj
        and bionj trees left as built and linkage trees), ``length_before``
        and ``length_after`` (the criterion's tree length of the start and of
        the refined tree, before any zeroing; None without a criterion),
        ``moves`` (interchanges or regrafts made).

    References
    ----------
    See :mod:`cladewright.build.linkage`, :mod:`cladewright.build.nj`,
    :mod:`cladewright.build.insertion` and :mod:`cladewright.build.search`.
    """
    from ..matrix import DistanceMatrix
    from ..tree import Tree

    if not isinstance(dm, DistanceMatrix):
        # A bare array has no names, and only a DistanceMatrix has been checked.
        raise InputError(f"dm is {type(dm).__name__}, not a DistanceMatrix; wrap the array as "
                         "DistanceMatrix(names, values)", source=source)
    m = str(method).lower() if isinstance(method, str) else None
    if m not in METHODS:
        raise InputError(f"unknown tree method method={method!r}; choose one of {', '.join(METHODS)}",
                         source=source)
    if not isinstance(negative, str) or negative not in NEGATIVE:
        raise InputError(f"unknown negative-length rule negative={negative!r}; choose 'zero' or 'keep'",
                         source=source)
    r = refinement_name(refine, source=source)
    if m in LINKAGE_METHODS and r != "none":
        raise InputError(f'refine="{r}" needs an unrooted start and {m} gives a rooted tree; use an unrooted '
                         "method (nj, bionj, bme)", source=source)
    if criterion is not None and r == "none" and m != "bme":
        raise InputError(f'criterion="{criterion}" sets the lengths of refined and bme trees only; add '
                         'refine="nni", or drop criterion', source=source)
    names = tuple(dm.names)
    n = len(names)
    values = dm.values
    # Matrices made without validation (e.g. by the distance engine) could
    # still carry an undefined distance; the kernels need finite numbers.
    i, j = first_non_finite(values)
    if i >= 0:
        raise InputError(f"distance {names[i]!r}-{names[j]!r} is {float(values[i, j])!r}; every distance must be "
                         "finite (use a model that does not saturate, or drop the pair's taxa)", source=source)
    if m in LINKAGE_METHODS:
        if n < 2:
            raise InputError(f"{m} needs at least 2 taxa but the matrix has {n}; add taxa to the input",
                             source=source)
        parent, length, _ = linkage_arrays(values, m, sizes)
        rooted = True
    else:
        if n < 3:
            raise InputError(f"{m} needs at least 3 taxa but the matrix has {n}; add taxa or use a "
                             "linkage method (upgma, wpgma, single, complete)", source=source)
        if m == "bme":
            parent, length = insertion_arrays(values), None
        else:
            parent, length = nj_arrays(values, bionj=(m == "bionj"))
        rooted = False
    search: dict[str, Any] = {"refine": r, "criterion": None, "length_before": None, "length_after": None,
                              "moves": 0}
    if m == "bme" or r != "none":
        start = Tree(parent, np.full(parent.shape[0], np.nan) if length is None else length, names)
        found, search = refine_tree_with_info(start, dm, r, criterion or "bme", source=source)
        parent, length = np.array(found.parent), np.array(found.length)
        search = {key: search[key] for key in ("refine", "criterion", "length_before", "length_after", "moves")}
    assert length is not None
    n_neg = zero_negative(length, negative)
    tree = Tree(parent, length, names, rooted=rooted)
    fit_name = fit_value = None
    if fit:
        fit_name, fit_value = fit_statistic(tree, dm, method=m)
        if not np.isfinite(fit_value):
            # e.g. every distance zero, or fewer than three taxa: the
            # statistic has no value, and a summary must not print nan
            fit_value = None
    info = {"method": m, "negative_branches": n_neg, "fit_name": fit_name, "fit_value": fit_value, **search}
    return tree, info


def zero_negative(length: NDArray[np.float64], negative: str) -> int:
    """How many branch lengths are negative; with ``negative="zero"`` they are set to 0 in place."""
    neg = length < 0
    n_neg = int(np.count_nonzero(neg))
    if negative == "zero" and n_neg:
        length[neg] = 0.0
    return n_neg


def build_tree(dm: DistanceMatrix, method: str = "nj", negative: str = "zero", *, source: str | None = None,
               sizes: ArrayLike | None = None, refine: str | None = None,
               criterion: LengthCriterion | None = None) -> Tree:
    """Build a tree from a distance matrix (see :func:`build_tree_with_info`;
    the fit statistic is skipped here, so replicates pay only for the tree).

    Parameters
    ----------
    dm : cladewright.matrix.DistanceMatrix
    method : str
        upgma, wpgma, single, complete, nj (default), bionj or bme.
    negative : {"zero", "keep"}
    refine : {None, "none", "nni", "spr"}
        Nearest-neighbour interchanges, or subtree pruning and regrafting
        under BME, after an nj, bionj or bme start.
    criterion : {"bme", "ols"}, optional
        Criterion of the interchanges and lengths (default bme; see
        :func:`build_tree_with_info`).

    Returns
    -------
    cladewright.tree.Tree

    Example
    -------
    >>> from cladewright.matrix import DistanceMatrix
    >>> dm = DistanceMatrix("abc", [[0, 2, 4], [2, 0, 4], [4, 4, 0]])
    >>> float(build_tree(dm, "upgma").patristic()[0, 2])
    4.0

    References
    ----------
    Desper & Gascuel (2002) J. Comput. Biol. 9:687–705 (bme, refine="nni");
    Hordijk & Gascuel (2005) Bioinformatics 21:4338–4347 (refine="spr").
    """
    return build_tree_with_info(dm, method, negative, source=source, fit=False, sizes=sizes, refine=refine,
                                criterion=criterion)[0]
