"""Aligned sequence text: the format told from the content, and aligned FASTA.

A text starting with ``>`` is FASTA; one starting with ``#NEXUS`` is NEXUS,
whose DATA or CHARACTERS block is read by
:mod:`cladewright.io.nexus_alignment` (Maddison, Swofford & Maddison 1997).
The parsers return ``(names, sequences)`` as lists of str; encoding and the
checks on states and lengths are the caller's
(:func:`cladewright.alignment.encode`).
"""

from __future__ import annotations

from ..errors import InputError
from .nexus_alignment import parse_nexus_matrix

__all__ = ["parse_alignment", "parse_fasta"]


def parse_alignment(text, source):
    """Names and sequences of an aligned FASTA or NEXUS text.

    Parameters
    ----------
    text : str
        The content; ``>`` starts FASTA, ``#NEXUS`` starts NEXUS.
    source : str
        File name for messages.

    Returns
    -------
    names : list of str
    sequences : list of str
    alphabet : {"dna", "protein"} or None
        What a NEXUS FORMAT DATATYPE declares, else None.

    Raises
    ------
    InputError
        For an empty text, one in neither format, and malformed records.

    References
    ----------
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    stripped = text.lstrip()
    if not stripped:
        raise InputError("the file is empty; give an aligned FASTA or NEXUS file", source=source)
    if stripped.startswith(">"):
        names, seqs = parse_fasta(text, source)
        return names, seqs, None
    if stripped[:6].upper() == "#NEXUS":
        info = {}
        names, seqs = parse_nexus_matrix(text, source, info)
        return names, seqs, info.get("alphabet")
    first = stripped.splitlines()[0][:40]
    raise InputError(f"does not look like an alignment (it starts {first!r}); give aligned FASTA "
                     "(records starting with '>') or NEXUS (starting with '#NEXUS')", source=source)


def _check_unique(names, lines, source):
    seen = {}
    for name, line in zip(names, lines):
        if name in seen:
            raise InputError(f"line {line}: sequence name {name!r} was already used on line {seen[name]}; "
                             "give every sequence a unique name", source=source)
        seen[name] = line


def parse_fasta(text, source):
    """Records of an aligned FASTA text. A record's name is the first word
    of its header line (common practice); spaces inside sequence lines are
    ignored."""
    names, seqs, lines = [], [], []
    chunks = None
    for lineno, line in enumerate(text.split("\n"), start=1):
        if line.startswith(">"):
            name = line[1:].strip().split(None, 1)
            if not name:
                raise InputError(f"line {lineno}: a '>' header with no name; give each sequence a name",
                                 source=source)
            if chunks is not None:
                seqs.append("".join(chunks))
            names.append(name[0])
            lines.append(lineno)
            chunks = []
        elif line.strip():
            if chunks is None:
                raise InputError(f"line {lineno}: sequence text before the first '>' header; "
                                 "start each record with a '>name' line", source=source)
            chunks.append("".join(line.split()))
    if chunks is not None:
        seqs.append("".join(chunks))
    for name, seq, line in zip(names, seqs, lines):
        if not seq:
            raise InputError(f"line {line}: sequence {name!r} is empty; remove the record or add its sequence",
                             source=source)
    _check_unique(names, lines, source)
    return names, seqs
