"""Trees to and from Bio.Phylo (Biopython's ``Bio.Phylo.Newick.Tree``).

Bio.Phylo keeps names on clades (leaf names and internal labels), the
``branch_length``, support as ``confidence`` and the rooting as ``rooted``.
"""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from ..tree import Tree
from .common import build_tree_from, check_tree, library, make_nodes

__all__ = ["to_biophylo", "from_biophylo"]


def to_biophylo(tree: Tree) -> Any:
    """``tree`` as a Bio.Phylo (Biopython) Newick tree.

    Parameters
    ----------
    tree : Tree

    Returns
    -------
    Bio.Phylo.Newick.Tree
        ``clade.name`` (leaf names, internal labels), ``branch_length``
        (None where there is none), ``confidence`` (support), ``rooted``.

    Raises
    ------
    InputError
        When Biopython is not installed.

    Examples
    --------
    >>> b = to_biophylo(Tree([2, 2, -1], [1.0, 2.0, float("nan")], ["a", "b"], rooted=True))
    >>> [(c.name, c.branch_length) for c in b.get_terminals()], b.rooted
    ([('a', 1.0), ('b', 2.0)], True)
    """
    newick = library("Bio.Phylo.Newick", "biopython", "to_biophylo")
    tree = check_tree(tree, "to_biophylo")

    def make(parent: Any, name: str | None, ln: float | None, sup: float | None, leaf: bool) -> Any:
        clade = newick.Clade(branch_length=ln, name=name, confidence=sup)
        if parent is not None:
            parent.clades.append(clade)
        return clade

    clades = make_nodes(tree, make)
    return newick.Tree(root=clades[tree.root], rooted=tree.rooted)


def from_biophylo(tree: Any, rooted: bool | None = None) -> Tree:
    """A Tree from a Bio.Phylo tree (or a clade, taken as the root).

    Parameters
    ----------
    tree : Bio.Phylo.BaseTree.Tree or Bio.Phylo.BaseTree.Clade
    rooted : bool, optional
        Default: the tree's ``rooted``; for a clade, rooted when it has two
        children (the Newick convention, 1986 informal specification).

    Returns
    -------
    Tree
        Names, branch lengths and ``confidence`` (as support) kept.

    Raises
    ------
    InputError
        For a leaf without a name, or two leaves of one name.

    Examples
    --------
    >>> import io
    >>> from Bio import Phylo
    >>> from_biophylo(Phylo.read(io.StringIO("((a:1,b:2)90:0.5,c:3,d:4);"), "newick")).to_newick()
    '((a:1.0,b:2.0)90:0.5,c:3.0,d:4.0);\\n'
    """
    root = getattr(tree, "root", tree)
    if not hasattr(root, "clades"):
        raise InputError(f"from_biophylo: tree is {type(tree).__name__}, not a Bio.Phylo tree")
    if rooted is None and hasattr(tree, "rooted"):
        rooted = bool(tree.rooted)
    return build_tree_from(root, lambda x: x.clades,
                           lambda x, _leaf: (x.name, x.branch_length, x.confidence, x.name), rooted, "from_biophylo")
