"""Internal: the NEXUS alignment parser behind cladewright.read_alignment.

The MATRIX of a NEXUS DATA or CHARACTERS block (Maddison, Swofford &
Maddison 1997. Syst. Biol. 46:590-621) as names and sequences; encoding and
the checks on states and lengths are the caller's
(:func:`cladewright.alignment.encode`)."""

from __future__ import annotations

import re
from collections.abc import Iterator
from typing import Any

import numpy as np

from ..errors import InputError

__all__ = ["parse_nexus_matrix"]

_TOKEN = re.compile(r"\[[^\]]*\]|'(?:[^']|'')*'|\"[^\"]*\"|[=;]|[^\s=;\[\]'\"]+|\n|[\[\]'\"]", re.S)
_POLYMORPHISM = re.compile(r"\{[^}]*\}|\([^)]*\)")
_WHOLE = re.compile(r"[0-9]+")


def _tokens(text: str, start: int, source: str | None) -> Iterator[tuple[str, int]]:
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


def _unquote(tok: str) -> str:
    if len(tok) >= 2 and tok[0] == tok[-1] == "'":
        return tok[1:-1].replace("''", "'")
    if len(tok) >= 2 and tok[0] == tok[-1] == '"':
        return tok[1:-1]
    # Underscores are kept as written, so that the NEXUS and FASTA forms of an
    # alignment give the same names.
    return tok


