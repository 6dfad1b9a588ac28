"""Internal: a part of the command line (run it as the cladewright command).

The commands that put support on trees already built: ``tally`` (the splits of a
file of replicate trees tallied onto a tree) and ``consensus`` (the majority-rule
consensus of a file of trees)."""

from __future__ import annotations

from typing import TYPE_CHECKING

import click
import numpy as np

from ..choices import SUPPORT_WORDS
from .app import check_output_not_input, guarded, main, output_line, support_option, tree_kind, tree_output_options, \
    write_tree
from .summary import support_words

if TYPE_CHECKING:
    from .app import Context

__all__ = ["tally", "consensus"]


@main.command()
@click.argument("replicates_path", metavar="REPLICATES")
@click.option("--onto", "tree_path", required=True, metavar="TREE",
              help="The tree that receives the support (the first tree of the file).")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@support_option
@tree_output_options
@click.pass_obj
@guarded
def tally(obj: Context, replicates_path: str, tree_path: str, output: str, measure: str, fmt: str | None,
          digits: int | None, support_digits: int) -> None:
    """Tally the splits of the REPLICATES trees onto the first tree of --onto TREE, as support."""
    from ..io import read_trees
    from ..support import apply_support, fbp_support, tbe_support

    check_output_not_input(output, tree_path, replicates_path)
    ref = read_trees(tree_path)[0]
    reps = read_trees(replicates_path)
    fn = fbp_support if SUPPORT_WORDS[measure] == "fbp" else tbe_support
    result = apply_support(ref, fn(ref, reps, source=replicates_path))
    write_tree(result, output, fmt, digits, support_digits)
    obj.say(f"support   {support_words(measure)} from {len(reps)} replicate trees on {ref.n_leaves} taxa\n"
            + output_line(output, tree_kind(output, fmt)))


@main.command()
@click.argument("replicates_path", metavar="REPLICATES")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--threshold", type=click.FloatRange(50, 100), default=50, show_default=True, metavar="PERCENT",
              help="50: splits in more than half of the trees (majority rule); above 50: splits in at least "
                   "this percentage of the trees; 100: splits in every tree (strict consensus).")
@tree_output_options
@click.pass_obj
@guarded
def consensus(obj: Context, replicates_path: str, output: str, threshold: float, fmt: str | None,
              digits: int | None, support_digits: int) -> None:
    """Majority-rule consensus of the trees in REPLICATES, with split frequencies as support."""
    from ..io import read_trees
    from ..support import majority_consensus

    check_output_not_input(output, replicates_path)
    trees = read_trees(replicates_path)
    # the library takes the share of the trees (0.5 to 1); the command line, like every support option, a percent
    result = majority_consensus(trees, threshold / 100.0, source=replicates_path)
    write_tree(result, output, fmt, digits, support_digits)
    n_splits = int(np.count_nonzero(np.isfinite(result.support)))
    rule = ("in more than half of them" if threshold == 50 else "in all of them (strict)" if threshold == 100
            else f"in at least {threshold:g}% of them")
    obj.say(f"consensus {len(trees)} trees, {n_splits} splits {rule}\n" + output_line(output, tree_kind(output, fmt)))
