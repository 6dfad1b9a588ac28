"""Alignment: names, encoded states and the distinct site patterns.

States are encoded as uint8: ``0 .. k-1`` for the unambiguous states of the
alphabet (A C G T for DNA; the 20 amino acids in alphabetical order of their
one-letter codes for protein), ``k`` for a gap and ``k + 1`` for anything
missing or ambiguous. IUPAC ambiguity codes (NC-IUB 1985) are accepted and
treated as missing for distances (common practice).

:func:`cladewright.read_alignment` reads an alignment file into an
:class:`Alignment`.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from typing import Any, cast

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .choices import ALPHABETS, Alphabet
from .errors import InputError

__all__ = ["Alignment", "ALPHABETS", "encode", "detect_alphabet", "identical_groups", "distinct_sequences"]

DNA_STATES = "ACGT"
PROTEIN_STATES = "ACDEFGHIKLMNPQRSTVWY"
# NC-IUB (1985) nucleotide ambiguity codes, plus the usual marks for missing data.
DNA_AMBIGUOUS = "RYSWKMBDHVN?X"
# B (D or N), Z (E or Q), J (I or L), X (any), U and O (rare amino acids read
# as missing: most matrices lack them), * (stop), ? (missing).
PROTEIN_AMBIGUOUS = "BZJXUO*?"
GAPS = "-."
# A letter that is no nucleotide code marks protein when the alphabet is detected.
_PROTEIN_ONLY = set("EFIJLOPQZ*")


def _code_table(alphabet: str) -> NDArray[np.uint8]:
    """A 256-entry lookup from byte to state code; 255 marks a byte outside the alphabet."""
    states = DNA_STATES if alphabet == "dna" else PROTEIN_STATES
    ambiguous = DNA_AMBIGUOUS if alphabet == "dna" else PROTEIN_AMBIGUOUS
    k = len(states)
    table = np.full(256, 255, dtype=np.uint8)
    for code, ch in enumerate(states):
        table[ord(ch)] = table[ord(ch.lower())] = code
    if alphabet == "dna":
        table[ord("U")] = table[ord("u")] = DNA_STATES.index("T")
    for ch in ambiguous:
        table[ord(ch)] = table[ord(ch.lower())] = k + 1
    for ch in GAPS:
        table[ord(ch)] = k
    return table


class Alignment:
    """An aligned set of sequences, encoded, with its distinct site patterns.

    Attributes
    ----------
    names : tuple of str
    alphabet : {"dna", "protein"}
    states : ndarray of uint8, shape (n, L)
        Encoded states (see the module docstring).
    patterns : ndarray of uint8, shape (n, S)
        The distinct columns of ``states``.
    weights : ndarray of int64, shape (S,)
        How many sites show each pattern; sums to L.
    site_pattern : ndarray of int64, shape (L,)
        The pattern of each site.
    source : str
        Where the alignment was read from, for messages.
    multiplicity : ndarray of int64, shape (n,)
        How many sequences each row stands for: 1 each, except in the
        alignment of distinct sequences (:func:`distinct_sequences`), where a
        row stands for its group of identical sequences. Base frequencies
        pooled over the alignment count each row this many times, so they
        are those of the full alignment.
    """

    names: tuple[str, ...]
    alphabet: Alphabet
    states: NDArray[np.uint8]
    patterns: NDArray[np.uint8]
    weights: NDArray[np.int64]
    site_pattern: NDArray[np.int64]
    source: str
    multiplicity: NDArray[np.int64]

    def __init__(self, names: Iterable[str], states: ArrayLike, alphabet: str, *, source: str = "<alignment>",
                 multiplicity: ArrayLike | None = None) -> None:
        self.names = tuple(names)
        _check_input(self.names, states, alphabet, source)
        # A copy of the caller's array, read-only: changing it later must not
        # change an alignment whose patterns were already counted.
        self.states = np.array(states, dtype=np.uint8, order="C", copy=True)
        self.states.flags.writeable = False
        self.alphabet = cast(Alphabet, alphabet)  # checked above
        self.source = source
        self.patterns, self.weights, self.site_pattern = _site_patterns(self.states)
        n = self.states.shape[0]
        self.multiplicity = (np.ones(n, np.int64) if multiplicity is None
                             else np.array(multiplicity, dtype=np.int64).reshape(-1))
        if self.multiplicity.shape != (n,) or (n and self.multiplicity.min() < 1):
            raise InputError(f"multiplicity must hold {n} whole numbers >= 1, one per sequence")

    @property
    def n_states(self) -> int:
        """Number of unambiguous states: 4 for DNA, 20 for protein."""
        return len(DNA_STATES) if self.alphabet == "dna" else len(PROTEIN_STATES)

    @property
    def n_taxa(self) -> int:
        """Number of sequences ``n``."""
        return self.states.shape[0]

    @property
    def n_sites(self) -> int:
        """Number of sites ``L``."""
        return self.states.shape[1]

    @property
    def n_patterns(self) -> int:
        """Number of distinct site patterns ``S``."""
        return self.patterns.shape[1]

    def unambiguous(self) -> NDArray[np.bool_]:
        """Boolean mask (n, L) of unambiguous states."""
        return self.states < self.n_states

    def summary(self) -> dict[str, Any]:
        """Counts for the run summary and report."""
        k = self.n_states
        total = self.states.size or 1
        per_seq = (self.states < k).mean(axis=1) if self.n_sites else np.zeros(self.n_taxa)
        return {
            "taxa": self.n_taxa,
            "sites": self.n_sites,
            "patterns": self.n_patterns,
            "alphabet": self.alphabet,
            "gap_fraction": float(np.count_nonzero(self.states == k) / total),
            "missing_fraction": float(np.count_nonzero(self.states == k + 1) / total),
            "least_data": (self.names[int(np.argmin(per_seq))], float(per_seq.min())) if self.n_taxa else None,
        }

    def __repr__(self) -> str:
        return f"Alignment({self.n_taxa} sequences x {self.n_sites} sites, {self.alphabet})"


def _check_input(names: tuple[str, ...], states: ArrayLike, alphabet: object, source: str) -> None:
    """Refuse what ``Alignment(...)`` would misread: an alphabet other than
    dna or protein (the state count would fall back to protein's), or codes
    outside 0..k+1 (a cast to uint8 would wrap 256 to 0)."""
    if not isinstance(alphabet, str) or alphabet not in ALPHABETS:
        raise InputError(f"unknown alphabet {alphabet!r}; choose dna or protein", source=source)
    arr = np.asarray(states)
    if arr.ndim != 2 or arr.dtype.kind not in "iu":
        raise InputError(f"states must be a 2-D integer array, one row per sequence (got {arr.dtype} of shape "
                         f"{arr.shape}); make it with encode(names, sequences, alphabet, source)", source=source)
    if arr.shape[0] != len(names):
        raise InputError(f"{len(names)} names for {arr.shape[0]} rows of states; give one name per sequence",
                         source=source)
    top = (len(DNA_STATES) if alphabet == "dna" else len(PROTEIN_STATES)) + 1
    if arr.size and (arr.max() > top or (arr.dtype.kind == "i" and arr.min() < 0)):
        raise InputError(f"states holds codes outside 0..{top} for {alphabet}; make it with "
                         "encode(names, sequences, alphabet, source)", source=source)
    seen = set()
    for name in names:
        if name in seen:
            raise InputError(f"sequence name {name!r} appears twice; give every sequence a unique name",
                             source=source)
        seen.add(name)


def _site_patterns(states: NDArray[np.uint8]) -> tuple[NDArray[np.uint8], NDArray[np.int64], NDArray[np.int64]]:
    """Distinct columns, their counts and each site's pattern index (sorted, deterministic)."""
    n, length = states.shape
    if length == 0:
        return states.copy(), np.zeros(0, np.int64), np.zeros(0, np.int64)
    cols = np.ascontiguousarray(states.T)
    keyed = cols.view(np.dtype((np.void, n)))[:, 0]
    _, first, inverse, counts = np.unique(keyed, return_index=True, return_inverse=True, return_counts=True)
    patterns = np.ascontiguousarray(cols[first].T)
    return patterns, counts.astype(np.int64), inverse.reshape(-1).astype(np.int64)


def identical_groups(alignment: Alignment) -> tuple[NDArray[np.int64], NDArray[np.int64]]:
    """The groups of identical sequences of an alignment.

    Two sequences are identical when they hold the same state code at every
    site: the same bases, the same gaps and the same ambiguity codes (IUPAC
    codes are all read as missing, so ``N`` and ``R`` at a site count as the
    same). Any model then gives them the same distance to every other
    sequence.

    Parameters
    ----------
    alignment : Alignment

    Returns
    -------
    first : int64 ndarray (g,)
        The first sequence of each group, in the order of the alignment.
    group : int64 ndarray (n,)
        The group of every sequence, numbered in the order of ``first``.

    Examples
    --------
    >>> aln = Alignment("abcd", encode("abcd", ["AC-T", "AGGT", "AC-T", "AC-T"], "dna", "x"), "dna")
    >>> first, group = identical_groups(aln)
    >>> first.tolist(), group.tolist()
    ([0, 1], [0, 1, 0, 0])
    """
    patterns = np.ascontiguousarray(alignment.patterns)
    n, width = patterns.shape
    if n == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    if width == 0:
        return np.zeros(1, np.int64), np.zeros(n, np.int64)
    # Distinct columns describe the rows exactly (fewer bytes than the sites).
    keyed = patterns.view(np.dtype((np.void, width)))[:, 0]
    _, first, inverse = np.unique(keyed, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    # Number the groups by their first sequence, so the order is the alignment's.
    order = np.argsort(first, kind="stable")
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    return first[order].astype(np.int64), rank[inverse].astype(np.int64)


def distinct_sequences(alignment: Alignment) -> tuple[Alignment, NDArray[np.int64]]:
    """The alignment with each group of identical sequences entered once.

    Parameters
    ----------
    alignment : Alignment

    Returns
    -------
    distinct : Alignment
        One row per group (its first sequence and name, in the order of the
        alignment), with ``multiplicity`` the size of each group (times the
        rows' own multiplicity), so that base frequencies are unchanged.
    group : int64 ndarray (n,)
        The row of ``distinct`` that stands for each sequence.

    Examples
    --------
    >>> aln = Alignment("abc", encode("abc", ["ACGT", "AGGT", "ACGT"], "dna", "x"), "dna")
    >>> d, group = distinct_sequences(aln)
    >>> d.names, d.multiplicity.tolist(), group.tolist()
    (('a', 'b'), [2, 1], [0, 1, 0])
    """
    first, group = identical_groups(alignment)
    if first.size == alignment.n_taxa:
        return alignment, group
    mult = np.bincount(group, weights=alignment.multiplicity, minlength=first.size).astype(np.int64)
    distinct = Alignment([alignment.names[i] for i in first.tolist()], alignment.states[first],
                         alignment.alphabet, source=alignment.source, multiplicity=mult)
    return distinct, group


def detect_alphabet(sequences: Iterable[str]) -> Alphabet:
    """'protein' if any letter is no nucleotide code (NC-IUB 1985), else 'dna'."""
    seen: set[str] = set()
    for seq in sequences:
        seen.update(seq.upper())
    return "protein" if seen & _PROTEIN_ONLY else "dna"


def encode(names: Sequence[str], sequences: Sequence[str], alphabet: str, source: str,
           positions: Sequence[Callable[[int], str]] | None = None) -> NDArray[np.uint8]:
    """Encode sequences as states, with errors naming the record and position.

    ``positions`` gives, per sequence, a function from column to a
    "line L, column C" string for messages (optional).
    """
    lengths = {len(s) for s in sequences}
    if len(lengths) > 1:
        expected = len(sequences[0])
        bad = next(i for i, s in enumerate(sequences) if len(s) != expected)
        raise InputError(
            f"sequence {names[bad]!r} has {len(sequences[bad])} sites but {names[0]!r} has {expected}; "
            "an alignment needs sequences of equal length (align them first, or pad with '-')", source=source)
    table = _code_table(alphabet)
    length = lengths.pop() if lengths else 0
    states = np.empty((len(sequences), length), dtype=np.uint8)
    for i, seq in enumerate(sequences):
        # Code points, not bytes: a character beyond Latin-1 must be
        # reported, not silently read as '?' (missing).
        raw = np.frombuffer(seq.encode("utf-32-le", "surrogatepass"), dtype="<u4")
        row = table[np.minimum(raw, 255)]
        row[raw > 255] = 255
        if (row == 255).any():
            col = int(np.flatnonzero(row == 255)[0])
            hint = ('pass alphabet="protein" if these are amino acids' if alphabet == "dna"
                    else "remove or replace it (X marks an unknown residue)")
            raise InputError(f"sequence {names[i]!r}, site {col + 1}: {seq[col]!r} is not "
                             f"{'a nucleotide (IUPAC, NC-IUB 1985)' if alphabet == 'dna' else 'an amino-acid'} code; "
                             f"{hint}", source=source)
        states[i] = row
    return states
