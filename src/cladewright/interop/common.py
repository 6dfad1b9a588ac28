"""Internal: the walks shared by the conversions of :mod:`cladewright.interop`.

:func:`build_tree_from` makes a Tree of another library's tree through two
small callables (a node's children, a node's name, length, support and
label); :func:`make_nodes` makes another library's nodes for every node of a
Tree. Both walk iteratively.
"""

from __future__ import annotations

import importlib
import math
from collections.abc import Callable, Iterable
from types import ModuleType
from typing import Any

import numpy as np

from ..errors import InputError
from ..io.newick import read_number
from ..tree import Tree

__all__ = ["NodeFacts", "library", "check_tree", "number", "build_tree_from", "make_nodes"]

# (name, length, support, label) of one node of another library's tree
NodeFacts = tuple[Any, Any, Any, Any]


def library(module: str, package: str, what: str) -> ModuleType:
    """The module ``module``, imported now; InputError naming ``package`` when it is missing."""
    try:
        return importlib.import_module(module)
    except ModuleNotFoundError:
        raise InputError(f"{what} needs the {package} package; install it (pip install {package})") from None


def check_tree(tree: object, what: str) -> Tree:
    """``tree`` if it is a cladewright Tree, else InputError."""
    if not isinstance(tree, Tree):
        raise InputError(f"{what}: tree is {type(tree).__name__}, not a cladewright Tree; read or build one first")
    return tree


def number(x: float | None) -> float | None:
    """``x`` as a float, None for None or nan."""
    return None if x is None or math.isnan(x) else float(x)


def build_tree_from(root: Any, children: Callable[[Any], Iterable[Any]],
                    describe: Callable[[Any, bool], NodeFacts], rooted: bool | None, what: str) -> Tree:
    """A Tree from another library's tree: ``children(node)`` lists a node's
    children in order, ``describe(node, is_leaf)`` gives (name, length,
    support, label), None for what is missing. Leaves are numbered in
    preorder, so the sibling order is kept."""
    order: list[Any] = []
    par: list[int] = []
    stack = [(root, -1)]
    while stack:  # preorder, children left to right
        node, p = stack.pop()
        order.append(node)
        par.append(p)
        me = len(order) - 1
        stack.extend((c, me) for c in reversed(list(children(node))))
    m = len(order)
    is_leaf = np.ones(m, dtype=bool)
    is_leaf[np.array([p for p in par if p >= 0], dtype=np.int64)] = False
    info = [describe(node, bool(leaf)) for node, leaf in zip(order, is_leaf.tolist())]
    new = np.empty(m, np.int64)
    n = int(np.count_nonzero(is_leaf))
    new[is_leaf] = np.arange(n)
    new[~is_leaf] = n + np.arange(m - n)
    parent = np.full(m, -1, np.int64)
    has_parent = np.array(par) >= 0
    parent[new[has_parent]] = new[np.array(par)[has_parent]]
    length = np.full(m, np.nan)
    support = np.full(m, np.nan)
    labels: list[str | None] = [None] * m
    names: list[str] = [""] * n
    for i, (name, ln, sup, label) in enumerate(info):
        j = int(new[i])
        if ln is not None:
            length[j] = float(ln)
        if j < n:
            if name is None or str(name) == "":
                raise InputError(f"{what}: a leaf has no name; give every leaf a name")
            names[j] = str(name)
            continue
        text = None if label is None or str(label) == "" else str(label)
        if sup is None and text is not None and read_number(text) is not None:
            sup, text = read_number(text), None  # support kept in a label, as a Newick reader gives it
        if sup is not None and i != 0:
            support[j] = float(sup)
        labels[j] = text
    if rooted is None:
        rooted = m > 1 and par.count(0) == 2
    try:
        return Tree(parent, length, names, support=support, labels=labels, rooted=bool(rooted))
    except ValueError as err:
        raise InputError(f"{what}: {err}; give every leaf a unique name") from None


def make_nodes(tree: Tree, make: Callable[[Any, str | None, float | None, float | None, bool], Any]) -> list[Any]:
    """Another library's nodes for every node of ``tree``, made in preorder by
    ``make(parent_object or None, name or label, length, support, is_leaf)``;
    support only below the root, as the Newick writer has it."""
    out: list[Any] = [None] * tree.n_nodes
    n, root = tree.n_leaves, tree.root
    parent, length, support = tree.parent.tolist(), tree.length.tolist(), tree.support.tolist()
    for v in tree.preorder().tolist():
        name = tree.leaf_names[v] if v < n else tree.labels[v]
        sup = number(support[v]) if v >= n and v != root else None
        out[v] = make(out[parent[v]] if v != root else None, name, number(length[v]), sup, v < n)
    return out
