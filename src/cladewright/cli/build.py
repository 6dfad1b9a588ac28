"""Internal: a part of the command line (run it as the cladewright command).

The commands that build: ``distances`` (a matrix from an alignment) and ``tree``
(a tree from an alignment or a matrix, with bootstrap support, a root and a report)."""

from __future__ import annotations

import os
import secrets
import time
from typing import TYPE_CHECKING, Any

import click

from ..choices import (INSERTION_METHODS, JOINING_METHODS, LINKAGE_METHODS, NEGATIVE_RULES, PRECISIONS, REFINEMENTS,
                       SUPPORT_WORDS)
from ..distances import DEFAULT_MODELS, MODELS
from ..errors import InputError
from ..matrix import DistanceMatrix
from ..memory import check_fits
from .wording import refuse_model_options
from .app import (check_output_not_input, guarded, main, model_options, output_format, output_line,
                  root_option, support_option, tree_kind, tree_output_options, write_tree)
from .summary import distance_summary, shown_warnings, support_words, tree_summary

if TYPE_CHECKING:
    from ..alignment import Alignment
    from ..build.criteria import LengthCriterion
    from ..resampling import BootstrapResult
    from .app import Context, RootRule

__all__ = ["distances", "tree", "read_input"]

MODEL_HELP: str = "\b\nModels (--model; default: k2p for DNA, lg for protein):\n" + "\n".join(
    f"  {name:<11} {spec.summary} ({spec.citation})" for name, spec in MODELS.items() if name != "protein-p")


@main.command(epilog=MODEL_HELP)
@click.argument("alignment", metavar="ALIGNMENT")
@click.option("--output", "-o", required=True, metavar="FILE",
              help="Labelled TSV matrix to write ('-': stdout), or a tiled store: a new directory FILE.zarr.")
@model_options
@click.option("--gamma-categories", type=click.IntRange(1, 256), default=None, metavar="K",
              help="With --gamma-shape and a likelihood model (gtr, hky, jtt, wag, lg, dcmut): K discrete gamma "
                   "categories (Yang 1994) instead of the continuous gamma.")
@click.option("--scheduler", default=None, metavar="ADDRESS",
              help="With -o FILE.zarr: compute the tiles on this Dask scheduler (default: local threads).")
@click.option("--resume", is_flag=True, help="With -o FILE.zarr: continue a stopped run, computing only the "
                                              "missing tiles.")
@click.option("--tile-size", type=click.IntRange(16, None), default=512, show_default=True, metavar="N",
              help="With -o FILE.zarr: rows and columns per tile (one task per tile).")
@click.pass_obj
@guarded
def distances(obj: Context, alignment: str, output: str, model: str | None, gamma: float | None, gaps: str,
              freqs: str | None, saturated: str, alphabet: str | None, precision: str,
              gamma_categories: int | None, scheduler: str | None, resume: bool, tile_size: int) -> None:
    """Write the matrix of pairwise distances of ALIGNMENT (FASTA or NEXUS, '-' for stdin)."""
    from ..distances import distance_matrix
    from ..io.readers import read_alignment

    check_output_not_input(output, alignment)
    start = time.perf_counter()
    if output.rstrip("/").lower().endswith(".zarr"):
        _tiled(obj, alignment, output, model, gamma, gaps, freqs, saturated, alphabet, precision, gamma_categories,
               scheduler, resume, tile_size, start)
        return
    if scheduler or resume:
        raise InputError("--scheduler and --resume are for a tiled store: give -o FILE.zarr")
    aln = read_alignment(alignment, alphabet=alphabet)
    check_fits(aln.n_taxa, precision=precision)
    dm = distance_matrix(aln, model=model or DEFAULT_MODELS[aln.alphabet], gamma=gamma, gaps=gaps, freqs=freqs,
                         saturated=saturated, dtype=PRECISIONS[precision], progress=not obj.quiet,
                         gamma_categories=gamma_categories)
    dm.write(output)
    obj.say(distance_summary(aln, dm, time.perf_counter() - start) + "\n"
            + output_line(output, "TSV, distance matrix" + (", gzip-compressed" if output.lower().endswith(".gz")
                                                            else "")))


