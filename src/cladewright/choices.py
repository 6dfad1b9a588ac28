"""One home for every vocabulary: the names a parameter or option may take.

The library checks its parameters against these, the command line offers them
as its choices, and the memory check and the report read them, so that a new
method, mode or format is added here once and everywhere follows. Plain
constants only; nothing of the package is imported.

References
----------
Lance & Williams (1967) Computer Journal 9:373-380 (the linkage family);
Saitou & Nei (1987) Mol. Biol. Evol. 4:406-425 (neighbour joining); Gascuel
(1997) Mol. Biol. Evol. 14:685-695 (BIONJ); Felsenstein (1985) Evolution
39:783-791 (FBP); Lemoine et al. (2018) Nature 556:452-456 (TBE).
"""

from __future__ import annotations

import numpy as np

__all__ = ["LINKAGE_METHODS", "JOINING_METHODS", "METHODS", "NEGATIVE_RULES", "PRECISIONS", "ALPHABETS",
           "GAP_MODES", "FREQ_MODES", "SATURATED_MODES", "SUPPORT_MEASURES", "TREE_FORMATS", "CLUSTER_ROOTS",
           "WARNING_KINDS"]

#: Tree methods of the Lance-Williams family: a rooted, ultrametric tree.
LINKAGE_METHODS = ("upgma", "wpgma", "single", "complete")
#: Tree methods that join neighbours: an unrooted tree with a basal trifurcation.
JOINING_METHODS = ("nj", "bionj")
#: Every tree method (build_tree's ``method``).
METHODS = LINKAGE_METHODS + JOINING_METHODS

#: What becomes of a negative branch length (``negative``): set to zero, or kept as computed.
NEGATIVE_RULES = ("zero", "keep")

#: Floating-point precision of a distance matrix (``precision``), name -> numpy dtype.
PRECISIONS = {"double": np.float64, "single": np.float32}

#: Sequence alphabets (``alphabet``).
ALPHABETS = ("dna", "protein")

#: Sites a pair uses (``gaps``): those both sequences have, or those every sequence has.
GAP_MODES = ("pairwise", "complete")
#: Where base frequencies come from (``freqs``): the whole alignment, or each pair.
FREQ_MODES = ("alignment", "pair")
#: What an undefined (saturated) distance does (``saturated``): stop the run, or take a cap.
SATURATED_MODES = ("error", "cap")

#: Support measures (``support``): Felsenstein bootstrap proportion, transfer bootstrap expectation.
SUPPORT_MEASURES = ("fbp", "tbe")

#: Tree file formats (``format`` of Tree.write).
TREE_FORMATS = ("newick", "nexus")

#: Which root groups of taxa hang from (``root`` of clusters_within).
CLUSTER_ROOTS = ("auto", "stored", "midpoint")

#: Kinds of the warnings a run reports (:class:`cladewright.errors.CladewrightWarning`).
WARNING_KINDS = ("saturated", "replicates_capped", "negative_lengths", "little_data")
