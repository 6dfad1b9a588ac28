"""The command line: parse options, call the library, report. No computation here."""

from __future__ import annotations

import functools
import os
import sys
import time

import click

from . import __version__
from .distances import MODELS
from .errors import CladewrightError, InputError

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
    ]
    for option in reversed(options):
        func = option(func)
    return func


def check_output_not_input(output, *inputs):
    """Refuse an output path that is one of the inputs: the input would be lost."""
    if output in (None, "-"):
        return
    out = os.path.realpath(output)
    for path in inputs:
        if path not in (None, "-") and os.path.exists(path) and os.path.realpath(path) == out:
            raise InputError(f"the output {output} is also an input; choose another output path")


@main.command(epilog=MODEL_HELP)
@click.argument("alignment", metavar="ALIGNMENT")
@click.option("--output", "-o", required=True, metavar="FILE", help="Labelled TSV matrix to write ('-': stdout).")
@model_options
@click.pass_obj
@guarded
def distances(obj, alignment, output, model, gamma, gaps, freqs, saturated, alphabet):
    """Write the matrix of pairwise distances of ALIGNMENT (FASTA or NEXUS, '-' for stdin)."""
    from .alignment import read_alignment
    from .distances import distance_matrix

    check_output_not_input(output, alignment)
    start = time.perf_counter()
    aln = read_alignment(alignment, alphabet=alphabet)
    dm = distance_matrix(aln, model=model, gamma=gamma, gaps=gaps, freqs=freqs, saturated=saturated)
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
    lines.append(f"time      {seconds:.2f} s")
    return "\n".join(lines)


if __name__ == "__main__":  # pragma: no cover
    main()