def _tiled(obj: Context, alignment: str, output: str, model: str | None, gamma: float | None, gaps: str,
           freqs: str | None, saturated: str, alphabet: str | None, precision: str, gamma_categories: int | None,
           scheduler: str | None, resume: bool, tile_size: int, start: float) -> None:
    """``distances ALN -o FILE.zarr``: the tiled path into a store."""
    import hashlib
    from types import SimpleNamespace

    from ..distances.tiled import tiled_distances
    from ..io.files import read_text
    from ..io.readers import read_alignment

    text = read_text(alignment)
    aln = read_alignment(alignment, alphabet=alphabet, text=text)
    info = tiled_distances(aln, output, model or DEFAULT_MODELS[aln.alphabet], gamma, gaps, freqs,
                           saturated=saturated, dtype=PRECISIONS[precision], tile=tile_size, scheduler=scheduler,
                           resume=resume, progress=not obj.quiet, gamma_categories=gamma_categories,
                           input_sha256=hashlib.sha256(text.encode()).hexdigest())
    dm = SimpleNamespace(info=info)  # the summary reads only the run's facts
    obj.say(distance_summary(aln, dm, time.perf_counter() - start) + "\n"  # type: ignore[arg-type]
            + output_line(output, "Zarr store"))


def store_facts(path: str) -> dict[str, Any] | None:
    """The names and the number of distinct rows of a finished distance store, None for any other input."""
    from ..io.store import is_store, store_attributes

    if not is_store(path):
        return None
    attrs, _, (m, _) = store_attributes(path)
    return {"names": attrs["names"], "distinct": m, "dtype": attrs["dtype"]}


def read_input(path: str, alphabet: str | None, precision: str = "double"
               ) -> tuple[Alignment, None] | tuple[None, DistanceMatrix]:
    """An alignment, or a labelled distance matrix (a TSV whose first cell is empty)."""
    from ..io.files import read_text
    from ..io.readers import open_store, read_alignment, read_distance_matrix
    from ..io.store import is_store

    if is_store(path):
        dm = open_store(path)
        if precision == "single":
            dm = DistanceMatrix(dm.names, dm.values, validate=False, dtype=PRECISIONS[precision], info=dm.info)
        return None, dm
    text = read_text(path)
    source = "<stdin>" if path == "-" else path
    if text.lstrip(" \n").startswith("\t"):  # the reader skips blank lines before the header
        dm = read_distance_matrix(source, text=text)
        if precision == "single":
            dm = DistanceMatrix(dm.names, dm.values, validate=False, dtype=PRECISIONS[precision], info=dm.info)
        return None, dm
    return read_alignment(path, alphabet=alphabet, text=text), None


def _check_outputs(input_path: str, output: str, save_replicates: str | None, report_path: str | None) -> None:
    """Three outputs, no two the same file, none an input."""
    from ..io.output import is_char_device

    for other, flag in ((output, "--output"), (report_path, "--report")):
        # realpath catches symbolic links (also to a file not made yet), samefile hard links
        if save_replicates and other not in (None, "-") and (
                os.path.realpath(other) == os.path.realpath(save_replicates)
                or (os.path.exists(other) and os.path.exists(save_replicates)
                    and os.path.samefile(other, save_replicates))):
            raise InputError(f"--save-replicates and {flag} both name {save_replicates}; choose two different "
                             "files")
    check_output_not_input(output, input_path, save_replicates)
    check_output_not_input(report_path, input_path, save_replicates)
    check_output_not_input(save_replicates, input_path)
    if (report_path and output != "-" and os.path.realpath(report_path) == os.path.realpath(output)
            and not is_char_device(output)):
        raise InputError(f"--report and --output both name {output}; choose two different files")


@main.command(epilog=MODEL_HELP)
@click.argument("input_path", metavar="INPUT")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--method", type=click.Choice(JOINING_METHODS + INSERTION_METHODS + LINKAGE_METHODS),
              default="nj", show_default=True,
              help="Tree-building method (bme: greedy balanced minimum evolution insertion).")
@click.option("--refine", type=click.Choice(REFINEMENTS), default="none", show_default=True,
              help="Topology search after an nj, bionj or bme start: nearest-neighbour interchanges (nni), "
                   "or subtree pruning and regrafting under balanced minimum evolution (spr).")
