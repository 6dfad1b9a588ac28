"""Internal: the NEXUS TREES block behind cladewright.read_trees and Tree.write.

Reading and writing the TREES block of NEXUS files.

NEXUS: Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621. Keywords
are case-insensitive; a TREES block may carry a TRANSLATE table mapping the
tokens used in the trees to taxon names; without one, tree tokens that are
numbers 1..ntax refer to the TAXLABELS of a TAXA block. Each tree is a TREE
command whose description is Newick (the trade's de facto standard, 1986
informal specification), read by :mod:`cladewright.io.newick`.

The parser returns plain values (:class:`~cladewright.io.newick.TreeRecord`);
:mod:`cladewright.io.readers` makes trees of them. The writer takes any tree
object with the attributes of :class:`~cladewright.tree.Tree`.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Iterator, Sequence
from typing import Optional, cast

from ..errors import InputError
from .newick import TreeRecord, parse_tree_span, text_position
from .newick_writer import TreeLike, format_newick

# A token: (kind, text, start, end) in the text.
_Token = tuple[Optional[str], str, int, int]

__all__ = ["parse_nexus_records", "format_nexus", "quote_nexus"]

_TOKEN = re.compile(
    r"(?P<ws>\s+)"
    r"|(?P<comment>\[[^\]]*\])"
    r"|(?P<quoted>'(?:[^']|'')*')"
    r"|(?P<punct>[;=,])"
    r"|(?P<word>[^\s\[\];=,']+)"
    r"|(?P<bad>.)",
    re.S,
)

# NEXUS punctuation (Maddison et al. 1997) and whitespace end a bare token;
# '_' reads as a space; non-ASCII is quoted for portability.
_NEXUS_QUOTE = re.compile(r"[\s()\[\]{}/\\,;:=*'\"`+<>\-_]|[^\x21-\x7e]")


# ASCII digits only: str.isdigit() also takes '²', which int() refuses.
_WHOLE = re.compile(r"[0-9]+")


def _tokens(text: str, source: str | None) -> Iterator[_Token]:
    """(kind, token, start, end) for every token, comments and blanks dropped."""
    for mt in _TOKEN.finditer(text):
        kind = mt.lastgroup
        if kind == "ws" or kind == "comment":
            continue
        if kind == "bad":
            tok = mt.group()
            pos = mt.start()
            if tok == "'":
                what = "a quoted word is never closed; add the closing \"'\""
            elif tok == "[":
                what = "a comment '[' is never closed; add the ']'"
            else:
                what = f"unexpected {tok!r}"
            raise InputError(f"{text_position(text, pos)}: {what}", source=source)
        yield kind, mt.group(), mt.start(), mt.end()


def _word(kind: str | None, tok: str) -> str:
    """Value of a NEXUS word: quotes removed ('' -> '), or '_' read as space."""
    if kind == "quoted":
        return tok[1:-1].replace("''", "'")
    return tok.replace("_", " ")


def _commands(text: str, source: str | None) -> Iterator[list[_Token]]:
    """Commands as lists of tokens, each list ending with its ';' token."""
    cmd: list[_Token] = []
    for t in _tokens(text, source):
        cmd.append(t)
        if t[0] == "punct" and t[1] == ";":
            yield cmd
            cmd = []
    if cmd:
        raise InputError(f"{text_position(text, cmd[0][2])}: command {cmd[0][1]!r} has no ending ';'; add ';'",
                         source=source)


def parse_nexus_records(text: str, source: str | None = None) -> list[TreeRecord]:
    """Trees of every TREES block of a NEXUS text, as plain values.

    Parameters
    ----------
    text : str
        NEXUS text starting with ``#NEXUS``.
    source : str, optional
        File name used in error messages.

    Returns
    -------
    list of TreeRecord
        Leaves carry the names given by TRANSLATE (or TAXLABELS); a tree's
        ``offset`` is where its TREE command starts.

    Raises
    ------
    InputError
        On malformed text, naming the line and column and the fix.

    References
    ----------
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    if not text.lstrip()[:6].upper() == "#NEXUS":
        raise InputError("line 1: a NEXUS file must start with '#NEXUS'; add it or give a Newick file",
                         source=source)
    start = text.upper().index("#NEXUS") + 6
    # blank out the header but keep offsets, so line/column numbers hold
    body = re.sub(r"[^\n]", " ", text[:start]) + text[start:]
    trees: list[TreeRecord] = []
    taxlabels: list[str] = []
    block: str | None = None
    block_pos = 0
    translate: dict[str, str] | None = None
    for cmd in _commands(body, source):
        kind, tok, pos, _ = cmd[0]
        key = tok.upper() if kind == "word" else tok
        if key == "BEGIN":
            if len(cmd) < 3:
                raise InputError(f"{text_position(text, pos)}: BEGIN without a block name; write e.g. 'BEGIN TREES;'",
                                 source=source)
            block = cmd[1][1].upper()
            block_pos = pos
            translate = None
            continue
        if key in ("END", "ENDBLOCK"):
            block = None
            continue
        if block in ("TAXA", "DATA", "CHARACTERS") and key == "TAXLABELS" and not taxlabels:
            taxlabels = [_word(k, t) for k, t, _, _ in cmd[1:-1] if k != "punct"]
        elif block == "TREES" and key == "TRANSLATE":
            translate = _translate(text, cmd, source)
        elif block == "TREES" and key in ("TREE", "UTREE"):
            eq = next((i for i, t in enumerate(cmd) if t[0] == "punct" and t[1] == "="), None)
            if eq is None:
                raise InputError(f"{text_position(text, pos)}: TREE command without '= (tree)'; "
                                 "write 'TREE name = (a,b,c);'", source=source)
            lo, hi = cmd[eq][3], cmd[-1][3]
            got = parse_tree_span(body, lo, hi, source, expect_one=True)
            if not got:
                raise InputError(f"{text_position(text, cmd[eq][2])}: TREE command with no tree after '='; "
                                 "give the tree in Newick form", source=source)
            tree = got[0]._replace(offset=pos)
            if key == "UTREE" and tree.rooted:
                tree = tree._replace(rooted=False)
            trees.append(_rename(tree, translate, taxlabels, text, pos, source))
    if block is not None:
        raise InputError(f"{text_position(text, block_pos)}: block {block} has no 'END;'; add 'END;' at its end",
                         source=source)
    if not trees:
        raise InputError("no TREE command in a TREES block; give the trees in a 'BEGIN TREES;' block",
                         source=source)
    return trees


def _translate(text: str, cmd: list[_Token], source: str | None) -> dict[str, str]:
    """The TRANSLATE table as a dict token -> name."""
    items = cmd[1:-1]
    table: dict[str, str] = {}
    i = 0
    while i < len(items):
        if i + 1 >= len(items) or items[i][0] == "punct" or items[i + 1][0] == "punct":
            raise InputError(f"{text_position(text, items[i][2])}: TRANSLATE entries must be 'token name' pairs "
                             "separated by ','; check the entry here", source=source)
        k = _word(items[i][0], items[i][1])
        if k in table:
            raise InputError(f"{text_position(text, items[i][2])}: TRANSLATE token {k!r} is used twice; "
                             "give each token once", source=source)
        table[k] = _word(items[i + 1][0], items[i + 1][1])
        i += 2
        if i < len(items):
            if items[i][1] != ",":
                raise InputError(f"{text_position(text, items[i][2])}: expected ',' between TRANSLATE entries",
                                 source=source)
            i += 1
    return table


def _rename(tree: TreeRecord, translate: dict[str, str] | None, taxlabels: list[str], text: str, pos: int,
            source: str | None) -> TreeRecord:
    """The tree record with leaf tokens replaced by taxon names."""
    names = list(tree.leaf_names)
    if translate:
        names = [translate.get(x, x) for x in names]
    elif taxlabels:
        known = set(taxlabels)
        ntax = len(taxlabels)
        names = [taxlabels[int(x) - 1] if _WHOLE.fullmatch(x) and x not in known and 1 <= int(x) <= ntax else x
                 for x in names]
    else:
        return tree
    if len(set(names)) != len(names):
        seen: set[str] = set()
        for dup in names:  # the first name met a second time
            if dup in seen:
                break
            seen.add(dup)
        raise InputError(f"{text_position(text, pos)}: taxon {dup!r} appears twice in this tree after TRANSLATE; "
                         "fix the TRANSLATE table or the tree", source=source)
    return tree._replace(leaf_names=tuple(names))


def quote_nexus(word: str) -> str:
    """``word`` as a NEXUS token: bare if safe, else in single quotes with
    inner quotes doubled (Maddison et al. 1997)."""
    if not word or _NEXUS_QUOTE.search(word) or word.isdigit():
        return "'" + word.replace("'", "''") + "'"
    return word


def format_nexus(trees: TreeLike | Iterable[TreeLike], digits: int | None = None, support_digits: int = 0,
                 tree_names: Sequence[str] | None = None) -> str:
    """Trees as a NEXUS text with a TAXA block and a TREES block.

    Parameters
    ----------
    trees : Tree or sequence of Tree
    digits : int, optional
        Significant digits of branch lengths (default: exact, ``repr``).
    support_digits : int
        Decimals of support values (0: integer percentages); a value read
        from a file and not replaced since is written as it was read.
    tree_names : sequence of str, optional
        Names of the TREE commands (default tree1, tree2, ...).

    Returns
    -------
    str

    References
    ----------
    Maddison, Swofford & Maddison (1997) Syst. Biol. 46:590-621.
    """
    if hasattr(trees, "leaf_names"):
        trees = [cast(TreeLike, trees)]
    trees = list(cast("Iterable[TreeLike]", trees))
    if tree_names is None:
        tree_names = [f"tree{i + 1}" for i in range(len(trees))]
    elif len(tree_names) != len(trees):
        raise ValueError("give one tree name per tree")
    taxa: list[str] = []
    index: dict[str, int] = {}
    for t in trees:
        for x in t.leaf_names:
            if x not in index:
                index[x] = len(taxa) + 1
                taxa.append(x)
    lines = ["#NEXUS", "", "BEGIN TAXA;", f"    DIMENSIONS NTAX={len(taxa)};", "    TAXLABELS"]
    lines += [f"        {quote_nexus(x)}" for x in taxa]
    lines += ["    ;", "END;", "", "BEGIN TREES;", "    TRANSLATE"]
    lines += [f"        {i + 1} {quote_nexus(x)}{',' if i + 1 < len(taxa) else ''}" for i, x in enumerate(taxa)]
    lines.append("    ;")
    for t, name in zip(trees, tree_names):
        tokens = [str(index[x]) for x in t.leaf_names]
        # strict quoting: in a NEXUS TREE command an unquoted '_' is a blank (Maddison et al. 1997)
        newick = format_newick(t, digits=digits, support_digits=support_digits, leaf_text=tokens,
                               root_comment="[&R] " if t.rooted else "[&U] ", quoting="strict")
        lines.append(f"    TREE {quote_nexus(name)} = {newick.rstrip()}")
    lines += ["END;", ""]
    return "\n".join(lines)
