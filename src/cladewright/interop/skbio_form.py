"""Trees and distance matrices to and from scikit-bio (``skbio.TreeNode``,
``skbio.DistanceMatrix``).

scikit-bio keeps a node's name, ``length`` and ``support``; it stores no
rooting, so an unrooted tree is one whose root has three children.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..errors import InputError
from ..matrix import DistanceMatrix
from ..tree import Tree
from .common import build_tree_from, check_tree, library, make_nodes

__all__ = ["to_skbio_tree", "from_skbio_tree", "to_skbio_matrix", "from_skbio_matrix"]


def to_skbio_tree(tree: Tree) -> Any:
    """``tree`` as a scikit-bio ``TreeNode`` (its root).

    Parameters
    ----------
    tree : Tree

    Returns
    -------
    skbio.TreeNode
        Leaf names and internal labels as ``name``, ``length`` (None where
        there is none), ``support``.

    Raises
    ------
    InputError
        When scikit-bio is not installed.

    Examples
    --------
    >>> t = to_skbio_tree(Tree([2, 2, -1], [1.0, 2.0, float("nan")], ["a", "b"], rooted=True))
    >>> sorted((x.name, x.length) for x in t.tips())
    [('a', 1.0), ('b', 2.0)]
    """
    skbio = library("skbio", "scikit-bio", "to_skbio_tree")
    tree = check_tree(tree, "to_skbio_tree")
    nodes = make_nodes(tree, lambda _p, name, ln, sup, _leaf: skbio.TreeNode(name=name, length=ln, support=sup))
    ptr, kids = tree.children_table()
    p, k = ptr.tolist(), kids.tolist()
    for v in range(tree.n_leaves, tree.n_nodes):
        nodes[v].extend([nodes[c] for c in k[p[v]:p[v + 1]]], uncache=False)
    return nodes[tree.root]


def from_skbio_tree(node: Any, rooted: bool | None = None) -> Tree:
    """A Tree from a scikit-bio ``TreeNode`` (taken as the root).

    Parameters
    ----------
    node : skbio.TreeNode
    rooted : bool, optional
        Default: rooted when the root has two children (the Newick
        convention, 1986 informal specification).

    Returns
    -------
    Tree
        Tip names as leaf names; ``length`` and ``support`` kept; an
        internal name kept as a label, or taken as support when it reads as
        a number and the node has no ``support`` (as a tree read from
        Newick by scikit-bio has it).

    Raises
    ------
    InputError
        For a tip without a name, or two tips of one name.

    Examples
    --------
    >>> import io, skbio
    >>> t = from_skbio_tree(skbio.TreeNode.read(io.StringIO("((a:1,b:2)90:0.5,c:3);")))
    >>> t.to_newick()
    '((a:1.0,b:2.0)90:0.5,c:3.0);\\n'
    """
    if not hasattr(node, "children") or not hasattr(node, "support"):
        raise InputError(f"from_skbio_tree: node is {type(node).__name__}, not a skbio.TreeNode")
    return build_tree_from(node, lambda x: x.children, lambda x, _leaf: (x.name, x.length, x.support, x.name),
                           rooted, "from_skbio_tree")


def to_skbio_matrix(matrix: DistanceMatrix) -> Any:
    """``matrix`` as a scikit-bio ``DistanceMatrix`` (float64, ids = names).

    A matrix symmetric only within cladewright's rounding tolerance is made
    exactly symmetric (the mean of the two cells), as scikit-bio asks.

    Parameters
    ----------
    matrix : DistanceMatrix

    Returns
    -------
    skbio.DistanceMatrix

    Raises
    ------
    InputError
        When scikit-bio is not installed.

    Examples
    --------
    >>> to_skbio_matrix(DistanceMatrix(["a", "b"], [[0, 0.5], [0.5, 0]]))["a", "b"]
    np.float64(0.5)
    """
    skbio = library("skbio", "scikit-bio", "to_skbio_matrix")
    if not isinstance(matrix, DistanceMatrix):
        raise InputError(f"to_skbio_matrix: matrix is {type(matrix).__name__}, not a cladewright DistanceMatrix")
    data = np.array(matrix.values, dtype=np.float64)
    if not np.array_equal(data, data.T):
        data = (data + data.T) / 2.0
    return skbio.DistanceMatrix(data, ids=list(matrix.names))


def from_skbio_matrix(matrix: Any) -> DistanceMatrix:
    """A DistanceMatrix from a scikit-bio ``DistanceMatrix`` (ids as names).

    Parameters
    ----------
    matrix : skbio.DistanceMatrix

    Returns
    -------
    DistanceMatrix
        A checked copy.

    Raises
    ------
    InputError
        When the values are not a distance matrix (checked as for any
        DistanceMatrix).

    Examples
    --------
    >>> import skbio
    >>> from_skbio_matrix(skbio.DistanceMatrix([[0, 2], [2, 0]], ids=["x", "y"])).names
    ('x', 'y')
    """
    if not hasattr(matrix, "ids") or not hasattr(matrix, "data"):
        raise InputError(f"from_skbio_matrix: matrix is {type(matrix).__name__}, not a skbio.DistanceMatrix")
    return DistanceMatrix(list(matrix.ids), np.asarray(matrix.data))
