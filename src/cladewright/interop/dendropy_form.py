"""Trees to and from DendroPy (``dendropy.Tree``).

DendroPy keeps leaf names as taxa of a ``TaxonNamespace``, lengths on edges,
the rooting as ``is_rooted``, and support where its Newick reader puts it: in
the node's ``label``, as text.
"""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from ..tree import Tree
from .common import NodeFacts, build_tree_from, check_tree, library, make_nodes

__all__ = ["to_dendropy", "from_dendropy"]


def _support_text(x: float) -> str:
    return str(int(x)) if x.is_integer() and abs(x) < 1e15 else repr(x)


def to_dendropy(tree: Tree, taxon_namespace: Any = None) -> Any:
    """``tree`` as a ``dendropy.Tree``.

    Parameters
    ----------
    tree : Tree
    taxon_namespace : dendropy.TaxonNamespace, optional
        The taxa to use (those missing are added); trees compared by DendroPy
        must share one. Default: a new namespace.

    Returns
    -------
    dendropy.Tree
        Leaf names as taxon labels, ``edge.length`` (None where there is
        none), support as the node's ``label`` (text: ``"95"``), other
        internal labels as ``label``, ``is_rooted`` from :attr:`Tree.rooted`.

    Raises
    ------
    InputError
        When DendroPy is not installed.

    Examples
    --------
    >>> d = to_dendropy(Tree([3, 3, 4, 4, -1], [1.0, 2.0, 3.0, 0.5, float("nan")], ["a", "b", "c"],
    ...                      support=[float("nan")] * 3 + [95.0, float("nan")], rooted=True))
    >>> d.as_string(schema="newick").strip()
    '[&R] ((a:1.0,b:2.0)95:0.5,c:3.0);'
    """
    dendropy = library("dendropy", "DendroPy", "to_dendropy")
    tree = check_tree(tree, "to_dendropy")
    ns = dendropy.TaxonNamespace() if taxon_namespace is None else taxon_namespace
    # one look-up table (require_taxon searches the namespace once per name: quadratic)
    taxa = {t.label: t for t in ns}
    for name in tree.leaf_names:
        if name not in taxa:
            taxa[name] = ns.new_taxon(label=name)
    out = dendropy.Tree(taxon_namespace=ns, is_rooted=tree.rooted)

    def make(parent: Any, name: str | None, ln: float | None, sup: float | None, leaf: bool) -> Any:
        node = out.seed_node if parent is None else parent.new_child()
        node.edge.length = ln
        if leaf:
            node.taxon = taxa[name]
        else:
            node.label = _support_text(sup) if sup is not None else name
        return node

    make_nodes(tree, make)
    return out


def from_dendropy(tree: Any, rooted: bool | None = None) -> Tree:
    """A Tree from a ``dendropy.Tree``.

    Parameters
    ----------
    tree : dendropy.Tree
    rooted : bool, optional
        Default: ``tree.is_rooted``; where that is None, rooted when the root
        has two children (the Newick convention, 1986 informal
        specification).

    Returns
    -------
    Tree
        Taxon labels as leaf names, edge lengths kept; an internal label
        taken as support when it reads as a number, else kept as a label.

    Raises
    ------
    InputError
        For a leaf without a taxon or label, or two leaves of one name.

    Examples
    --------
    >>> import dendropy
    >>> d = dendropy.Tree.get(data="((a_1:1,b:2)90:0.5,c:3);", schema="newick", preserve_underscores=True)
    >>> from_dendropy(d).to_newick()
    '((a_1:1.0,b:2.0)90:0.5,c:3.0);\\n'
    """
    if not hasattr(tree, "seed_node"):
        raise InputError(f"from_dendropy: tree is {type(tree).__name__}, not a dendropy.Tree")

    def describe(node: Any, leaf: bool) -> NodeFacts:
        name = node.taxon.label if node.taxon is not None else node.label
        return name, node.edge.length, None, name

    if rooted is None and tree.is_rooted is not None:
        rooted = bool(tree.is_rooted)
    return build_tree_from(tree.seed_node, lambda x: x.child_nodes(), describe, rooted, "from_dendropy")
