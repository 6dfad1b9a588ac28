"""The command line: parse options, call the library, report. No computation here."""

from __future__ import annotations

import functools
import os
import sys
import time

import click
import numpy as np

from . import __version__
from .distances import MODELS
from .errors import CladewrightError, InputError
from .matrix import DistanceMatrix
from .memory import check_fits
from .support.resample import PRECISIONS

MODEL_HELP = "\b\nModels (--model):\n" + "\n".join(
    f"  {name:<11} {spec.summary} ({spec.citation})" for name, spec in MODELS.items() if name != "protein-p")


class Context:
    def __init__(self, debug, quiet):
        self.debug = debug
        self.quiet = quiet

    def say(self, text):
        if not self.quiet:
            click.echo(text, err=True)


def guarded(func):
    """Turn the project's errors into one line on stderr and exit status 2;
    anything unexpected into one line and status 1. ``--debug`` shows the traceback."""

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        ctx = click.get_current_context().find_object(Context)
        try:
            return func(*args, **kwargs)
        except (click.exceptions.Exit, click.ClickException, click.Abort):
            raise
        except KeyboardInterrupt:
            click.echo("cladewright: interrupted; no output was written", err=True)
            sys.exit(130)
        except CladewrightError as err:
            if ctx is not None and ctx.debug:
                raise
            click.echo(f"cladewright: error: {err}", err=True)
            sys.exit(2)
        except MemoryError:
            if ctx is not None and ctx.debug:
                raise
            click.echo("cladewright: error: out of memory; try --precision single or fewer taxa", err=True)
            sys.exit(2)
        except Exception as err:  # noqa: BLE001 - the last line of defence for users
            if ctx is not None and ctx.debug:
                raise
            if isinstance(err, OSError) and err.filename:
                from .io.files import output_error

                mapped = output_error(err, err.filename, tail="the run stopped")
                if mapped is not None:  # full disk, quota, permissions: the user's to fix
                    click.echo(f"cladewright: error: {mapped}", err=True)
                    sys.exit(2)
            click.echo(f"cladewright: internal error: {type(err).__name__}: {err} (run again with --debug "
                       "for the traceback, and report it)", err=True)
            sys.exit(1)

    return wrapper


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, "--version", prog_name="cladewright")
@click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
@click.option("--quiet", "-q", is_flag=True, help="No summary or progress on stderr.")
@click.pass_context
def main(ctx, debug, quiet):
    """Distance-based phylogenetic trees from sequence alignments, with bootstrap support."""
    ctx.obj = Context(debug, quiet)


