"""cladewright: distance-based phylogenetic trees with bootstrap support.

The pipeline runs one way: alignment -> pair counts -> DistanceMatrix -> Tree
-> support -> Newick / NEXUS.

>>> import cladewright as cw                                    # doctest: +SKIP
>>> aln = cw.read_alignment("example_alignments/glass_snails_coi.fasta")
>>> dm = cw.distance_matrix(aln, model="k2p")
"""

__version__ = "0.1.0"

from .alignment import Alignment, read_alignment
from .distances import MODELS, distance_matrix
from .errors import CladewrightError, InputError, SaturationError
from .matrix import DistanceMatrix, read_distance_matrix

__all__ = [
    "Alignment", "read_alignment", "MODELS", "distance_matrix", "DistanceMatrix", "read_distance_matrix",
    "CladewrightError", "InputError", "SaturationError",
]
