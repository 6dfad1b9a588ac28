"""A Tree as an ete3 tree: the body of :meth:`cladewright.tree.Tree.to_ete3`,
shared with :func:`cladewright.interop.to_ete3`.

ete3 is imported only when a conversion is asked for; where it is missing, or
cannot be imported (ete3 3.1 imports the ``cgi`` module, removed from the
standard library in Python 3.13), the error says what to install.
"""

from __future__ import annotations

import math
from types import ModuleType
from typing import Any

from ..errors import InputError
from ..io.newick_writer import TreeLike

__all__ = ["ete3_module", "tree_to_ete3"]


def ete3_module() -> ModuleType:
    """The ``ete3`` module, imported on first use.

    Returns
    -------
    module

    Raises
    ------
    InputError
        When ete3 is not installed, or cannot be imported because the
        ``cgi`` module it needs is gone (Python 3.13 and later), naming the
        package to install.
    """
    try:
        import ete3
    except ModuleNotFoundError as err:
        if err.name == "cgi":
            raise InputError("ete3 cannot be imported: it needs the 'cgi' module, which Python 3.13 removed; "
                             "install legacy-cgi (pip install legacy-cgi)") from None
        raise InputError("the ete3 conversion needs the ete3 package; install it (pip install ete3)") from None
    return ete3


def tree_to_ete3(tree: TreeLike) -> Any:
    """``tree`` as an ``ete3.Tree``.

    Leaf names, internal labels (as node names), branch lengths (a missing
    length becomes 0.0, the root's is left at ete3's default) and support
    values (a missing one stays at ete3's default, 1.0) are kept; sibling
    order is the tree's. ete3 has no rooted flag: an unrooted tree is one
    whose root has three children, as :class:`~cladewright.tree.Tree`
    stores it.

    Parameters
    ----------
    tree : Tree

    Returns
    -------
    ete3.Tree

    Raises
    ------
    InputError
        When ete3 is missing or cannot be imported (see :func:`ete3_module`).

    Examples
    --------
    >>> from cladewright import Tree
    >>> e = tree_to_ete3(Tree([2, 2, -1], [1.0, 2.0, float("nan")], ["a_1", "b"], rooted=True))
    >>> sorted((x.name, x.dist) for x in e.get_leaves())
    [('a_1', 1.0), ('b', 2.0)]
    """
    ete3 = ete3_module()
    n = tree.n_leaves
    length, support, labels = tree.length.tolist(), tree.support.tolist(), tree.labels
    names, root_id = tree.leaf_names, tree.root
    made: list[Any] = [None] * tree.n_nodes
    root = ete3.Tree()
    made[root_id] = root
    parent = tree.parent.tolist()
    for v in tree.preorder().tolist():  # parents before children, siblings in order
        if v == root_id:
            node = root
        else:
            node = made[parent[v]].add_child()
            made[v] = node
            node.dist = 0.0 if math.isnan(length[v]) else length[v]
        if v < n:
            node.name = names[v]
        else:
            if labels[v] is not None:
                node.name = labels[v]
            if not math.isnan(support[v]):
                node.support = support[v]
    return root
