"""Parsers for aligned FASTA and for the MATRIX of a NEXUS DATA or
CHARACTERS block (Maddison, Swofford & Maddison 1997).

Both return ``(names, sequences)`` as lists of str; encoding and the checks
on states and lengths are the caller's (:mod:`cladewright.alignment`).
"""

from __future__ import annotations

import re

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


_TOKEN = re.compile(r"\[[^\]]*\]|'(?:[^']|'')*'|\"[^\"]*\"|[=;]|[^\s=;\[\]'\"]+|\n", re.S)
_POLYMORPHISM = re.compile(r"\{[^}]*\}|\([^)]*\)")


def _tokens(text, start, source):
    """(token, line) pairs from ``start``; comments dropped, newlines kept as '\\n'."""
    line = text.count("\n", 0, start) + 1
    for m in _TOKEN.finditer(text, start):
        tok = m.group()
        if tok.startswith("["):
            if not tok.endswith("]"):
                raise InputError(f"line {line}: a comment '[' is never closed; add the ']'", source=source)
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


def parse_nexus_matrix(text, source):
    """Names and sequences from the MATRIX of the first DATA or CHARACTERS block."""
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
            _read_settings(command, settings)
            command = []
            continue
        if not command and tok.lower() == "matrix":
            return _read_matrix(toks, settings, line, source)
        if not command and tok.lower() == "end":
            break
        command.append(tok)
    raise InputError("the DATA block has no MATRIX; add 'MATRIX' followed by one row per sequence and ';'",
                     source=source)


def _read_settings(command, settings):
    if not command:
        return
    head = command[0].lower()
    if head not in ("dimensions", "format"):
        return
    words = command[1:]
    i = 0
    while i < len(words):
        key = words[i].lower()
        if i + 2 < len(words) and words[i + 1] == "=":
            settings[key] = _unquote(words[i + 2]) if key not in ("missing", "gap", "matchchar") else words[i + 2]
            i += 3
        else:
            settings[key] = True
            i += 1


def _read_matrix(toks, settings, start_line, source):
    interleaved = settings.get("interleave") not in (None, "no", "NO", "No")
    try:
        nchar = int(settings["nchar"]) if "nchar" in settings else None
        ntax = int(settings["ntax"]) if "ntax" in settings else None
    except ValueError:
        raise InputError("DIMENSIONS has a non-integer NTAX or NCHAR; give whole numbers", source=source) from None
    missing, gap, match = settings.get("missing", "?"), settings.get("gap", "-"), settings.get("matchchar")
    order, seqs, first_line = [], {}, {}
    current, at_line_start = None, True
    for tok, line in toks:
        if tok == ";":
            break
        if tok == "\n":
            at_line_start = True
            continue
        needs_name = current is None or (interleaved and at_line_start) or (
            not interleaved and nchar is not None and len("".join(seqs[current])) >= nchar)
        at_line_start = False
        if needs_name:
            current = _unquote(tok)
            if current not in seqs:
                if not interleaved and current in first_line:
                    raise InputError(f"line {line}: sequence name {current!r} was already used on line "
                                     f"{first_line[current]}; give every sequence a unique name", source=source)
                order.append(current)
                seqs[current] = []
                first_line[current] = line
            elif not interleaved:
                raise InputError(f"line {line}: sequence name {current!r} was already used on line "
                                 f"{first_line[current]}; give every sequence a unique name", source=source)
            continue
        seqs[current].append(_POLYMORPHISM.sub("?", tok))
    else:
        raise InputError(f"line {start_line}: the MATRIX is never closed with ';'; end it with ';' and 'END;'",
                         source=source)
    if not order:
        raise InputError(f"line {start_line}: the MATRIX is empty; add one row per sequence", source=source)
    out = []
    for name in order:
        seq = "".join(seqs[name])
        if missing != "?":
            seq = seq.replace(missing, "?")
        if gap != "-":
            seq = seq.replace(gap, "-")
        out.append(seq)
    if match:
        ref = out[0]
        out = [out[0]] + [_apply_match(s, ref, match) for s in out[1:]]
    if ntax is not None and ntax != len(order):
        raise InputError(f"DIMENSIONS says NTAX={ntax} but the MATRIX has {len(order)} rows; make them agree",
                         source=source)
    if nchar is not None:
        for name, seq in zip(order, out):
            if len(seq) != nchar:
                raise InputError(f"sequence {name!r} has {len(seq)} sites but DIMENSIONS says NCHAR={nchar}; "
                                 "make them agree", source=source)
    return order, out


def _apply_match(seq, ref, match):
    if match not in seq:
        return seq
    return "".join(r if c == match else c for c, r in zip(seq, ref)) + seq[len(ref):]
