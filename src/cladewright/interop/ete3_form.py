"""Trees to and from ete3 (``ete3.Tree``).

ete3 keeps a node's ``name`` (leaf names, internal labels), ``dist`` and
``support``, and gives every node a ``dist`` and a ``support`` (1.0) even where
none was given; it stores no rooting, so an unrooted tree is one whose root has
three children. The conversion to ete3 is :meth:`Tree.to_ete3`'s.
"""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from ..tree import Tree
from ..tree.ete_form import ete3_module, tree_to_ete3
from .common import NodeFacts, build_tree_from, check_tree

__all__ = ["to_ete3", "from_ete3"]


def to_ete3(tree: Tree) -> Any:
    """``tree`` as an ``ete3.Tree``: the same as :meth:`Tree.to_ete3`.

    Parameters
    ----------
    tree : Tree

    Returns
    -------
    ete3.Tree
        Names, ``dist`` (0.0 where there is no length), ``support`` (ete3's
        default 1.0 where there is none).

    Raises
    ------
    InputError
        When ete3 is missing or cannot be imported.

    Examples
    --------
    >>> e = to_ete3(Tree([2, 2, -1], [1.0, 2.0, float("nan")], ["a", "b"], rooted=True))
    >>> e.write(format=1)
    '(a:1,b:2);'
    """
    return tree_to_ete3(check_tree(tree, "to_ete3"))


def from_ete3(node: Any, rooted: bool | None = None, support: bool | None = None) -> Tree:
    """A Tree from an ``ete3.Tree`` (or any of its nodes, taken as the root).

    Parameters
    ----------
    node : ete3.TreeNode
    rooted : bool, optional
        Default: rooted when the root has two children (the Newick
        convention, 1986 informal specification).
    support : bool, optional
        Read the internal nodes' ``support``. ete3 gives every node a support
        of 1.0 unless told otherwise, so by default support is read only when
        some internal node below the root has another value.

    Returns
    -------
    Tree
        Names, ``dist`` as branch lengths (not the root's: ete3 gives every
        root one), support as above; an internal name kept as a label, or
        taken as support when it reads as a number and no support is read.

    Raises
    ------
    InputError
        When ete3 cannot be imported, for a leaf without a name, or two
        leaves of one name.

    Examples
    --------
    >>> import ete3
    >>> from_ete3(ete3.Tree("((a:1,b:2)90:0.5,c:3);")).to_newick()
    '((a:1.0,b:2.0)90:0.5,c:3.0);\\n'
    """
    ete3_module()
    if not hasattr(node, "children") or not hasattr(node, "dist"):
        raise InputError(f"from_ete3: node is {type(node).__name__}, not an ete3 tree")
    if support is None:
        support = any(float(x.support) != 1.0 for x in node.iter_descendants() if x.children)

    def describe(x: Any, leaf: bool) -> NodeFacts:
        return x.name, None if x is node else x.dist, x.support if support and not leaf else None, x.name

    return build_tree_from(node, lambda x: x.children, describe, rooted, "from_ete3")
