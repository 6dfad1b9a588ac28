"""Parsers for aligned FASTA and for the MATRIX of a NEXUS DATA or
CHARACTERS block (Maddison, Swofford & Maddison 1997).

Both return ``(names, sequences)`` as lists of str; encoding and the checks
on states and lengths are the caller's (:mod:`cladewright.alignment`).
"""

from __future__ import annotations

import re

import numpy as np

from ..errors import InputError

__all__ = ["parse_fasta", "parse_nexus_matrix"]


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


_TOKEN = re.compile(r"\[[^\]]*\]|'(?:[^']|'')*'|\"[^\"]*\"|[=;]|[^\s=;\[\]'\"]+|\n|[\[\]'\"]", re.S)
_POLYMORPHISM = re.compile(r"\{[^}]*\}|\([^)]*\)")
_WHOLE = re.compile(r"[0-9]+")


def _tokens(text, start, source):
    """(token, line) pairs from ``start``; comments dropped, newlines kept as '\\n'."""
    line = text.count("\n", 0, start) + 1
    for m in _TOKEN.finditer(text, start):
        tok = m.group()
        if tok == "[":
            raise InputError(f"line {line}: a comment '[' is never closed; add the ']'", source=source)
        if tok == "]":
            raise InputError(f"line {line}: a ']' with no '[' before it; remove it or add the '['", source=source)
        if tok in ("'", '"'):
            raise InputError(f"line {line}: a quoted name ({tok}) is never closed; add the closing {tok} "
                             "(write '' for a quote inside)", source=source)
        if tok.startswith("["):
            line += tok.count("\n")
            continue
        yield tok, line
        line += tok.count("\n")


def _unquote(tok):
    if len(tok) >= 2 and tok[0] == tok[-1] == "'":
        return tok[1:-1].replace("''", "'")
    if len(tok) >= 2 and tok[0] == tok[-1] == '"':
        return tok[1:-1]
    # Underscores are kept as written, so that the NEXUS and FASTA forms of an
    # alignment give the same names.
    return tok


def parse_nexus_matrix(text, source, info=None):
    """Names and sequences from the MATRIX of the first DATA or CHARACTERS block.

    Parameters
    ----------
    text : str
        NEXUS text (Maddison, Swofford & Maddison 1997).
    source : str
        File name for messages.
    info : dict, optional
        Filled with the block's settings: ``alphabet`` is "dna" or "protein"
        when FORMAT DATATYPE says so (DNA, RNA, NUCLEOTIDE; PROTEIN).

    Returns
    -------
    (list of str, list of str)
        Names and sequences, with the FORMAT's MISSING and GAP symbols turned
        into ``?`` and ``-`` and MATCHCHAR replaced by the first row's state.
        Without NCHAR in DIMENSIONS a non-interleaved row must be on one line.
    """
    m = re.search(r"begin\s+(data|characters)\s*;", text, re.I)
    if not m:
        raise InputError("a NEXUS file with no DATA or CHARACTERS block; put the alignment in "
                         "'BEGIN DATA; ... MATRIX ... ; END;'", source=source)
    settings = {}
    toks = _tokens(text, m.end(), source)
    command = []
    for tok, line in toks:
        if tok == "\n":
            continue
        if tok == ";":
            _read_settings(command, settings, source)
            command = []
            continue
        if not command and tok.lower() == "matrix":
            _check_format(settings, line, source)
            if info is not None:
                info["alphabet"] = _DATATYPES.get(str(settings.get("datatype", "")).lower())
            return _read_matrix(toks, settings, line, source)
        if not command and tok.lower() == "end":
            break
        command.append((tok, line))
    raise InputError("the DATA block has no MATRIX; add 'MATRIX' followed by one row per sequence and ';'",
                     source=source)


_DATATYPES = {"dna": "dna", "rna": "dna", "nucleotide": "dna", "protein": "protein"}


def _check_format(settings, line, source):
    """Refuse what this reader would misread: other data types, a transposed matrix."""
    datatype = settings.get("datatype")
    if isinstance(datatype, str) and datatype.lower() not in _DATATYPES:
        raise InputError(f"line {line}: FORMAT DATATYPE={datatype} is not sequence data; give DNA, RNA or "
                         "protein (DATATYPE=DNA or PROTEIN)", source=source)
    if settings.get("transpose") is True or str(settings.get("transpose")).lower() == "yes":
        raise InputError(f"line {line}: FORMAT TRANSPOSE (one row per site) is not read; write one row per "
                         "sequence", source=source)


