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
39:783-791 (FBP); Lemoine et al. (2018) Nature 556:452-456 (TBE); Desper & Gascuel
(2002) J. Comput. Biol. 9:687-705 (greedy BME insertion, NNI).
"""

from __future__ import annotations

from typing import Final, Literal, Union, get_args

import numpy as np

__all__ = ["CRITERIA", "LENGTH_CRITERIA", "Criterion", "LengthCriterion", "INSERTION_METHODS", "REFINEMENTS",
           "LINKAGE_METHODS", "JOINING_METHODS", "METHODS", "NEGATIVE_RULES", "PRECISIONS", "ALPHABETS",
           "GAP_MODES", "FREQ_MODES", "SATURATED_MODES", "SUPPORT_MEASURES", "SUPPORT_WORDS", "TREE_FORMATS", "CLUSTER_ROOTS",
           "WARNING_KINDS",
           "LinkageMethod", "JoiningMethod", "InsertionMethod", "Method", "Refinement", "NegativeRule", "Precision", "Alphabet", "GapMode",
           "FreqMode", "SaturatedMode", "SupportMeasure", "TreeFormat", "ClusterRoot", "WarningKind"]

# Each vocabulary is a typing.Literal (PEP 586) for annotations, and the tuple
# of its names is read from it, so the two cannot drift apart.

#: Tree methods of the Lance-Williams family: a rooted, ultrametric tree.
LinkageMethod = Literal["upgma", "wpgma", "single", "complete"]
LINKAGE_METHODS: Final[tuple[LinkageMethod, ...]] = get_args(LinkageMethod)
#: Tree methods that join neighbours: an unrooted tree with a basal trifurcation.
JoiningMethod = Literal["nj", "bionj"]
JOINING_METHODS: Final[tuple[JoiningMethod, ...]] = get_args(JoiningMethod)
#: Tree methods that put taxa one at a time on the best branch: greedy balanced minimum evolution
#: (Desper & Gascuel 2002); an unrooted tree with a basal trifurcation.
InsertionMethod = Literal["bme"]
INSERTION_METHODS: Final[tuple[InsertionMethod, ...]] = get_args(InsertionMethod)
#: Every tree method (build_tree's ``method``).
Method = Union[LinkageMethod, JoiningMethod, InsertionMethod]
METHODS: Final[tuple[Method, ...]] = LINKAGE_METHODS + JOINING_METHODS + INSERTION_METHODS

#: Topology searches after the start (build_tree's ``refine``): none, nearest-neighbour
#: interchanges (Desper & Gascuel 2002) or subtree pruning and regrafting under BME (Hordijk &
#: Gascuel 2005), each to a local optimum. ``refine=None`` means "none".
Refinement = Literal["none", "nni", "spr"]
REFINEMENTS: Final[tuple[Refinement, ...]] = get_args(Refinement)

#: Criteria for the branch lengths of a given tree (build/criteria.py); tree lengths take the first two.
Criterion = Literal["bme", "ols", "wls"]
CRITERIA: Final[tuple[Criterion, ...]] = get_args(Criterion)
LengthCriterion = Literal["bme", "ols"]
LENGTH_CRITERIA: Final[tuple[LengthCriterion, ...]] = get_args(LengthCriterion)

#: What becomes of a negative branch length (``negative``): set to zero, or kept as computed.
NegativeRule = Literal["zero", "keep"]
NEGATIVE_RULES: Final[tuple[NegativeRule, ...]] = get_args(NegativeRule)

#: Floating-point precision of a distance matrix (``precision``), name -> numpy dtype.
Precision = Literal["double", "single"]
PRECISIONS: Final[dict[str, type[np.floating]]] = {"double": np.float64, "single": np.float32}

#: Sequence alphabets (``alphabet``).
Alphabet = Literal["dna", "protein"]
ALPHABETS: Final[tuple[Alphabet, ...]] = get_args(Alphabet)

#: Sites a pair uses (``gaps``): those both sequences have, or those every sequence has.
GapMode = Literal["pairwise", "complete"]
GAP_MODES: Final[tuple[GapMode, ...]] = get_args(GapMode)
#: Where base frequencies come from (``freqs``): the whole alignment, each pair, or the model's own
#: (the published frequencies of the empirical amino-acid models).
FreqMode = Literal["alignment", "pair", "model"]
FREQ_MODES: Final[tuple[FreqMode, ...]] = get_args(FreqMode)
#: What an undefined (saturated) distance does (``saturated``): stop the run, or take a cap.
SaturatedMode = Literal["error", "cap"]
SATURATED_MODES: Final[tuple[SaturatedMode, ...]] = get_args(SaturatedMode)

#: Support measures (``support``): Felsenstein bootstrap proportion, transfer bootstrap expectation.
SupportMeasure = Literal["fbp", "tbe"]
SUPPORT_MEASURES: Final[tuple[SupportMeasure, ...]] = get_args(SupportMeasure)
#: The command line's words for the support measures (``--support``), each with the library's
#: spelling: ``proportion`` is the Felsenstein bootstrap proportion (FBP), ``transfer`` the
#: transfer bootstrap expectation (TBE).
SUPPORT_WORDS: Final[dict[str, SupportMeasure]] = {"proportion": "fbp", "transfer": "tbe"}

#: Tree file formats (``format`` of Tree.write).
TreeFormat = Literal["newick", "nexus"]
TREE_FORMATS: Final[tuple[TreeFormat, ...]] = get_args(TreeFormat)

#: Which root groups of taxa hang from (``root`` of clusters_within).
ClusterRoot = Literal["auto", "stored", "midpoint"]
CLUSTER_ROOTS: Final[tuple[ClusterRoot, ...]] = get_args(ClusterRoot)

#: Kinds of the warnings a run reports (:class:`cladewright.errors.CladewrightWarning`).
WarningKind = Literal["saturated", "rates_fallback", "replicates_capped", "negative_lengths", "little_data"]
WARNING_KINDS: Final[tuple[WarningKind, ...]] = get_args(WarningKind)
