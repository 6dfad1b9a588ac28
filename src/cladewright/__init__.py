"""cladewright: distance-based phylogenetic trees with bootstrap support.

The pipeline runs one way: alignment -> pair counts -> DistanceMatrix -> Tree
-> support -> Newick / NEXUS / figure. Every name a user needs is here, grouped
by stage; the modules behind them are listed in docs/architecture.md (those
whose docstring starts "Internal", and ``_kernels``, may change freely).

>>> import cladewright as cw
>>> aln = cw.read_alignment("example_alignments/glass_snails_coi.fasta")
>>> print(aln.n_taxa, aln.n_sites)
30 900
>>> tree = cw.build_tree(cw.distance_matrix(aln, model="k2p"), method="nj")
>>> print(tree.n_leaves)
30
"""

__version__ = "0.1.0"

# Reading: files (FASTA, NEXUS, Newick, labelled TSV; gzip; "-" for stdin) -> the nouns.
from .io.readers import parse_newick, read_alignment, read_distance_matrix, read_trees

# The three nouns that carry the data.
from .alignment import Alignment
from .matrix import DistanceMatrix
from .tree import Tree

# Distances: the model registry and the one entry point.
from .distances import MODELS, distance_matrix

# Identical sequences: computed once, put back as polytomies.
from .alignment import distinct_sequences, identical_groups

# Trees: building, fit to the distances, the whole alignment-to-tree path, polytomies.
from .build import METHODS, build_tree, build_tree_with_info, fit_statistic, refine_tree, refine_tree_with_info
from .choices import REFINEMENTS
from .build.criteria import fit_lengths, fit_lengths_with_info, tree_length
from .build.weighted import weighted_fit
from .pipeline import tree_from_alignment
from .store_tree import tree_from_store
from .polytomies import attach_identical, collapse_zero_branches, resolve_polytomies

# Rooting: midpoint or outgroup.
from .rooting import midpoint_root, outgroup_root, root_tree

# Clusters: groups of taxa within a path-length threshold.
from .clusters import clade_diameters, clusters_within

# Support: the bootstrap, support measures, consensus and tree comparison.
from .resampling import BootstrapResult, bootstrap
from .support import (apply_support, branch_score, fbp_support, majority_consensus, robinson_foulds,
                      tbe_support)

# Figures and reports: a figure file (SVG, PNG, PDF) or Figure, a text drawing, the HTML run report.
from .draw import render_tree, tree_figure
from .report import write_report
from .textdraw import text_tree

# Hand-off to other Python libraries (scikit-bio, DendroPy, Bio.Phylo, ete3), each imported when called.
from .interop import (from_biophylo, from_dendropy, from_ete3, from_skbio_matrix, from_skbio_tree, to_biophylo,
                      to_dendropy, to_ete3, to_skbio_matrix, to_skbio_tree)

# Errors and warnings.
from .errors import CladewrightError, CladewrightWarning, InputError, SaturationError

__all__ = [
    # reading
    "read_alignment", "read_trees", "read_distance_matrix", "parse_newick",
    # nouns
    "Alignment", "DistanceMatrix", "Tree",
    # distances
    "distance_matrix", "MODELS",
    # identical sequences
    "identical_groups", "distinct_sequences",
    # trees
    "build_tree", "build_tree_with_info", "METHODS", "fit_statistic", "tree_from_alignment", "tree_from_store",
    "refine_tree", "refine_tree_with_info", "REFINEMENTS",
    "fit_lengths", "fit_lengths_with_info", "tree_length", "weighted_fit",
    "collapse_zero_branches", "resolve_polytomies", "attach_identical",
    # rooting
    "midpoint_root", "outgroup_root", "root_tree",
    # clusters
    "clusters_within", "clade_diameters",
    # support
    "bootstrap", "BootstrapResult", "fbp_support", "tbe_support", "apply_support", "majority_consensus",
    "robinson_foulds", "branch_score",
    # figures and reports
    "render_tree", "tree_figure", "text_tree", "write_report",
    # hand-off to other libraries
    "to_skbio_tree", "from_skbio_tree", "to_skbio_matrix", "from_skbio_matrix", "to_dendropy", "from_dendropy",
    "to_biophylo", "from_biophylo", "to_ete3", "from_ete3",
    # errors and warnings
    "CladewrightError", "InputError", "SaturationError", "CladewrightWarning",
    "__version__",
]
