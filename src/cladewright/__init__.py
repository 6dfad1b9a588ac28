"""cladewright: distance-based phylogenetic trees with bootstrap support.

The pipeline runs one way: alignment -> pair counts -> DistanceMatrix -> Tree
-> support -> Newick / NEXUS.

>>> import cladewright as cw
>>> aln = cw.read_alignment("example_alignments/glass_snails_coi.fasta")
>>> print(aln.n_taxa, aln.n_sites)
30 900
>>> tree = cw.build_tree(cw.distance_matrix(aln, model="k2p"), method="nj")
>>> print(tree.n_leaves)
30
"""

__version__ = "0.1.0"

from .alignment import Alignment, distinct_sequences, identical_groups
from .build import METHODS, build_tree, build_tree_with_info, fit_statistic
from .distances import MODELS, distance_matrix
from .errors import CladewrightError, InputError, SaturationError
from .io.readers import read_alignment, read_distance_matrix, read_trees
from .matrix import DistanceMatrix
from .support import (apply_support, branch_score, fbp_support, majority_consensus, robinson_foulds,
                      tbe_support)
from .resampling import BootstrapResult, bootstrap
from .pipeline import tree_from_alignment
from .polytomies import attach_identical, collapse_zero_branches, resolve_polytomies
from .tree import Tree

__all__ = [
    "Alignment", "read_alignment", "MODELS", "distance_matrix", "DistanceMatrix", "read_distance_matrix",
    "METHODS", "build_tree", "build_tree_with_info", "fit_statistic", "Tree", "read_trees",
    "bootstrap", "BootstrapResult", "fbp_support", "tbe_support", "apply_support", "majority_consensus",
    "robinson_foulds", "branch_score", "CladewrightError", "InputError", "SaturationError",
    "identical_groups", "distinct_sequences", "tree_from_alignment", "attach_identical", "collapse_zero_branches",
    "resolve_polytomies",
]
