"""cladewright: distance-based phylogenetic trees with bootstrap support."""

__version__ = "0.1.0"
