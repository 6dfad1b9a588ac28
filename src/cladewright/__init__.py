"""cladewright: distance-based phylogenetic trees with bootstrap support.

The pipeline runs one way: alignment -> pair counts -> DistanceMatrix -> Tree
-> support -> Newick / NEXUS.

>>> import cladewright as cw
>>> aln = cw.read_alignment("example_alignments/glass_snails_coi.fasta")  # doctest: +SKIP
>>> tree = cw.build_tree(cw.distance_matrix(aln, model="k2p"), method="nj")  # doctest: +SKIP
"""

__version__ = "0.1.0"

from .alignment import Alignment, read_alignment
from .build import METHODS, build_tree, build_tree_with_info, fit_statistic
from .distances import MODELS, distance_matrix
from .errors import CladewrightError, InputError, SaturationError
from .io import read_trees
from .matrix import DistanceMatrix, read_distance_matrix
from .support import (apply_support, branch_score, fbp_support, majority_consensus, robinson_foulds,
                      tbe_support)
from .support.resample import BootstrapResult, bootstrap
from .tree import Tree

__all__ = [
    "Alignment", "read_alignment", "MODELS", "distance_matrix", "DistanceMatrix", "read_distance_matrix",
    "METHODS", "build_tree", "build_tree_with_info", "fit_statistic", "Tree", "read_trees",
    "bootstrap", "BootstrapResult", "fbp_support", "tbe_support", "apply_support", "majority_consensus",
    "robinson_foulds", "branch_score", "CladewrightError", "InputError", "SaturationError",
]
