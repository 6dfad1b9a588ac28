"""Internal: a part of the command line (run it as the cladewright command).

The commands that put support on trees already built: ``support`` (from a file of
replicate trees) and ``consensus`` (the majority-rule consensus of a file of trees)."""

from __future__ import annotations

from typing import TYPE_CHECKING

import click
import numpy as np

from ..choices import SUPPORT_MEASURES
from .app import check_output_not_input, guarded, main, tree_output_options, write_tree

if TYPE_CHECKING:
    from .app import Context

__all__ = ["support", "consensus"]


@main.command()
@click.argument("tree_path", metavar="TREE")
@click.argument("replicates_path", metavar="REPLICATES")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--support", "measure", type=click.Choice(SUPPORT_MEASURES), default="fbp", show_default=True,
              help="Felsenstein bootstrap proportion or transfer bootstrap expectation.")
@tree_output_options
@click.pass_obj
@guarded
def support(obj: Context, tree_path: str, replicates_path: str, output: str, measure: str, fmt: str | None,
            digits: int | None, support_digits: int) -> None:
    """Put support from a file of REPLICATES trees on the first tree of TREE."""
    from ..io import read_trees
    from ..support import apply_support, fbp_support, tbe_support

    check_output_not_input(output, tree_path, replicates_path)
    ref = read_trees(tree_path)[0]
    reps = read_trees(replicates_path)
    fn = fbp_support if measure == "fbp" else tbe_support
    result = apply_support(ref, fn(ref, reps, source=replicates_path))
    write_tree(result, output, fmt, digits, support_digits)
    obj.say(f"support   {measure.upper()} from {len(reps)} replicate trees on {ref.n_leaves} taxa")


@main.command()
@click.argument("replicates_path", metavar="REPLICATES")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--threshold", type=click.FloatRange(0.5, 1.0), default=0.5, show_default=True,
              help="0.5: splits in more than half of the trees (majority rule); above 0.5: splits in at least "
                   "this share of the trees; 1: splits in every tree (strict consensus).")
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
    result = majority_consensus(trees, threshold, source=replicates_path)
    write_tree(result, output, fmt, digits, support_digits)
    n_splits = int(np.count_nonzero(np.isfinite(result.support)))
    rule = ("in more than half of them" if threshold == 0.5 else "in all of them (strict)" if threshold == 1
            else f"in a share of at least {threshold:g} of them")
    obj.say(f"consensus {len(trees)} trees, {n_splits} splits {rule}")
