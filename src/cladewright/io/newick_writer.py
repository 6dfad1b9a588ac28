"""Internal: the Newick writer behind Tree.to_newick and Tree.write.

Writing trees in Newick format.

Every label that would not read back exactly is quoted; a support value
read from a file and not replaced since is written as it was read. The
writer takes any tree object with the attributes of
:class:`~cladewright.tree.Tree` (it imports no tree class) and walks it
without recursion.

Underscores. The 1986 informal specification reads an unquoted ``_`` as a
blank, but most software today keeps it as an underscore (common practice),
and some readers keep the quotes of a quoted label as part of the name. So
two ways of quoting are offered (:data:`QUOTINGS`):

- ``"plain"`` (the default): a label that would need quotes only because of
  an underscore is written bare (``Homo_sapiens``); blanks, punctuation,
  quotes and non-ASCII are still quoted. cladewright's own reader keeps an
  unquoted underscore, so its own files read back exactly.
- ``"strict"``: every label a reader of the strict rule would change is
  quoted, underscores included (``'Homo_sapiens'``).

A NEXUS TREE command is always written strictly: NEXUS reads an unquoted
``_`` as a blank (Maddison, Swofford & Maddison 1997).

References
----------
Newick format: the trade's de facto standard (1986 informal specification).
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Protocol

import numpy as np
from numpy.typing import NDArray

from ..errors import InputError
from .newick import read_number

__all__ = ["TreeLike", "QUOTINGS", "format_newick", "quote_label", "check_quoting", "format_length", "format_support"]

#: The ways of quoting labels: "plain" writes a label whose only special
#: character is '_' bare, "strict" quotes it too.
QUOTINGS = ("plain", "strict")


class TreeLike(Protocol):
    """What the writers read of a tree: the attributes of
    :class:`~cladewright.tree.Tree`, as a structural type (PEP 544), so that
    the writers name no tree class."""

    @property
    def n_leaves(self) -> int: ...

    @property
    def n_nodes(self) -> int: ...

    @property
    def root(self) -> int: ...

    @property
    def rooted(self) -> bool: ...

    @property
    def leaf_names(self) -> Sequence[str]: ...

    @property
    def parent(self) -> NDArray[np.int64]: ...

    @property
    def length(self) -> NDArray[np.float64]: ...

    @property
    def support(self) -> NDArray[np.float64]: ...

    @property
    def labels(self) -> Sequence[str | None]: ...

    @property
    def support_text(self) -> Sequence[str | None] | None: ...

    def children(self, node: int) -> NDArray[np.int64]: ...

    def preorder(self) -> NDArray[np.int64]: ...

# Characters that cannot stand in an unquoted label: whitespace, Newick
# punctuation, the quote and anything outside printable ASCII; the strict
# rule adds '_', which a reader of that rule turns into a blank.
_NEEDS_QUOTES = {"plain": re.compile(r"[\s()\[\]':;,]|[^\x21-\x7e]"),
                 "strict": re.compile(r"[\s()\[\]':;,_]|[^\x21-\x7e]")}


def check_quoting(quoting: str) -> str:
    """``quoting`` if it is one of :data:`QUOTINGS`, else InputError.

    Parameters
    ----------
    quoting : str

    Returns
    -------
    str

    Raises
    ------
    InputError
        Naming the parameter and the values it takes.
    """
    if quoting not in _NEEDS_QUOTES:
        raise InputError(f"quoting={quoting!r} is not a way of quoting Newick labels; give 'plain' "
                         "(underscores bare, the default) or 'strict' (underscores quoted)")
    return quoting


def quote_label(label: str, numeric_quoted: bool = False, quoting: str = "plain") -> str:
    """``label`` as a Newick token: bare if it reads back unchanged, else in
    single quotes with inner quotes doubled.

    Parameters
    ----------
    label : str
    numeric_quoted : bool
        Quote a label that looks like a number (internal labels, which a
        reader would take as support).
    quoting : {"plain", "strict"}
        ``"plain"`` writes a label whose only special character is ``_``
        bare; ``"strict"`` quotes it (an unquoted ``_`` reads as a blank
        under the 1986 informal specification).

    Returns
    -------
    str

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification).

    Examples
    --------
    >>> quote_label("Homo_sapiens"), quote_label("Homo_sapiens", quoting="strict")
    ('Homo_sapiens', "'Homo_sapiens'")
    >>> quote_label("it's here")
    "'it''s here'"
    """
    pattern = _NEEDS_QUOTES[check_quoting(quoting)]
    if not label or pattern.search(label) or (numeric_quoted and read_number(label) is not None):
        return "'" + label.replace("'", "''") + "'"
    return label


def format_length(x: float, digits: int | None = None) -> str:
    """Branch length text: ``repr`` (exact round trip) or ``digits``
    significant digits."""
    x = float(x)
    if digits is None:
        return repr(x)
    return format(x, f".{int(digits)}g")


def format_support(x: float, support_digits: int = 0) -> str:
    """Support text: integer percentage, or ``support_digits`` decimals."""
    return format(float(x), f".{int(support_digits)}f")


def _kept_text(tree: TreeLike) -> list[str | None]:
    """Per node, the text a support value was read from while it still reads
    as that value (else None): support a tool moved but did not compute is
    written back exactly as it was read."""
    texts = tree.support_text
    if texts is None:
        return [None] * tree.n_nodes
    support = tree.support.tolist()
    out: list[str | None] = [None] * tree.n_nodes
    for v, t in enumerate(texts):
        if t is not None and read_number(t) == support[v]:
            out[v] = t
    return out


def _node_texts(tree: TreeLike, digits: int | None, support_digits: int,
                leaf_text: Sequence[str] | None = None, quoting: str = "plain") -> list[str]:
    """Text after each node's subtree: its label or support and ':length'."""
    n, m = tree.n_leaves, tree.n_nodes
    length, support, labels = tree.length.tolist(), tree.support.tolist(), tree.labels
    names = tree.leaf_names if leaf_text is None else leaf_text
    root = tree.root
    kept = _kept_text(tree)
    out = [""] * m
    for v in range(m):
        if v < n:
            s = quote_label(names[v], quoting=quoting) if leaf_text is None else names[v]
        elif v != root and support[v] == support[v]:
            s = kept[v] or format_support(support[v], support_digits)
        elif (label := labels[v]) is not None:
            s = quote_label(label, numeric_quoted=True, quoting=quoting)
        else:
            s = ""
        x = length[v]
        if x == x:
            s = s + ":" + format_length(x, digits)
        out[v] = s
    return out


