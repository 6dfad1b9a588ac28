"""Reading and writing files.

The formats (text <-> plain values; they import none of the nouns):
:mod:`~cladewright.io.files` (reading inputs: plain, gzip, standard input),
:mod:`~cladewright.io.output` (atomic outputs),
:mod:`~cladewright.io.alignment_formats` and
:mod:`~cladewright.io.nexus_alignment` (aligned FASTA and NEXUS),
:mod:`~cladewright.io.matrix_tsv` (labelled TSV distance matrices),
:mod:`~cladewright.io.newick`, :mod:`~cladewright.io.newick_writer` and
:mod:`~cladewright.io.nexus` (trees in Newick and NEXUS; Maddison, Swofford &
Maddison 1997, Syst. Biol. 46:590-621).

:mod:`~cladewright.io.readers` makes alignments, distance matrices and trees
of what those return; its readers are re-exported here. They are loaded on
first use, so that the nouns can use the formats below them without
loading the readers above them.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # for type checkers only: at run time the readers load on first use
    from .readers import parse_newick, parse_nexus_trees, read_alignment, read_distance_matrix, read_trees

__all__ = ["read_trees", "read_alignment", "read_distance_matrix", "parse_newick", "parse_nexus_trees"]


def __getattr__(name: str) -> Any:
    if name in __all__:
        from . import readers

        return getattr(readers, name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
