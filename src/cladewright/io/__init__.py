"""Reading and writing files: inputs (plain, gzip, standard input), trees in
Newick and NEXUS (Maddison, Swofford & Maddison 1997, Syst. Biol.
46:590-621)."""

from __future__ import annotations

import os

from .files import read_text

__all__ = ["read_trees"]


def read_trees(path):
    """All trees in a Newick or NEXUS file.

    A file whose text starts with ``#NEXUS`` (case-insensitive, after any
    blank lines) is read as NEXUS, any other as Newick.

    Parameters
    ----------
    path : str or os.PathLike
        The file (gzip allowed; ``-`` for standard input).

    Returns
    -------
    list of Tree

    References
    ----------
    Newick format: the trade's de facto standard (1986 informal specification);
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    from .newick import parse_newick
    from .nexus import parse_nexus_trees

    source = os.fspath(path)
    text = read_text(path)
    if text.lstrip()[:6].upper() == "#NEXUS":
        return parse_nexus_trees(text, source=source)
    return parse_newick(text, source=source)