def parse_nexus_matrix(text: str, source: str | None,
                       info: dict[str, Any] | None = None) -> tuple[list[str], list[str]]:
    """Names and sequences from the MATRIX of the one DATA or CHARACTERS block.

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

    Raises
    ------
    InputError
        Beyond the malformed text: a second DATA or CHARACTERS block; one
        symbol declared for two of MISSING, GAP and MATCHCHAR, or for one of
        them and a state; two names that differ only in case (one name in
        NEXUS); a TAXA block whose NTAX or TAXLABELS disagree with the MATRIX.

    References
    ----------
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    block: str | None = None             # the name of the block being read
    data: Any = None                     # the DATA or CHARACTERS block (a dict): its settings and rows
    taxa_blocks: list[dict[str, Any]] = []
    command: list[tuple[str, int]] = []
    toks = _tokens(text, 0, source)
    for tok, line in toks:
        if tok == "\n":
            continue
        if block is None and not command and tok.lower() != "begin":
            continue  # '#NEXUS' and anything else between blocks
        if tok == ";":
            head = command[0][0].lower() if command else ""
            if head == "begin":
                line = command[0][1]
                _end_data_block(data, block, source)
                block = command[1][0].lower() if len(command) > 1 else ""
                if block in ("data", "characters"):
                    if data is not None:
                        raise InputError(
                            f"line {line}: a second {block.upper()} block (the first, {data['name']}, begins on "
                            f"line {data['line']}); a file holds one alignment here: keep one block, or put "
                            "each alignment in a file of its own", source=source)
                    data = {"name": block.upper(), "line": line, "settings": {}, "where": {}, "rows": None}
                elif block == "taxa":
                    taxa_blocks.append({"line": line, "settings": {}, "where": {}, "labels": None})
            elif head in ("end", "endblock"):
                _end_data_block(data, block, source)
                block = None
            elif block in ("data", "characters"):
                _read_settings(command, data["settings"], source, data["where"])
            elif block == "taxa":
                _read_taxa_command(command, taxa_blocks[-1], source)
            command = []
            continue
        if block in ("data", "characters") and not command and tok.lower() == "matrix":
            if data["rows"] is not None:
                raise InputError(f"line {line}: a second MATRIX in the {data['name']} block (line "
                                 f"{data['line']}); keep one", source=source)
            settings = data["settings"]
            _check_format(settings, data["where"], line, source)
            if info is not None:
                info["alphabet"] = _DATATYPES.get(str(settings.get("datatype", "")).lower())
            data["matrix_line"] = line
            data["rows"] = _read_matrix(toks, settings, line, source, data["where"].get("ntax"))
            continue
        command.append((tok, line))
    if data is None:
        raise InputError("a NEXUS file with no DATA or CHARACTERS block; put the alignment in "
                         "'BEGIN DATA; ... MATRIX ... ; END;'", source=source)
    _end_data_block(data, block, source)
    names, seqs, first_line = data["rows"]
    # NEWTAXA says the block brings its own taxa, so a TAXA block names others.
    if "newtaxa" not in data["settings"]:
        for taxa in taxa_blocks:
            _check_taxa_block(taxa, names, first_line, data["matrix_line"], source)
    return names, seqs


def _end_data_block(data: dict[str, Any] | None, block: str | None, source: str | None) -> None:
    if data is not None and block in ("data", "characters") and data["rows"] is None:
        raise InputError(f"line {data['line']}: the {data['name']} block has no MATRIX; add 'MATRIX' "
                         "followed by one row per sequence and ';'", source=source)


_DATATYPES = {"dna": "dna", "rna": "dna", "nucleotide": "dna", "protein": "protein"}
# The FORMAT and DIMENSIONS subcommands of the standard (Maddison et al. 1997); a key
# written as the start of exactly one of them is read as it (common practice,
# e.g. MATCH for MATCHCHAR), so that a declared symbol is never silently dropped.
_SUBCOMMANDS = {
    "format": ("datatype", "respectcase", "missing", "gap", "symbols", "equate", "matchchar", "labels",
               "nolabels", "transpose", "interleave", "items", "statesformat", "tokens", "notokens"),
    "dimensions": ("newtaxa", "ntax", "nchar"),
}
_ROLES = ("missing", "gap", "matchchar")
_ROLE_DEFAULTS = {"missing": "?", "gap": "-", "matchchar": "."}
# State symbols per alphabet (the encoder reads U as T), and the other letters it
# reads as IUPAC ambiguity codes (NC-IUB 1985) or their amino-acid counterparts.
_STATE_LETTERS = {"dna": "ACGTU", "protein": "ACDEFGHIKLMNPQRSTVWY"}
_AMBIGUITY_LETTERS = {"dna": "RYSWKMBDHVNX", "protein": "BZJXUO"}


def _full_key(head: str, key: str) -> str:
    names = _SUBCOMMANDS[head]
    if key in names:
        return key
    hits = [n for n in names if n.startswith(key)]
    return hits[0] if len(hits) == 1 else key


def _check_format(settings: dict[str, Any], where: dict[str, int], line: int, source: str | None) -> None:
    """Refuse what this reader would misread: other data types, a transposed
    matrix, one symbol with two roles."""
    datatype = settings.get("datatype")
    if isinstance(datatype, str) and datatype.lower() not in _DATATYPES:
        raise InputError(f"line {line}: FORMAT DATATYPE={datatype} is not sequence data; give DNA, RNA or "
                         "protein (DATATYPE=DNA or PROTEIN)", source=source)
    if settings.get("transpose") is True or str(settings.get("transpose")).lower() == "yes":
        raise InputError(f"line {line}: FORMAT TRANSPOSE (one row per site) is not read; write one row per "
                         "sequence", source=source)
    # In the order declared, so that the clash is reported where it is made.
    roles = [r for r in settings if r in _ROLES and isinstance(settings[r], str)]
    fold = (lambda c: c) if "respectcase" in settings else str.upper
    for i, a in enumerate(roles):
        for b in roles[i + 1:]:
            sym = settings[a]
            if fold(sym) == fold(settings[b]):
                raise InputError(
                    f"line {where[b]}: FORMAT {a.upper()}={sym} and {b.upper()}={settings[b]} give one symbol "
                    f"two roles, so a '{sym}' in the MATRIX cannot be read; give each role its own symbol "
                    "(e.g. MISSING=? GAP=- MATCHCHAR=.)", source=source)
    alphabet = _DATATYPES.get(str(datatype).lower()) if isinstance(datatype, str) else None
    for role in roles:
        clash = _state_clash(settings[role].upper(), role, alphabet)
        if clash:
            raise InputError(
                f"line {where[role]}: FORMAT {role.upper()}={settings[role]} is also {clash}, so the MATRIX "
                f"could be read two ways; choose a symbol that is no sequence code (e.g. "
                f"{role.upper()}={_ROLE_DEFAULTS[role]})", source=source)


def _state_clash(sym: str, role: str, alphabet: str | None) -> str | None:
    """What ``sym`` already means in the data, or None.

    MISSING may be an ambiguity code: those are read as missing data for
    distances anyway, so nothing changes. GAP and MATCHCHAR may be neither.
    """
    for alpha in ([alphabet] if alphabet else ["dna", "protein"]):
        kind = "DNA" if alpha == "dna" else "protein"
        if sym in _STATE_LETTERS[alpha]:
            what = f"the {kind} state {sym}"
        elif role != "missing" and sym in _AMBIGUITY_LETTERS[alpha]:
            what = f"the {kind} ambiguity code {sym}"
        else:
            continue
        if alphabet is None:
            what += " (DATATYPE is not given; DATATYPE=DNA or PROTEIN settles which letters are states)"
        return what
    return None


def _read_settings(command: list[tuple[str, int]], settings: dict[str, Any], source: str | None,
                   where: dict[str, int] | None = None) -> None:
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
        key = _full_key(head, word.lower())
        if word == "=":
            raise InputError(f"line {line}: '=' with no setting before it in {head.upper()}; "
                             "write e.g. 'GAP=-'", source=source)
        if where is not None:
            where[key] = line
        if i + 1 < len(words) and words[i + 1][0] == "=":
            if i + 2 >= len(words) or words[i + 2][0] == "=":
                raise InputError(f"line {line}: {head.upper()} {word}= has no value; give one, e.g. "
                                 f"'{word}=-' or '{word}=10'", source=source)
            value: Any = _unquote(words[i + 2][0])  # made an int below for NTAX and NCHAR
            if key in _ROLES and len(value) != 1:
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


def _read_taxa_command(command: list[tuple[str, int]], taxa: dict[str, Any], source: str | None) -> None:
    head = command[0][0].lower() if command else ""
    if head == "dimensions":
        _read_settings(command, taxa["settings"], source, taxa["where"])
    elif head == "taxlabels":
        taxa["labels"] = [(_unquote(tok), line) for tok, line in command[1:]]
        taxa["labels_line"] = command[0][1]


def _check_taxa_block(taxa: dict[str, Any], names: list[str], first_line: dict[str, int], matrix_line: int,
                      source: str | None) -> None:
    """The TAXA block and the MATRIX must name the same taxa, as many."""
    ntax = taxa["settings"].get("ntax")
    labels = taxa["labels"]
    if labels is not None:
        seen: dict[str, tuple[str, int]] = {}
        for name, line in labels:
            folded = name.lower()
            if folded in seen:
                other, other_line = seen[folded]
                raise InputError(f"line {line}: TAXLABELS {_twice(other, other_line, name)}", source=source)
            seen[folded] = (name, line)
        if isinstance(ntax, int) and ntax != len(labels):
            raise InputError(f"line {taxa['where']['ntax']}: the TAXA block says NTAX={ntax} but its TAXLABELS "
                             f"(line {taxa['labels_line']}) lists {len(labels)} names; make them agree",
                             source=source)
    if isinstance(ntax, int) and ntax != len(names):
        raise InputError(f"line {taxa['where']['ntax']}: the TAXA block says NTAX={ntax} but the MATRIX (line "
                         f"{matrix_line}) has {len(names)} rows; make them agree, or remove the TAXA block",
                         source=source)
    if labels is None:
        return
    rows = {name.lower() for name in names}
    for name, line in labels:
        if name.lower() not in rows:
            raise InputError(f"line {line}: taxon {name!r} of the TAXA block has no row in the MATRIX (line "
                             f"{matrix_line}); add its row, or remove it from TAXLABELS", source=source)
    listed = {name.lower() for name, _ in labels}
    for name in names:
        if name.lower() not in listed:
            raise InputError(f"line {first_line[name]}: sequence {name!r} is not in the TAXA block's TAXLABELS "
                             f"(line {taxa['labels_line']}); add it there, or remove its row", source=source)


def _twice(first: str, first_line: int, name: str) -> str:
    if first == name:
        return f"names {name!r} twice (first on line {first_line}); give every taxon a unique name"
    return (f"names {first!r} (line {first_line}) and {name!r}, which differ only in case and so are one "
            "name in NEXUS (Maddison et al. 1997); rename one of them")


def _role_table(settings: dict[str, Any]) -> dict[int, str]:
    """One translation for MISSING, GAP and MATCHCHAR, so that swapped symbols
    (MISSING=- GAP=?) are not turned twice. Letters count in either case,
    as NEXUS symbols do unless RESPECTCASE is given."""
    table: dict[int, str] = {}
    targets = {"missing": "?", "gap": "-"}
    for role in _ROLES:
        sym = settings.get(role)
        if not isinstance(sym, str):
            continue
        target = targets.get(role, sym)
        for s in {sym, sym.upper(), sym.lower()} if "respectcase" not in settings else {sym}:
            if s != target:
                table[ord(s)] = target
    return table


def _read_matrix(toks: Iterator[tuple[str, int]], settings: dict[str, Any], start_line: int, source: str | None,
                 ntax_line: int | None = None) -> tuple[list[str], list[str], dict[str, int]]:
    interleaved = str(settings.get("interleave")).lower() not in ("none", "no", "false")
    nchar: Any = settings.get("nchar") if isinstance(settings.get("nchar"), int) else None
    ntax = settings.get("ntax") if isinstance(settings.get("ntax"), int) else None
    match = settings.get("matchchar")
    match = match if isinstance(match, str) else None
    table = _role_table(settings)
    # Without NCHAR a non-interleaved row ends at the end of its line.
    by_line = interleaved or nchar is None
    order: list[str] = []
    seqs: dict[str, list[str]] = {}
    first_line: dict[str, int] = {}
    sites: dict[str, int] = {}
    folded: dict[str, str] = {}
    current: Any = None  # the name of the row being read, once one begins
    at_line_start = True
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
            known = folded.get(current.lower())
            if known is None:
                folded[current.lower()] = current
                order.append(current)
                seqs[current] = []
                sites[current] = 0
                first_line[current] = line
            elif known != current:
                raise InputError(f"line {line}: the MATRIX {_twice(known, first_line[known], current)}",
                                 source=source)
            elif not interleaved:
                raise InputError(f"line {line}: sequence name {current!r} was already used on line "
                                 f"{first_line[current]}; give every sequence a unique name", source=source)
            continue
        # Symbols first: a polymorphism's '?' must not be taken for a declared symbol.
        states = _POLYMORPHISM.sub("?", tok.translate(table))
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
    out = ["".join(seqs[name]) for name in order]
    if match:
        if match in out[0]:
            raise InputError(f"line {first_line[order[0]]}: the first row uses the MATCHCHAR {match!r}, which "
                             "stands for the first row's state; write the first row in full", source=source)
        ref = out[0]
        out = [out[0]] + [_apply_match(s, ref, match) for s in out[1:]]
    if ntax is not None and ntax != len(order):
        raise InputError(f"line {ntax_line}: DIMENSIONS says NTAX={ntax} but the MATRIX (line {start_line}) has "
                         f"{len(order)} rows; make them agree", source=source)
    if nchar is not None:
        for name, seq in zip(order, out):
            if len(seq) != nchar:
                raise InputError(f"line {first_line[name]}: sequence {name!r} has {len(seq)} sites but "
                                 f"DIMENSIONS says NCHAR={nchar}; make them agree", source=source)
    return order, out, first_line


def _apply_match(seq: str, ref: str, match: str) -> str:
    """``seq`` with each MATCHCHAR replaced by the first row's state at that site."""
    if match not in seq:
        return seq
    s = np.array(list(seq))
    r = np.array(list(ref[: len(seq)]))
    hit = np.flatnonzero(s[: r.size] == match)
    s[hit] = r[hit]
    return "".join(s.tolist())
