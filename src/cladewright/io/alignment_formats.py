"""Internal: the aligned FASTA parser behind cladewright.read_alignment.

Aligned sequence text: the format told from the content, and aligned FASTA.

A text starting with ``>`` is FASTA; one starting with ``#NEXUS`` is NEXUS,
whose DATA or CHARACTERS block is read by
:mod:`cladewright.io.nexus_alignment` (Maddison, Swofford & Maddison 1997).
The parsers return ``(names, sequences)`` as lists of str; encoding and the
checks on states and lengths are the caller's
(:func:`cladewright.alignment.encode`).
"""

from __future__ import annotations

from typing import Any

from ..choices import Alphabet
from ..errors import InputError
from .nexus_alignment import parse_nexus_matrix

__all__ = ["parse_alignment", "parse_fasta"]


def parse_alignment(text: str, source: str | None) -> tuple[list[str], list[str], Alphabet | None]:
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
        info: dict[str, Any] = {}
        names, seqs = parse_nexus_matrix(text, source, info)
        return names, seqs, info.get("alphabet")
    first = stripped.splitlines()[0][:40]
    raise InputError(f"does not look like an alignment (it starts {first!r}); give aligned FASTA "
                     "(records starting with '>') or NEXUS (starting with '#NEXUS')", source=source)


def _check_unique(names: list[str], lines: list[int], source: str | None) -> None:
    seen: dict[str, int] = {}
    for name, line in zip(names, lines):
        if name in seen:
            raise InputError(f"line {line}: sequence name {name!r} was already used on line {seen[name]}; "
                             "give every sequence a unique name", source=source)
        seen[name] = line


def parse_fasta(text: str, source: str | None) -> tuple[list[str], list[str]]:
    """Records of an aligned FASTA text. A record's name is the first word
    of its header line (common practice); spaces inside sequence lines are
    ignored."""
    names: list[str] = []
    seqs: list[str] = []
    lines: list[int] = []
    chunks: list[str] | None = None
    for lineno, line in enumerate(text.split("\n"), start=1):
        if line.startswith(">"):
            words = line[1:].strip().split(None, 1)
            if not words:
                raise InputError(f"line {lineno}: a '>' header with no name; give each sequence a name",
                                 source=source)
            if chunks is not None:
                seqs.append("".join(chunks))
            names.append(words[0])
            lines.append(lineno)
            chunks = []
        elif line.strip():
            if chunks is None:
                raise InputError(f"line {lineno}: sequence text before the first '>' header; "
                                 "start each record with a '>name' line", source=source)
            chunks.append("".join(line.split()))
    if chunks is not None:
        seqs.append("".join(chunks))
    for name, seq, at in zip(names, seqs, lines):
        if not seq:
            raise InputError(f"line {at}: sequence {name!r} is empty; remove the record or add its sequence",
                             source=source)
    _check_unique(names, lines, source)
    return names, seqs