@click.option("--criterion", type=click.Choice(("bme", "ols")), default=None,
              help="Criterion of --refine and of the lengths of refined and bme trees: balanced minimum "
                   "evolution (default) or ordinary least squares.")
@model_options
@click.option("--gamma-categories", type=click.IntRange(1, 256), default=None, metavar="K",
              help="With --gamma-shape and a likelihood model (gtr, hky, jtt, wag, lg, dcmut): K discrete gamma "
                   "categories (Yang 1994) instead of the continuous gamma.")
@click.option("--negative", type=click.Choice(NEGATIVE_RULES), default="zero", show_default=True,
              help="Negative NJ/BIONJ branch lengths: set to zero, or keep as computed.")
@root_option(stored=False, help="Root the tree.")
@click.option("--replicates", type=click.IntRange(0, None), default=0, show_default=True,
              help="Bootstrap replicates (0: no support).")
@click.option("--seed", type=click.IntRange(0, None), default=None,
              help="Seed of the bootstrap (drawn, shown and recorded in the report if not given).")
@click.option("--workers", type=click.IntRange(1, None), default=None,
              help="Replicates run side by side on this machine (default: cores).")
@support_option
@click.option("--save-replicates", type=click.Path(dir_okay=False), default=None,
              help="Append each replicate tree to this file, one Newick line each.")
@click.option("--resume", is_flag=True, help="Continue --save-replicates FILE after an interruption.")
@click.option("--scheduler", default=None, metavar="ADDRESS", help="Run replicates on this Dask scheduler.")
@click.option("--report", "report_path", type=click.Path(dir_okay=False), default=None,
              help="Also write a self-contained HTML report of the run.")
@click.option("--leaf-table", default=None, metavar="TSV",
              help="With --report and --colour-by: a table of the taxa (tab-separated, a header row, the taxon "
                   "name first) whose column colours the report's tree.")
@click.option("--colour-by", default=None, metavar="COLUMN",
              help="Colour the report's tree by this column of --leaf-table, with a legend.")
@click.option("--binary", is_flag=True,
              help="Write a fully resolved tree: polytomies (identical sequences, branches of length zero) "
                   "resolved by branches of length zero without support, for software that needs binary trees.")