def model_options(func):
    """Options shared by every command that computes distances."""
    options = [
        click.option("--model", "-m", default="k2p", show_default=True, metavar="MODEL",
                     help="Substitution model for the distances (listed below)."),
        click.option("--gamma", type=float, default=None, metavar="ALPHA",
                     help="Shape of the gamma distribution of rates across sites (jc69, k2p, f81, tn93, poisson)."),
        click.option("--gaps", type=click.Choice(["pairwise", "complete"]), default="pairwise", show_default=True,
                     help="pairwise: each pair uses the sites both have; complete: only sites every sequence has."),
        click.option("--freqs", type=click.Choice(["alignment", "pair"]), default="alignment", show_default=True,
                     help="Base frequencies (f81, f84, t92, tn93) from the whole alignment or from each pair."),
        click.option("--saturated", type=click.Choice(["error", "cap"]), default="error", show_default=True,
                     help="Undefined (saturated) distances: stop, or set them to twice the largest defined one."),
        click.option("--alphabet", type=click.Choice(["dna", "protein"]), default=None,
                     help="Override the detected alphabet."),
        click.option("--precision", type=click.Choice(["double", "single"]), default="double", show_default=True,
                     help="Distance matrix in float64, or float32 for half the memory (very large runs)."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def check_output_not_input(output, *inputs):
    """Refuse an output path that is one of the inputs: the input would be lost.
    A character device (/dev/null, a terminal) may be both; a FIFO may not."""
    from .io.files import is_char_device

    if output in (None, "-") or is_char_device(output):
        return
    out = os.path.realpath(output)
    for path in inputs:
        if path in (None, "-") or not os.path.exists(path):
            continue
        # realpath catches symbolic links, samefile hard links
        if os.path.realpath(path) == out or (os.path.exists(output) and os.path.samefile(path, output)):
            raise InputError(f"the output {output} is also an input; choose another output path")


@main.command(epilog=MODEL_HELP)
@click.argument("alignment", metavar="ALIGNMENT")
@click.option("--output", "-o", required=True, metavar="FILE", help="Labelled TSV matrix to write ('-': stdout).")
@model_options
@click.pass_obj
@guarded
def distances(obj, alignment, output, model, gamma, gaps, freqs, saturated, alphabet, precision):
    """Write the matrix of pairwise distances of ALIGNMENT (FASTA or NEXUS, '-' for stdin)."""
    from .alignment import read_alignment
    from .distances import distance_matrix

    check_output_not_input(output, alignment)
    start = time.perf_counter()
    aln = read_alignment(alignment, alphabet=alphabet)
    check_fits(aln.n_taxa, precision=precision)
    dm = distance_matrix(aln, model=model, gamma=gamma, gaps=gaps, freqs=freqs, saturated=saturated,
                         dtype=PRECISIONS[precision], progress=not obj.quiet)
    dm.write(output)
    obj.say(distance_summary(aln, dm, time.perf_counter() - start))


def distance_summary(aln, dm, seconds):
    info = dm.info
    lines = [
        f"taxa      {aln.n_taxa}",
        f"sites     {aln.n_sites} ({aln.n_patterns} distinct patterns, {info['sites_used']} used, gaps {info['gaps']})",
        f"model     {info['model']}" + (f" + gamma (alpha {info['gamma']:g})" if info["gamma"] else ""),
    ]
    if info.get("saturated"):
        lines.append(f"warning   {info['saturated']} saturated pair(s) set to {info['cap']:.6g}")
    lines.extend(identical_lines(info))
    lines.append(f"time      {seconds:.2f} s")
    return "\n".join(lines)


def tree_output_options(func):
    """Options shared by every command that writes trees."""
    options = [
        click.option("--format", "fmt", type=click.Choice(["newick", "nexus"]), default=None,
                     help="Output format; default from the suffix of OUT (.nex, .nexus: NEXUS; else Newick)."),
        click.option("--digits", type=click.IntRange(1, 17), default=None,
                     help="Significant digits of branch lengths (default: full round-trip precision)."),
        click.option("--support-digits", type=click.IntRange(0, 6), default=0, show_default=True,
                     help="Decimals of support percentages."),
    ]
    for option in reversed(options):
        func = option(func)
    return func


def output_format(output, fmt):
    if fmt:
        return fmt
    name = str(output).lower().removesuffix(".gz")  # tree.nex.gz: gzip-compressed NEXUS
    return "nexus" if name.endswith((".nex", ".nexus", ".nxs")) else "newick"


def write_tree(tree, output, fmt, digits, support_digits):
    tree.write(output, format=output_format(output, fmt), digits=digits, support_digits=support_digits)


def read_input(path, alphabet, precision="double"):
    """An alignment, or a labelled distance matrix (a TSV whose first cell is empty)."""
    from .alignment import read_alignment
    from .io.files import read_text
    from .matrix import read_distance_matrix

    text = read_text(path)
    source = "<stdin>" if path == "-" else path
    if text.lstrip(" \n").startswith("\t"):  # the reader skips blank lines before the header
        dm = read_distance_matrix(source, text=text)
        if precision == "single":
            dm = DistanceMatrix(dm.names, dm.values, validate=False, dtype=np.float32, info=dm.info)
        return None, dm
    return read_alignment(path, alphabet=alphabet, text=text), None


@main.command(epilog=MODEL_HELP)
@click.argument("input_path", metavar="INPUT")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--method", type=click.Choice(["nj", "bionj", "upgma", "wpgma", "single", "complete"]),
              default="nj", show_default=True, help="Tree-building method.")
@model_options
@click.option("--negative", type=click.Choice(["zero", "keep"]), default="zero", show_default=True,
              help="Negative NJ/BIONJ branch lengths: set to zero, or keep as computed.")
@click.option("--root", "root_spec", default=None, metavar="midpoint|TAXON[,TAXON]",
              help="Root the tree at its midpoint or on the branch to an outgroup.")
@click.option("--replicates", "-b", type=click.IntRange(0, None), default=0, show_default=True,
              help="Bootstrap replicates (0: no support).")
@click.option("--seed", type=click.IntRange(0, None), default=None, help="Seed of the bootstrap (drawn if not given).")
@click.option("--workers", type=click.IntRange(1, None), default=None, help="Replicates run side by side on this machine (default: cores).")
@click.option("--support", "measure", type=click.Choice(["fbp", "tbe"]), default="fbp", show_default=True,
              help="Felsenstein bootstrap proportion or transfer bootstrap expectation.")
@click.option("--save-replicates", type=click.Path(dir_okay=False), default=None,
              help="Append each replicate tree to this file, one Newick line each.")
@click.option("--resume", is_flag=True, help="Continue --save-replicates FILE after an interruption.")
@click.option("--scheduler", default=None, metavar="ADDRESS", help="Run replicates on this Dask scheduler.")
@click.option("--report", "report_path", type=click.Path(dir_okay=False), default=None,
              help="Also write a self-contained HTML report of the run.")
@click.option("--binary", is_flag=True,
              help="Write a fully resolved tree: polytomies (identical sequences, branches of length zero) "
                   "resolved by branches of length zero without support, for software that needs binary trees.")
@tree_output_options
@click.pass_obj
@guarded
def tree(obj, input_path, output, method, model, gamma, gaps, freqs, saturated, alphabet, precision, negative,
         root_spec,
         replicates, seed, workers, measure, save_replicates, resume, scheduler, report_path, binary, fmt, digits,
         support_digits):
    """Build a tree from INPUT: an alignment (FASTA or NEXUS) or a labelled distance matrix (TSV)."""
    from .build import build_tree_with_info
    from .io.files import is_char_device
    from .pipeline import split_identical, tree_from_alignment, zero_tolerance
    from .polytomies import collapse_zero_branches, resolve_polytomies

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
    start = time.perf_counter()
    aln, dm = read_input(input_path, alphabet, precision)
    # identical sequences enter the distances and the tree once: the matrix is that of the distinct ones
    n_taxa = split_identical(aln, model)[0].n_taxa if aln is not None else len(dm.names)
    check_fits(n_taxa, method=method, precision=precision,
               workers=(workers or os.cpu_count() or 1) if replicates and scheduler is None else 0)
    boot = None
    if replicates:
        if aln is None:
            raise InputError("bootstrap support needs an alignment, not a distance matrix; give the alignment "
                             "or drop --replicates", source=input_path)
        from .support.resample import bootstrap

        boot = bootstrap(aln, replicates, model=model, method=method, gamma=gamma, gaps=gaps, freqs=freqs,
                         saturated=saturated, negative=negative, seed=seed, workers=workers, support=measure,
                         save_replicates=save_replicates, resume=resume, scheduler=scheduler,
                         progress=not obj.quiet, precision=precision)
        result, info, dm = boot.tree, boot.info, boot.matrix
    elif dm is None:
        result, info, dm = tree_from_alignment(aln, model, method, gamma=gamma, gaps=gaps, freqs=freqs,
                                               saturated=saturated, negative=negative,
                                               dtype=PRECISIONS[precision], progress=not obj.quiet)
    else:
        result, info = build_tree_with_info(dm, method, negative, source=input_path)
        info.update(dm.info)
        result = collapse_zero_branches(result, zero_tolerance(dm.values.dtype))
    info["negative"] = negative
    if root_spec:
        from .rooting import root_tree

        result = root_tree(result, root_spec)
    if binary:
        result = resolve_polytomies(result)
    write_tree(result, output, fmt, digits, support_digits)
    seconds = time.perf_counter() - start
    summary = tree_summary(aln, dm, info, boot, seconds)
    if report_path:
        from .report import write_report

        write_report(report_path, alignment=aln, dm=dm, tree=result, info=info,
                     command_line=" ".join(["cladewright"] + sys.argv[1:]), warnings=run_warnings(aln, info),
                     support_values=result.support)
    where = "standard output" if output == "-" else output
    obj.say(summary + f"\noutput    {where} ({output_format(output, fmt)})"
            + (f", report {report_path}" if report_path else ""))


def run_warnings(aln, info):
    """Warnings a user should see: saturated pairs, negative lengths, sequences with little data."""
    out = []
    if info.get("saturated"):
        out.append(f"{info['saturated']} saturated pair(s) set to {info['cap']:.6g}")
    if info.get("replicates_capped"):
        out.append(f"{info['replicates_capped']} of {info['replicates']} bootstrap replicates drew sites that "
                   "saturate a pair; those pairs were capped (as --saturated cap does)")
    if info.get("negative_branches"):
        out.append(f"{info['negative_branches']} negative branch length(s) "
                   + ("kept as computed" if info.get("negative") == "keep" else "set to zero"))
    if aln is not None and aln.n_sites:
        name, frac = aln.summary()["least_data"]
        if frac < 0.5:
            out.append(f"sequence {name!r} has unambiguous states at only {100 * frac:.0f}% of sites")
    return out


def identical_lines(info):
    """The summary's line on groups of identical sequences, when there are any."""
    groups = info.get("identical_groups") or 0
    if not groups:
        return []
    return [f"identical {groups} group(s) of identical sequences ({info['identical_sequences']} sequences), "
            "each computed once and written as a polytomy"]


def tree_summary(aln, dm, info, boot, seconds):
    lines = []
    if aln is not None:
        lines.append(f"taxa      {aln.n_taxa}")
        lines.append(f"sites     {aln.n_sites} ({aln.n_patterns} distinct patterns, gaps {info.get('gaps')})")
        model = info.get("model", "")
        lines.append(f"model     {model}" + (f" + gamma (alpha {info['gamma']:g})" if info.get("gamma") else ""))
    else:
        lines.append(f"taxa      {len(dm.names)} (distance matrix)")
    lines.append(f"method    {info['method']}")
    if info.get("fit_name") and info.get("fit_value") is not None:
        lines.append(f"fit       {info['fit_name']} {info['fit_value']:.4g}")
    elif info.get("fit_name") or info.get("identical_groups"):
        lines.append("fit       not defined (fewer than three distinct sequences, or every distance zero)")
    lines.extend(identical_lines(info))
    if boot is not None:
        resumed = f", {info['resumed']} resumed" if info.get("resumed") else ""
        lines.append(f"support   {boot.support.upper()}, {len(boot.replicates)} replicates{resumed}, seed {boot.seed}")
    for w in run_warnings(aln, info):
        lines.append(f"warning   {w}")
    lines.append(f"time      {seconds:.2f} s")
    return "\n".join(lines)


@main.command()
@click.argument("tree_path", metavar="TREE")
@click.argument("replicates_path", metavar="REPLICATES")
@click.option("--output", "-o", required=True, metavar="OUT", help="Tree file to write ('-': stdout).")
@click.option("--support", "measure", type=click.Choice(["fbp", "tbe"]), default="fbp", show_default=True,
              help="Felsenstein bootstrap proportion or transfer bootstrap expectation.")
@tree_output_options
@click.pass_obj
@guarded
def support(obj, tree_path, replicates_path, output, measure, fmt, digits, support_digits):
    """Put support from a file of REPLICATES trees on the first tree of TREE."""
    from .io import read_trees
    from .support import apply_support, fbp_support, tbe_support

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
def consensus(obj, replicates_path, output, threshold, fmt, digits, support_digits):
    """Majority-rule consensus of the trees in REPLICATES, with split frequencies as support."""
    from .io import read_trees
    from .support import majority_consensus

    check_output_not_input(output, replicates_path)
    trees = read_trees(replicates_path)
    result = majority_consensus(trees, threshold, source=replicates_path)
    write_tree(result, output, fmt, digits, support_digits)
    n_splits = int(np.count_nonzero(np.isfinite(result.support)))
    rule = ("in more than half of them" if threshold == 0.5 else "in all of them (strict)" if threshold == 1
            else f"in a share of at least {threshold:g} of them")
    obj.say(f"consensus {len(trees)} trees, {n_splits} splits {rule}")


if __name__ == "__main__":  # pragma: no cover
    main()
from . import cli_tools  # noqa: E402,F401  (registers root, compare, clusters, draw, show)
