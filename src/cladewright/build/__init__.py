"""Trees from distance matrices: linkage (UPGMA, WPGMA, single, complete),
neighbour joining and BIONJ.

References
----------
Lance & Williams (1967) Computer Journal 9:373–380; Sokal & Michener (1958);
Saitou & Nei (1987) Mol. Biol. Evol. 4:406–425; Studier & Keppler (1988)
Mol. Biol. Evol. 5:729–731; Gascuel (1997) Mol. Biol. Evol. 14:685–695.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike

from ..choices import METHODS, NEGATIVE_RULES as NEGATIVE
from ..errors import InputError
from .._kernels.matrix import first_non_finite
from .fit import fit_statistic
from .linkage import LINKAGE_METHODS, linkage_arrays
from .nj import nj_arrays

if TYPE_CHECKING:
    from ..matrix import DistanceMatrix
    from ..tree import Tree

__all__ = ["METHODS", "LINKAGE_METHODS", "build_tree", "build_tree_with_info", "fit_statistic",
           "linkage_arrays", "nj_arrays"]

# METHODS (every method name build_tree accepts) and NEGATIVE (the negative-length rules) are
# cladewright.choices' vocabularies, named here as the package has always named them.


def build_tree_with_info(dm: DistanceMatrix, method: str = "nj", negative: str = "zero", *, source: str | None = None,
                         fit: bool = True, sizes: ArrayLike | None = None) -> tuple[Tree, dict[str, Any]]:
    """Build a tree and report on it.

    Parameters
    ----------
    dm : cladewright.matrix.DistanceMatrix
        Names and distances (float64 or float32); not modified.
    method : str
        One of :data:`METHODS` (case-insensitive). Linkage methods give a
        rooted ultrametric tree; nj and bionj an unrooted tree with a basal
        trifurcation.
    negative : {"zero", "keep"}
        What to do with negative branch lengths from nj/bionj: set them to
        zero (default) or keep them. Linkage trees never have any.
    source : str, optional
        File name to put in error messages.
    fit : bool
        Compute the fit statistic (an O(n^2) pass over the path lengths);
        without it ``fit_name`` and ``fit_value`` are None.
    sizes : int array_like (n,), optional
        How many sequences each taxon of ``dm`` stands for (a group of
        identical sequences entered once); UPGMA weights its averages by
        them. The other methods do not use them.

    Returns
    -------
    tree : cladewright.tree.Tree
    info : dict
        ``negative_branches`` (int, how many computed lengths were < 0, before
        any zeroing), ``fit_name`` and ``fit_value`` (see :func:`fit_statistic`),
        ``method``.

    References
    ----------
    See :mod:`cladewright.build.linkage` and :mod:`cladewright.build.nj`.
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
        parent, length = nj_arrays(values, bionj=(m == "bionj"))
        rooted = False
    neg = length < 0
    n_neg = int(np.count_nonzero(neg))
    if negative == "zero" and n_neg:
        length[neg] = 0.0
    tree = Tree(parent, length, names, rooted=rooted)
    fit_name = fit_value = None
    if fit:
        fit_name, fit_value = fit_statistic(tree, dm, method=m)
        if not np.isfinite(fit_value):
            # e.g. every distance zero, or fewer than three taxa: the
            # statistic has no value, and a summary must not print nan
            fit_value = None
    info = {"method": m, "negative_branches": n_neg, "fit_name": fit_name, "fit_value": fit_value}
    return tree, info


def build_tree(dm: DistanceMatrix, method: str = "nj", negative: str = "zero", *, source: str | None = None,
               sizes: ArrayLike | None = None) -> Tree:
    """Build a tree from a distance matrix (see :func:`build_tree_with_info`;
    the fit statistic is skipped here, so replicates pay only for the tree).

    Parameters
    ----------
    dm : cladewright.matrix.DistanceMatrix
    method : str
        upgma, wpgma, single, complete, nj (default) or bionj.
    negative : {"zero", "keep"}

    Returns
    -------
    cladewright.tree.Tree

    Example
    -------
    >>> from cladewright.matrix import DistanceMatrix
    >>> dm = DistanceMatrix("abc", [[0, 2, 4], [2, 0, 4], [4, 4, 0]])
    >>> float(build_tree(dm, "upgma").patristic()[0, 2])
    4.0
    """
    return build_tree_with_info(dm, method, negative, source=source, fit=False, sizes=sizes)[0]
