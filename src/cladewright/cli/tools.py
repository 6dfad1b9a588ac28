"""Internal: a part of the command line (run it as the cladewright command).

Tree tools on the command line: root, compare, clusters, draw, show.

Registered on :data:`cladewright.cli.main` (the package imports this module).
No computation here: read, call the library, write, report.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any

import click
import numpy as np

from ..errors import InputError
from .app import check_output_not_input, guarded, main, output_line, root_option, tree_kind

if TYPE_CHECKING:
    from ..tree import Tree
    from .app import Context, RootRule


def _first_tree(path: str, obj: Context | None = None) -> Tree:
    """The first tree of a Newick or NEXUS file (a note when it holds more)."""
    from ..io import read_trees

    trees = read_trees(path)
    if not trees:
        raise InputError("holds no tree; give a Newick or NEXUS file with at least one tree", source=path)
    if len(trees) > 1 and obj is not None:
        obj.say(f"note      {path} holds {len(trees)} trees; using the first")
    return trees[0]


def _scale_note(obj: Context, tree: Tree, extra: str = "") -> None:
    """Say on stderr when support was read on a 0-1 scale and is shown as percentages."""
    if tree.support_percent()[1]:
        obj.say("note      support values all lie within 0 to 1: read as proportions and shown as "
                "percentages" + extra)


def _support_digits(tree: Tree) -> int:
    """Decimals that write the tree's support values back exactly (0 to 2);
    values read from a file are written as read whatever this says."""
    s = np.asarray(tree.support, dtype=np.float64)
    s = s[np.isfinite(s)]
    with np.errstate(over="ignore", invalid="ignore"):  # rounding 1e308 to a decimal overflows
        for digits in (0, 1):
            if np.allclose(s, np.round(s, digits), rtol=0, atol=1e-9):
                return digits
    return 2


def _tree_kind(output: str) -> str:
    return tree_kind(output, "nexus" if output.lower().removesuffix(".gz").endswith((".nex", ".nexus")) else "newick")


def _write_tree(tree: Tree, output: str) -> None:
    fmt = "nexus" if output.lower().removesuffix(".gz").endswith((".nex", ".nexus")) else "newick"
    tree.write(output, format=fmt, support_digits=_support_digits(tree))


@main.command("root")
@click.argument("tree_path", metavar="TREE")
@click.option("--output", "-o", required=True, metavar="FILE",
              help="Rooted tree to write: Newick, NEXUS when FILE ends in .nex or .nexus ('-': stdout).")
@root_option(required=True, help="Where to root.")
@click.pass_obj
@guarded
def root(obj: Context, tree_path: str, output: str, root_rule: RootRule) -> None:
    """Root the first tree of TREE by a --root RULE: at its midpoint, on an outgroup, or at the stored root.

    Branch lengths are split where the root falls; support stays with the
    split it belongs to.
    """
    check_output_not_input(output, tree_path)
    tree = _first_tree(tree_path, obj)
    rooted = root_rule.apply(tree)
    _write_tree(rooted, output)
    obj.say(f"rooted    {rooted.n_leaves} taxa, {root_rule.describe()}\n" + output_line(output, _tree_kind(output)))


def _pair(paths: Sequence[str], trees: Sequence[Tree], i: int, j: int) -> dict[str, Any]:
    from ..support import branch_score, robinson_foulds

    rf = robinson_foulds(trees[i], trees[j], source=paths[j])
    rf["branch_score"] = branch_score(trees[i], trees[j], source=paths[j])
    return rf


def _square(labels: Sequence[str], values: Any, fmt: Callable[[Any], str]) -> str:
    width = max(len(x) for x in labels)
    cells = [[fmt(v) for v in row] for row in values]
    cw = max(max(len(c) for row in cells for c in row), max(len(x) for x in labels))
    lines = [" " * width + "  " + "  ".join(x.rjust(cw) for x in labels)]
    for label, row in zip(labels, cells):
        lines.append(label.ljust(width) + "  " + "  ".join(c.rjust(cw) for c in row))
    return "\n".join(lines)


#: The columns of ``compare --tsv``, one row per pair of trees.
TSV_COLUMNS: tuple[str, ...] = ("tree_a", "tree_b", "taxa", "robinson_foulds", "robinson_foulds_max",
                                "robinson_foulds_normalised", "splits_shared", "splits_only_in_a",
                                "splits_only_in_b", "branch_score")


@main.command("compare")
@click.argument("tree_files", nargs=-1, required=True, metavar="TREE_A TREE_B [MORE...]")
@click.option("--tsv", is_flag=True, help="Tab-separated output, one row per pair of trees, for machines.")
@click.option("--output", "-o", default="-", show_default=True, metavar="FILE", help="Where to write ('-': stdout).")
@click.pass_obj
@guarded
def compare(obj: Context, tree_files: tuple[str, ...], tsv: bool, output: str) -> None:
    """Compare trees by their splits: Robinson–Foulds distance (raw and
    normalised by 2(n - 3)), splits shared and unique to each, branch score.

    Takes the first tree of each file; the trees must hold the same taxa.
    Rooting is ignored (splits of the unrooted trees). With more than two
    trees the distances are shown as matrices.
    """
    from ..io.output import write_text_atomic

    if len(tree_files) < 2:
        raise InputError("compare needs at least two tree files")
    check_output_not_input(output, *tree_files)
    trees = [_first_tree(p, obj) for p in tree_files]
    k = len(trees)
    results = {(i, j): _pair(tree_files, trees, i, j) for i in range(k) for j in range(i + 1, k)}
    n = trees[0].n_leaves
    if tsv:
        lines = ["\t".join(TSV_COLUMNS)]
        for (i, j), r in results.items():
            lines.append(f"{tree_files[i]}\t{tree_files[j]}\t{n}\t{r['rf']}\t{r['max']}\t{r['normalised']!r}\t"
                         f"{r['shared']}\t{r['only_a']}\t{r['only_b']}\t{r['branch_score']!r}")
        text = "\n".join(lines) + "\n"
    elif k == 2:
        r = results[(0, 1)]
        rows = [("tree A", f"{tree_files[0]}"), ("tree B", f"{tree_files[1]}"), ("taxa", f"{n}"),
                ("Robinson–Foulds distance", f"{r['rf']} of at most {r['max']} (normalised {r['normalised']:.4f})"),
                ("splits shared", f"{r['shared']}"), ("splits only in A", f"{r['only_a']}"),
                ("splits only in B", f"{r['only_b']}"), ("branch score distance", f"{r['branch_score']:.6g}")]
        width = max(len(a) for a, _ in rows)
        text = "\n".join(f"{a.ljust(width)}  {b}" for a, b in rows) + "\n"
    else:
        labels = [f"T{i + 1}" for i in range(k)]
        rf = np.zeros((k, k), dtype=np.int64)
        norm = np.zeros((k, k))
        bs = np.zeros((k, k))
        for (i, j), r in results.items():
            rf[i, j] = rf[j, i] = r["rf"]
            norm[i, j] = norm[j, i] = r["normalised"]
            bs[i, j] = bs[j, i] = r["branch_score"]
        top = results[(0, 1)]["max"]
        parts = ["\n".join(f"{label}  {path}" for label, path in zip(labels, tree_files)),
                 f"Robinson–Foulds distance ({n} taxa, at most {top})\n" + _square(labels, rf, str),
                 "normalised Robinson–Foulds distance\n" + _square(labels, norm, lambda v: f"{v:.3f}"),
                 "branch score distance\n" + _square(labels, bs, lambda v: f"{v:.4g}")]
        text = "\n\n".join(parts) + "\n"
    write_text_atomic(output, text)
    obj.say(output_line(output, "TSV, one row per pair of trees" if tsv else "text, " + (
        "comparison table" if k == 2 else "matrices of distances")))


@main.command("clusters")
@click.argument("tree_path", metavar="TREE")
@click.option("--within", "within", type=float, required=True, metavar="D",
              help="Largest path length between two members of a group (inclusive).")
@click.option("--output", "-o", required=True, metavar="FILE", help="TSV of taxon and group ('-': stdout).")
@root_option(help="Root first (default: a rooted tree as stored, an unrooted one at its midpoint).")
@click.pass_obj
@guarded
def clusters(obj: Context, tree_path: str, within: float, output: str, root_rule: RootRule | None) -> None:
    """Group the taxa of TREE into the largest clades whose members all lie
    within path length D of each other (e.g. barcodes at a divergence
    threshold). On a UPGMA tree this is cutting the tree at height D/2.

    Groups are numbered from 1, largest first, ties by their alphabetically
    first taxon.
    """
    from ..clusters import clusters_within
    from ..io.output import write_text_atomic

    check_output_not_input(output, tree_path)
    tree = _first_tree(tree_path, obj)
    if root_rule is None:
        rooting = "auto"  # a rooted tree as stored, an unrooted one at its midpoint
    elif root_rule.kind == "midpoint":
        rooting = "midpoint"
    else:  # the tree rooted on the outgroup, or its stored root taken as meaningful
        tree, rooting = root_rule.apply(tree), "stored"
    labels, sizes = clusters_within(tree, within, root=rooting, source=tree_path)
    names = tree.leaf_names
    order = sorted(range(len(names)), key=lambda i: (int(labels[i]), names[i]))
    lines = ["taxon\tgroup\tgroup_size"]
    lines += [f"{names[i]}\t{labels[i]}\t{sizes[labels[i] - 1]}" for i in order]
    write_text_atomic(output, "\n".join(lines) + "\n")
    shown = ", ".join(str(s) for s in sizes[:12]) + (f", ... ({sizes.size - 12} more)" if sizes.size > 12 else "")
    single = int(np.count_nonzero(sizes == 1))
    obj.say(f"groups    {sizes.size} within {within:g} ({len(names)} taxa; {single} singleton(s))\n"
            f"sizes     {shown}\n" + output_line(output, "TSV, taxon and group"))


@main.command("draw")
@click.argument("tree_path", metavar="TREE")
@click.option("--output", "-o", required=True, metavar="FIGURE", help="Figure to write: .svg, .png or .pdf.")
@click.option("--highlight-below", type=float, default=None, metavar="SUPPORT",
              help="Mark support values below this percentage (e.g. 70); support read on a 0-1 scale "
                   "is compared as percentages.")
@click.option("--no-ladderize", is_flag=True, help="Keep the stored order of branches.")
@click.option("--title", default=None, help="Title at the top of the figure.")
@root_option(help="Root the tree before drawing it.")
@click.option("--layout", type=click.Choice(("rectangular", "circular")), default="rectangular",  # draw.LAYOUTS
              show_default=True, help="rectangular: leaves in one column; circular: the root at the centre, "
                                      "the leaves round it.")
@click.option("--size", "size_text", default=None, metavar="WxH",
              help="Figure size in inches, e.g. 8x10 (default: from the number of taxa).")
@click.option("--unit", default=None, metavar="TEXT",
              help="What the branch lengths measure, named by the scale bar (default 'branch length'; e.g. "
                   "'substitutions per site' or 'p-distance').")
@click.option("--leaf-table", default=None, metavar="TSV",
              help="A table of facts about the taxa: tab-separated, a header row, the taxon names in the first "
                   "column.")
@click.option("--colour-by", default=None, metavar="COLUMN",
              help="Colour the taxa by this column of --leaf-table, with a legend.")
@click.option("--groups-within", type=float, default=None, metavar="D",
              help="Colour the taxa by their group at path length D (see 'clusters').")
@click.pass_obj
@guarded
def draw(obj: Context, tree_path: str, output: str, highlight_below: float | None, no_ladderize: bool,
         title: str | None, root_rule: RootRule | None, layout: str, size_text: str | None, unit: str | None,
         leaf_table: str | None, colour_by: str | None, groups_within: float | None) -> None:
    """Draw the first tree of TREE as a figure (SVG, PNG or PDF by suffix).

    With --leaf-table and --colour-by, each taxon's name and tip take the
    colour of its value in that column (a colour-blind-safe palette, and a
    legend); taxa missing from the table are grey.
    """
    from typing import cast

    from ..draw import render_tree

    if (leaf_table is None) != (colour_by is None):
        raise InputError("give --leaf-table TSV and --colour-by COLUMN together")
    if colour_by is not None and groups_within is not None:
        raise InputError("give one of --colour-by or --groups-within, not both")
    size = None
    if size_text is not None:
        parts = size_text.strip().lower().replace("×", "x").split("x")
        try:
            size = tuple(float(p) for p in parts)
        except ValueError:
            size = ()
        if len(size) != 2 or not all(0 < s <= 200 for s in size):
            raise InputError(f"--size {size_text!r} is not WIDTHxHEIGHT in inches; give two numbers above 0 and "
                             "at most 200, e.g. --size 8x10")
    check_output_not_input(output, tree_path, leaf_table)
    tree = _first_tree(tree_path, obj)
    if root_rule is not None:
        tree = root_rule.apply(tree)
    groups: Any = None
    group_title = None
    if leaf_table is not None and colour_by is not None:
        from ..io.leaf_table import read_leaf_groups
        groups = read_leaf_groups(leaf_table, colour_by, tree.leaf_names)
        group_title = groups.column
        for count, what in ((len(groups.ignored), f"of {leaf_table} not in the tree: rows ignored"),
                            (len(groups.missing), f"with no value in column {colour_by!r}: drawn in grey as "
                                                  "'not in table'")):
            if count:
                obj.say(f"note      {count} tax{'on' if count == 1 else 'a'} {what}")
    if groups_within is not None:
        from ..clusters import clusters_within
        groups, _ = clusters_within(tree, groups_within, source=tree_path)
    fmt = render_tree(tree, output, highlight_below=highlight_below, ladderize=not no_ladderize, title=title,
                      groups=groups, unit=unit, size=cast("tuple[float, float] | None", size),
                      layout=cast(Any, layout), group_title=group_title)
    below = highlight_below is not None
    _scale_note(obj, tree, f"; --highlight-below {highlight_below:g} is a percentage" if below else "")
    obj.say(f"drawn     {tree.n_leaves} taxa, {layout} layout\n" + output_line(output, f"{fmt.upper()} figure"))


@main.command("show")
@click.argument("tree_path", metavar="TREE")
@click.option("--ascii", "plain", is_flag=True, help="Plain ASCII characters instead of box drawing.")
@click.option("--width", type=click.IntRange(10, 1000), default=None, help="Columns for the branches.")
@click.option("--no-ladderize", is_flag=True, help="Keep the stored order of branches.")
@root_option(help="Root the tree before drawing it.")
@click.option("--unit", default=None, metavar="TEXT",
              help="What the branch lengths measure, named by the scale bar (default 'branch length').")
@click.pass_obj
@guarded
def show(obj: Context, tree_path: str, plain: bool, width: int | None, no_ladderize: bool,
         root_rule: RootRule | None, unit: str | None) -> None:
    """Print the first tree of TREE as a text drawing, with support values
    (as percentages; support read on a 0-1 scale is multiplied by 100).
    An unrooted tree is drawn from its stored root, and the drawing says so."""
    from ..textdraw import text_tree

    tree = _first_tree(tree_path, obj)
    if root_rule is not None:
        tree = root_rule.apply(tree)
    _scale_note(obj, tree)
    click.echo(text_tree(tree, width=width, ascii=plain, ladderize=not no_ladderize, unit=unit), nl=False)


__all__ = ["root", "compare", "clusters", "draw", "show"]
