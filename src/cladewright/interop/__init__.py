"""Hand-off to other Python libraries: trees and distance matrices to and from
scikit-bio, DendroPy, Bio.Phylo and ete3.

Each function imports its library only when called; where the library is
missing, the error names the package to install. Leaf names, internal labels,
branch lengths, support values and the rooting are carried over, each in the
form the library uses: support is ``node.support`` in scikit-bio and ete3,
``clade.confidence`` in Bio.Phylo and the node's ``label`` (text) in DendroPy,
where their Newick readers put it. Coming back, an internal name or label that
reads as a number is taken as support when the node has none of its own, as
cladewright's Newick reader does. DendroPy (``is_rooted``) and Bio.Phylo
(``rooted``) store the rooting; for the others, or where DendroPy leaves it
undecided, a tree is rooted when its root has two children, the Newick
convention (1986 informal specification), unless ``rooted=`` says otherwise.
Every walk is iterative, so deep trees do not hit a recursion limit.

>>> import cladewright as cw
>>> t = cw.parse_newick("((a:1,b:2)95:0.5,c:3);")[0]
>>> from_dendropy(to_dendropy(t)).to_newick() == t.to_newick()
True
"""

from .biophylo_form import from_biophylo, to_biophylo
from .dendropy_form import from_dendropy, to_dendropy
from .ete3_form import from_ete3, to_ete3
from .skbio_form import from_skbio_matrix, from_skbio_tree, to_skbio_matrix, to_skbio_tree

__all__ = ["to_skbio_tree", "from_skbio_tree", "to_skbio_matrix", "from_skbio_matrix", "to_dendropy",
           "from_dendropy", "to_biophylo", "from_biophylo", "to_ete3", "from_ete3"]
