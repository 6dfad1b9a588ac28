"""A tree from a tiled distance store, with no second copy of the matrix in memory.

The store (``cladewright distances ALN -o FILE.zarr``) holds the distances of
the distinct sequences. Neighbour joining and BIONJ need the square matrix as
their work space, the linkage methods its upper triangle: the store is read a
tile row at a time straight into that work space, saturated pairs taking the
store's cap on the way, so the matrix is in memory once, in the form the
method works on. The fit statistic is then computed by reading the store
again, a tile row at a time (:func:`cladewright.build.fit.fit_from_rows`).
The other methods (bme, and any refinement), which keep the matrix beside
their work, read it once into a :class:`DistanceMatrix`.

Identical sequences were entered once when the store was made; their groups
come back as polytomies exactly as in :func:`cladewright.pipeline.tree_from_alignment`,
so a tree from the store is the tree from the alignment, bit for bit.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import NDArray

from .build import build_tree_with_info, zero_negative
from .build.fit import fit_from_rows
from .build.linkage import linkage_condensed
from .build.nj import nj_arrays
from .build.search import refinement_name
from .choices import LINKAGE_METHODS, METHODS, NEGATIVE_RULES
from .errors import InputError
from .io.store import matrix_info, read_store_rows, store_attributes
from .pipeline import few_distinct_tree, finish_tree, identical_info, run_warnings, zero_tolerance
from ._kernels.matrix import condense_rows, first_non_finite

if TYPE_CHECKING:
    from .build.criteria import LengthCriterion
    from .tree import Tree

__all__ = ["tree_from_store"]


def tree_from_store(path: str | os.PathLike[str], method: str = "nj", negative: str = "zero", *,
                    dtype: Any = None, refine: str | None = None, criterion: LengthCriterion | None = None
                    ) -> tuple[Tree, dict[str, Any]]:
    """The tree of a finished distance store, as :func:`cladewright.pipeline.tree_from_alignment`
    would build it from the alignment with the store's settings.

    Parameters
    ----------
    path : str or os.PathLike
        The store's directory.
    method, negative, refine, criterion : see :func:`cladewright.build_tree`
    dtype : numpy dtype, optional
        float32 to work in single precision (half the memory); the default
        works in the store's precision.

    Returns
    -------
    tree : Tree
        Over every sequence, identical ones as polytomies of zero-length leaves.
    info : dict
        As :func:`cladewright.pipeline.tree_from_alignment` gives it, with
        ``taxa`` (sequences) and ``distinct`` (rows of the store).

    Memory
    ------
    nj: one m x m matrix (m distinct sequences) in the working precision;
    bionj: two; linkage methods: half of one; bme and refinements: as
    :func:`cladewright.build_tree` on the matrix, plus the matrix.

    Examples
    --------
    See :func:`cladewright.distances.tiled.tiled_distances`.
    """
    p = os.fspath(path)
    attrs, group, (m, _) = store_attributes(p)
    names = tuple(attrs["names"])
    m_name = str(method).lower() if isinstance(method, str) else None
    if m_name not in METHODS:
        raise InputError(f"unknown tree method method={method!r}; choose one of {', '.join(METHODS)}",
                         source=p)
    if negative not in NEGATIVE_RULES:
        raise InputError(f"unknown negative-length rule negative={negative!r}; choose 'zero' or 'keep'", source=p)
    # single precision when asked for or when the store holds it (as a float32 matrix works in float32)
    work = np.float32 if np.float32 in (np.dtype(dtype or np.float64), np.dtype(attrs["dtype"])) else np.float64
    first = np.unique(group, return_index=True)[1]
    rows_names = tuple(names[i] for i in first.tolist())
    sizes = np.bincount(group, minlength=m).astype(np.int64)
    tile = int(attrs["tile"])
    info = matrix_info(attrs)
    cap = info.get("cap") if info.get("saturated") else None

    def rows(r0: int, r1: int) -> NDArray[np.floating]:
        block = np.asarray(read_store_rows(p, r0, r1), dtype=work)
        if cap is not None:
            block[~np.isfinite(block)] = cap
        i, j = first_non_finite(block)
        if i >= 0:
            raise InputError(f"distance {rows_names[r0 + i]!r}-{rows_names[j]!r} is {float(block[i, j])!r}; "
                             "every distance must be finite (make the store with saturated='cap')", source=p)
        return block

    streamed = refinement_name(refine, source=p) == "none" and criterion is None and m_name != "bme"
    if not streamed or m < 3:
        few = m < 3 <= len(names)  # a star or one branch whatever the method, as from the alignment
        tree, built = _from_matrix(p, rows_names, rows, m, tile, m_name, negative, sizes, refine, criterion, few)
    else:
        tree, built = _streamed(rows_names, rows, m, tile, m_name, negative, sizes, work)
    info.update(built)
    info.update(identical_info(group), negative=negative, taxa=len(names), distinct=m)
    info["warnings"] = run_warnings(info)
    return finish_tree(tree, names, group, zero_tolerance(work)), info


def _streamed(names: tuple[str, ...], rows: Any, m: int, tile: int, method: str, negative: str,
              sizes: NDArray[np.int64], work: Any) -> tuple[Tree, dict[str, Any]]:
    """nj, bionj or a linkage method with the store read straight into the work space."""
    from .tree import Tree

    if method in LINKAGE_METHODS:
        C = np.empty(m * (m - 1) // 2, work)
        for r0 in range(0, m, tile):
            condense_rows(rows(r0, min(m, r0 + tile)), r0, m, C)
        parent, length, _ = linkage_condensed(C, m, method, sizes)
        del C
        rooted = True
    else:
        D = np.empty((m, m), work)
        for r0 in range(0, m, tile):
            D[r0:r0 + tile] = rows(r0, min(m, r0 + tile))
        parent, length = nj_arrays(D, bionj=method == "bionj", overwrite=True)
        del D
        rooted = False
    n_neg = zero_negative(length, negative)
    tree = Tree(parent, length, names, rooted=rooted)
    fit_name, fit_value = fit_from_rows(tree, rows, tile, method)
    return tree, {"method": method, "negative_branches": n_neg, "fit_name": fit_name,
                  "fit_value": fit_value if np.isfinite(fit_value) else None, "refine": "none", "criterion": None,
                  "length_before": None, "length_after": None, "moves": 0}


def _from_matrix(path: str, names: tuple[str, ...], rows: Any, m: int, tile: int, method: str, negative: str,
                 sizes: NDArray[np.int64], refine: str | None, criterion: LengthCriterion | None, few: bool
                 ) -> tuple[Tree, dict[str, Any]]:
    """The methods that keep the matrix beside their work: the store read once into a DistanceMatrix."""
    from .matrix import DistanceMatrix

    values = None
    for r0 in range(0, m, tile):
        block = rows(r0, min(m, r0 + tile))
        if values is None:
            values = np.empty((m, m), block.dtype)
        values[r0:r0 + block.shape[0]] = block
    assert values is not None  # a store has at least one row
    if few:
        return few_distinct_tree(names, values, method)
    dm = DistanceMatrix._adopt(names, values)
    return build_tree_with_info(dm, method, negative, sizes=sizes, source=path, refine=refine, criterion=criterion)