@tree_output_options
@click.pass_context
@guarded
def tree(ctx: click.Context, input_path: str, output: str, method: str, refine: str,
         criterion: LengthCriterion | None, model: str | None, gamma: float | None, gaps: str,
         freqs: str | None, saturated: str, alphabet: str | None, precision: str, negative: str,
         root_rule: RootRule | None,
         replicates: int, seed: int | None, workers: int | None, measure: str, save_replicates: str | None,
         resume: bool, scheduler: str | None, report_path: str | None, binary: bool, fmt: str | None,
         digits: int | None, support_digits: int, gamma_categories: int | None, leaf_table: str | None,
         colour_by: str | None) -> None:
    """Build a tree from INPUT: an alignment (FASTA or NEXUS) or a labelled distance matrix (TSV)."""
    from ..build import build_tree_with_info
    from ..pipeline import split_identical, tree_from_alignment, zero_tolerance
    from ..polytomies import collapse_zero_branches, resolve_polytomies

    obj: Context = ctx.obj
    _check_outputs(input_path, output, save_replicates, report_path)
    if (leaf_table is None) != (colour_by is None):
        raise click.UsageError("give --leaf-table TSV and --colour-by COLUMN together")
    if leaf_table is not None and not report_path:
        raise click.UsageError("--leaf-table and --colour-by colour the report's tree: add --report FILE")
    if replicates and seed is None:
        seed = secrets.randbelow(2**31)  # drawn here, so that the summary and the report can give it
    start = time.perf_counter()
    # a store is read by the tree builder itself, straight into its work space (no second copy)
    stored = store_facts(input_path)
    aln, dm = (None, None) if stored else read_input(input_path, alphabet, precision)
    if aln is None:
        refuse_model_options(ctx, input_path)
    groups = None
    if leaf_table is not None and colour_by is not None:  # read before any work: a bad table stops the run
        from ..io.leaf_table import read_leaf_groups

        names = aln.names if aln is not None else tuple(dm.names) if dm is not None else \
            tuple(stored["names"]) if stored else ()
        groups = read_leaf_groups(leaf_table, colour_by, names)
    if aln is not None and model is None:
        model = DEFAULT_MODELS[aln.alphabet]  # the default model follows the alignment's alphabet
    # identical sequences enter the distances and the tree once: the matrix is that of the distinct ones
    if aln is not None:
        n_taxa = split_identical(aln, model)[0].n_taxa
    elif stored:
        n_taxa = int(stored["distinct"])
    else:
        assert dm is not None  # read_input gives an alignment or a matrix
        n_taxa = len(dm.names)
    # a float32 store is worked on in float32 (as a float32 matrix is)
    check_fits(n_taxa, method=method, precision="single" if stored and stored["dtype"] == "float32" else precision,
               refine=refine, workers=(workers or os.cpu_count() or 1) if replicates and scheduler is None else 0,
               stored=bool(stored))
    boot: BootstrapResult | None = None
    if stored and not replicates:
        from ..store_tree import tree_from_store

        result, info = tree_from_store(input_path, method, negative, dtype=PRECISIONS[precision], refine=refine,
                                       criterion=criterion)
        if report_path:  # the report shows the matrix
            from ..io.readers import open_store

            dm = open_store(input_path)
    elif replicates:
        if aln is None:
            raise InputError("bootstrap support needs an alignment, not a distance matrix; give the alignment "
                             "or drop --replicates", source=input_path)
        from ..resampling import bootstrap

        boot = bootstrap(aln, replicates, model=model, method=method, gamma=gamma, gaps=gaps, freqs=freqs,
                         saturated=saturated, negative=negative, seed=seed, workers=workers,
                         support=SUPPORT_WORDS[measure],
                         save_replicates=save_replicates, resume=resume, scheduler=scheduler,
                         progress=not obj.quiet, precision=precision, refine=refine,
                         criterion=criterion, gamma_categories=gamma_categories)
        result, info, dm = boot.tree, boot.info, boot.matrix
        assert dm is not None  # bootstrap() always returns the matrix of the original data
    elif dm is None:
        assert aln is not None  # read_input gives an alignment or a matrix
        result, info, dm = tree_from_alignment(aln, model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                               saturated=saturated, negative=negative,
                                               dtype=PRECISIONS[precision], progress=not obj.quiet, refine=refine,
                                               criterion=criterion, gamma_categories=gamma_categories)
    else:
        result, info = build_tree_with_info(dm, method, negative, source=input_path, refine=refine,
                                            criterion=criterion)
        info.update(dm.info)
        result = collapse_zero_branches(result, zero_tolerance(dm.values.dtype))
    info["negative"] = negative
    if boot is not None:
        info.update(seed=boot.seed, support=support_words(measure))
    # the run's warnings, worded once by the library, in this command line's terms for summary and report
    info["warnings"] = shown_warnings(info, aln)
    if root_rule is not None:
        result = root_rule.apply(result)
    if binary:
        result = resolve_polytomies(result)
    write_tree(result, output, fmt, digits, support_digits)
    seconds = time.perf_counter() - start
    summary = tree_summary(aln, None if stored else dm, info, boot, seconds, info["warnings"], measure)
    outputs = [output_line(output, tree_kind(output, fmt))]
    if save_replicates:
        outputs.append(output_line(save_replicates, f"Newick, {replicates} replicate trees"))
    if report_path:
        from ..distances import resolve_model
        from ..report import write_report
        from .record import explicit_command, tree_values

        assert ctx.command is not None
        values = tree_values(ctx.params, from_alignment=aln is not None,
                             model=resolve_model(model, aln.alphabet) if aln is not None else None, info=info,
                             alphabet=aln.alphabet if aln is not None else None, seed=seed, measure_word=measure,
                             output_format=output_format(output, fmt))
        if groups is not None:
            values.update(leaf_table=leaf_table, colour_by=colour_by)
        if output_format(output, fmt) == "newick":
            values["quoting"] = obj.quoting
        command_line, settings = explicit_command(ctx.command, "tree", values)
        write_report(report_path, alignment=aln, dm=dm, tree=result, info=info, command_line=command_line,
                     settings=settings, support_digits=support_digits, groups=groups, group_title=colour_by)
        outputs.append(output_line(report_path, "HTML, run report"))
    obj.say("\n".join([summary] + outputs))