def _read_settings(command, settings, source):
    """Keep the DIMENSIONS and FORMAT subcommands (``key=value`` or a bare ``key``)."""
    if not command:
        return
    head = command[0][0].lower()
    if head not in ("dimensions", "format"):
        return
    words = command[1:]
    i = 0
    while i < len(words):
        word, line = words[i]
        key = word.lower()
        if word == "=":
            raise InputError(f"line {line}: '=' with no setting before it in {head.upper()}; "
                             "write e.g. 'GAP=-'", source=source)
        if i + 1 < len(words) and words[i + 1][0] == "=":
            if i + 2 >= len(words) or words[i + 2][0] == "=":
                raise InputError(f"line {line}: {head.upper()} {word}= has no value; give one, e.g. "
                                 f"'{word}=-' or '{word}=10'", source=source)
            value = _unquote(words[i + 2][0])
            if key in ("missing", "gap", "matchchar") and len(value) != 1:
                raise InputError(f"line {line}: FORMAT {word.upper()}={value!r} must be a single character; "
                                 f"write e.g. {word.upper()}=?", source=source)
            if key in ("ntax", "nchar"):
                if not _WHOLE.fullmatch(value) or int(value) < 1:
                    raise InputError(f"line {line}: DIMENSIONS {word.upper()}={value!r} is not a whole number "
                                     ">= 1; give the number of " + ("sequences" if key == "ntax" else "sites"),
                                     source=source)
                value = int(value)
            settings[key] = value
            i += 3
        else:
            settings[key] = True
            i += 1


def _read_matrix(toks, settings, start_line, source):
    interleaved = str(settings.get("interleave")).lower() not in ("none", "no", "false")
    nchar = settings.get("nchar") if isinstance(settings.get("nchar"), int) else None
    ntax = settings.get("ntax") if isinstance(settings.get("ntax"), int) else None
    missing, gap = settings.get("missing", "?"), settings.get("gap", "-")
    match = settings.get("matchchar")
    missing = missing if isinstance(missing, str) else "?"
    gap = gap if isinstance(gap, str) else "-"
    match = match if isinstance(match, str) else None
    # Without NCHAR a non-interleaved row ends at the end of its line.
    by_line = interleaved or nchar is None
    order, seqs, first_line, sites = [], {}, {}, {}
    current, at_line_start = None, True
    for tok, line in toks:
        if tok == ";":
            break
        if tok == "\n":
            at_line_start = True
            continue
        needs_name = current is None or (by_line and at_line_start) or (
            not by_line and sites[current] >= nchar)
        at_line_start = False
        if needs_name:
            current = _unquote(tok)
            if current not in seqs:
                order.append(current)
                seqs[current] = []
                sites[current] = 0
                first_line[current] = line
            elif not interleaved:
                raise InputError(f"line {line}: sequence name {current!r} was already used on line "
                                 f"{first_line[current]}; give every sequence a unique name", source=source)
            continue
        states = _POLYMORPHISM.sub("?", tok)
        seqs[current].append(states)
        sites[current] += len(states)
    else:
        raise InputError(f"line {start_line}: the MATRIX is never closed with ';'; end it with ';' and 'END;'",
                         source=source)
    if not order:
        raise InputError(f"line {start_line}: the MATRIX is empty; add one row per sequence", source=source)
    for name in order:
        if not sites[name]:
            hint = (" (without NCHAR in DIMENSIONS each row must be 'name states' on one line; "
                    "add NCHAR=...)" if nchar is None and not interleaved else "")
            raise InputError(f"line {first_line[name]}: sequence {name!r} has no states; give each row as "
                             f"a name followed by its sequence{hint}", source=source)
    out = []
    for name in order:
        seq = "".join(seqs[name])
        if missing != "?":
            seq = seq.replace(missing, "?")
        if gap != "-":
            seq = seq.replace(gap, "-")
        out.append(seq)
    if match:
        if match in out[0]:
            raise InputError(f"line {first_line[order[0]]}: the first row uses the MATCHCHAR {match!r}, which "
                             "stands for the first row's state; write the first row in full", source=source)
        ref = out[0]
        out = [out[0]] + [_apply_match(s, ref, match) for s in out[1:]]
    if ntax is not None and ntax != len(order):
        raise InputError(f"DIMENSIONS says NTAX={ntax} but the MATRIX has {len(order)} rows; make them agree",
                         source=source)
    if nchar is not None:
        for name, seq in zip(order, out):
            if len(seq) != nchar:
                raise InputError(f"line {first_line[name]}: sequence {name!r} has {len(seq)} sites but "
                                 f"DIMENSIONS says NCHAR={nchar}; make them agree", source=source)
    return order, out


def _apply_match(seq, ref, match):
    """``seq`` with each MATCHCHAR replaced by the first row's state at that site."""
    if match not in seq:
        return seq
    s = np.array(list(seq))
    r = np.array(list(ref[: len(seq)]))
    hit = np.flatnonzero(s[: r.size] == match)
    s[hit] = r[hit]
    return "".join(s.tolist())
