"""Internal: a part of the command line (run it as the cladewright command).

The ``lengths`` command: branch lengths fitted to a given tree from an alignment or
a distance matrix, under balanced minimum evolution, ordinary or weighted least
squares, with the fit reported."""

from __future__ import annotations

import time
from typing import TYPE_CHECKING

import click

from ..choices import CRITERIA, PRECISIONS
from .wording import refuse_model_options
from .app import (check_output_not_input, guarded, main, model_options, output_line,
                  tree_kind, tree_output_options, write_tree)
from .build import MODEL_HELP, read_input

if TYPE_CHECKING:
    from .app import Context

__all__ = ["lengths"]


@main.command(epilog=MODEL_HELP)
@click.argument("tree_path", metavar="TREE")
@click.argument("input_path", metavar="INPUT")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--criterion", type=click.Choice(CRITERIA), default="bme", show_default=True,
              help="bme: balanced minimum evolution (Pauplin 2000); ols: ordinary least squares (Rzhetsky & Nei "
                   "1993); wls: weighted least squares, weights 1/d^2 (Fitch & Margoliash 1967).")
@model_options
@tree_output_options
@click.pass_obj
@guarded
def lengths(obj: Context, tree_path: str, input_path: str, output: str, criterion: str, model: str,
            gamma: float | None, gaps: str, freqs: str, saturated: str, alphabet: str | None, precision: str,
            fmt: str | None, digits: int | None, support_digits: int) -> None:
    """Fit branch lengths to the first tree of TREE from INPUT: an alignment (FASTA or NEXUS) or a labelled
    distance matrix (TSV). The topology, support and labels stay; the fit is reported."""
    from ..build.criteria import fit_lengths_with_info
    from ..distances import distance_matrix
    from ..io import read_trees
    from ..errors import InputError

    check_output_not_input(output, tree_path, input_path)
    start = time.perf_counter()
    trees = read_trees(tree_path)
    if not trees:
        raise InputError("holds no tree; give a Newick or NEXUS file with at least one tree", source=tree_path)
    aln, dm = read_input(input_path, alphabet, precision)
    if aln is None:
        refuse_model_options(click.get_current_context(), input_path)
    if dm is None:
        assert aln is not None
        dm = distance_matrix(aln, model=model, gamma=gamma, gaps=gaps, freqs=freqs, saturated=saturated,
                             dtype=PRECISIONS[precision], progress=not obj.quiet)
    fitted, info = fit_lengths_with_info(trees[0], dm, criterion, source=tree_path)
    write_tree(fitted, output, fmt, digits, support_digits)
    lines = [f"taxa      {fitted.n_leaves}" + (f" ({len(trees)} trees in {tree_path}; the first fitted)"
                                               if len(trees) > 1 else ""),
             f"criterion {criterion}" + (f", distances {dm.info['model']}" if dm.info.get("model") else ""),
             f"length    {info['tree_length']:.6g} (sum of the fitted branch lengths)"]
    if info.get("weighted_sum_of_squares") is not None:
        lines.append(f"fit       weighted sum of squares {info['weighted_sum_of_squares']:.6g}, percent standard "
                     f"deviation {info['percent_standard_deviation']:.4g} over {info['pairs']} pairs")
    if info.get("negative_branches"):
        lines.append(f"warning   {info['negative_branches']} fitted branch length(s) are negative (kept as fitted)")
    lines.append(f"time      {time.perf_counter() - start:.2f} s")
    lines.append(output_line(output, tree_kind(output, fmt)))
    obj.say("\n".join(lines))