def _root_comment(tree: TreeLike) -> str:
    """'[&R] '/'[&U] ' when a reader's default (rooted iff the root has two
    children) would get the rooting wrong, else ''."""
    two = tree.n_nodes > 1 and tree.children(tree.root).size == 2
    if tree.rooted and not two:
        return "[&R] "
    if not tree.rooted and two:
        return "[&U] "
    return ""


def _child_table(tree: TreeLike) -> tuple[list[int], list[int]]:
    """(ptr, kids) as lists: the children of v are kids[ptr[v]:ptr[v+1]], in
    the tree's sibling order (a preorder lists each node's children in that
    order, so a stable sort of it by parent gives them)."""
    parent = np.asarray(tree.parent)
    below = np.asarray(tree.preorder())[1:]
    kids = below[np.argsort(parent[below], kind="stable")]
    ptr = np.zeros(parent.shape[0] + 1, np.int64)
    np.cumsum(np.bincount(parent[below], minlength=parent.shape[0]), out=ptr[1:])
    return ptr.tolist(), kids.tolist()


def format_newick(tree: TreeLike, digits: int | None = None, support_digits: int = 0,
                  leaf_text: Sequence[str] | None = None, root_comment: str | None = None,
                  quoting: str | None = None) -> str:
    """One tree as a Newick line ending in ``";\\n"``.

    Parameters
    ----------
    tree : Tree
    digits : int, optional
        Significant digits of branch lengths (default: exact, ``repr``).
    support_digits : int
        Decimals of support values on internal nodes (0: integer percentages).
        A value read from a file and not replaced since is written exactly
        as it was read (:attr:`Tree.support_text`).
    leaf_text : sequence of str, optional
        Ready-made tokens to write for the leaves instead of their quoted
        names (NEXUS TRANSLATE numbers).
    root_comment : str, optional
        Text written before the tree; default ``[&R]``/``[&U]`` only when
        the shape alone would mislead a reader about the rooting.
    quoting : {"plain", "strict"}, optional
        ``"plain"`` writes labels whose only special character is ``_``
        bare, as most software expects; ``"strict"`` quotes them too, for
        readers that turn an unquoted ``_`` into a blank. Labels with
        blanks, punctuation, quotes or non-ASCII are quoted either way.
        Default ``"plain"``, but ``"strict"`` when ``leaf_text`` is given:
        that is a NEXUS TREE command, where an unquoted ``_`` is a blank
        (Maddison, Swofford & Maddison 1997).

    Returns
    -------
    str

    Raises
    ------
    InputError
        For an unknown ``quoting``.

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification).
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621 (NEXUS).

    Examples
    --------
    >>> from cladewright import Tree
    >>> t = Tree([3, 3, 3, -1], [1.0, 2.0, 3.0, float("nan")], ["Homo_sapiens", "Pan paniscus", "x"])
    >>> format_newick(t)
    "(Homo_sapiens:1.0,'Pan paniscus':2.0,x:3.0);\\n"
    >>> format_newick(t, quoting="strict")
    "('Homo_sapiens':1.0,'Pan paniscus':2.0,x:3.0);\\n"
    """
    if quoting is None:
        quoting = "plain" if leaf_text is None else "strict"
    texts = _node_texts(tree, digits, support_digits, leaf_text, check_quoting(quoting))
    n = tree.n_leaves
    ptr, kids = _child_table(tree)
    first = [True] * tree.n_nodes
    parent = tree.parent.tolist()
    for v in kids:
        first[v] = kids[ptr[parent[v]]] == v
    out = [_root_comment(tree) if root_comment is None else root_comment]
    emit = out.append
    stack = [tree.root]
    while stack:
        x = stack.pop()
        if x >= 0:
            if not first[x]:
                emit(",")
            if x < n:
                emit(texts[x])
            else:
                emit("(")
                stack.append(~x)
                a, b = ptr[x], ptr[x + 1]
                stack.extend(kids[b - 1:a - 1 if a else None:-1])
        else:
            emit(")")
            emit(texts[~x])
    emit(";\n")
    return "".join(out)
