"""Internal: a part of the command line (run it as the cladewright command).

The command group and what every command shares: the context, the error guard, the
options common to several commands, the checks on output paths, and the table that
turns the library's parameter spellings into this command line's options.

No computation here: the commands (:mod:`.build`, :mod:`.support`, :mod:`.tools`)
read, call the library, write and report.
"""

from __future__ import annotations

import functools
import os
import re
import sys
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any, ParamSpec, TypeVar

import click

from ..choices import ALPHABETS, FREQ_MODES, GAP_MODES, PRECISIONS, SATURATED_MODES, TREE_FORMATS
from ..errors import CladewrightError, InputError

if TYPE_CHECKING:
    from ..tree import Tree

P = ParamSpec("P")
R = TypeVar("R")
F = TypeVar("F", bound=Callable[..., Any])

__all__ = ["main", "Context", "guarded", "as_options", "PARAMETER_OPTIONS", "model_options",
           "tree_output_options", "check_output_not_input", "output_format", "write_tree", "root_options",
           "ROOT_HELP"]

#: How the library spells a parameter in its messages, and the option of this command line that sets it.
#: The library names its own parameters (``saturated="cap"``); a user of the command line is shown the
#: option (``--saturated cap``). Longer spellings come first, so that none is cut by a shorter one.
PARAMETER_OPTIONS: tuple[tuple[str | re.Pattern[str], str], ...] = (
    ("save_replicates=FILE", "--save-replicates FILE"),
    ('precision="single"', "--precision single"),
    ('alphabet="protein"', "--alphabet protein"),
    ('saturated="cap"', "--saturated cap"),
    ('freqs="alignment"', "--freqs alignment"),
    ("gamma_categories=", "--gamma-categories "),
    ("gamma=ALPHA", "--gamma ALPHA"),
    ('freqs="model"', "--freqs model"),
    ('gaps="pairwise"', "--gaps pairwise"),
    ('alphabet="dna"', "--alphabet dna"),
    ("scheduler needs", "--scheduler needs"),
    ('method="nj"', "--method nj"),
    ('refine="nni"', "--refine nni"),
    ('refine="spr"', "--refine spr"),
    ('criterion="bme"', "--criterion bme"),
    ('criterion="ols"', "--criterion ols"),
    ('criterion="wls"', "--criterion wls"),
    ("(resolve_polytomies(tree) gives zero-length branches)", "(write the tree with tree --binary)"),
    ("drop criterion", "drop --criterion"),
    ("set gamma=None", "drop --gamma"),
    ("resume=True", "--resume"),
    (re.compile(r"\bworkers=(\d+)\b"), r"--workers \1"),
)


def as_options(text: object) -> str:
    """A library message in this command line's terms: each parameter spelling of
    :data:`PARAMETER_OPTIONS` replaced by its option."""
    text = str(text)
    for spelling, option in PARAMETER_OPTIONS:
        text = spelling.sub(option, text) if isinstance(spelling, re.Pattern) else text.replace(spelling, option)
    return text


class Context:
    """What every command is given (``click.pass_obj``): the group's ``--debug`` and ``--quiet``."""

    debug: bool
    quiet: bool

    def __init__(self, debug: bool, quiet: bool) -> None:
        self.debug = debug
        self.quiet = quiet

    def say(self, text: str) -> None:
        """Print ``text`` on stderr, unless ``--quiet``."""
        if not self.quiet:
            click.echo(text, err=True)


def guarded(func: Callable[P, R]) -> Callable[P, R]:
    """Turn the project's errors into one line on stderr and exit status 2;
    anything unexpected into one line and status 1. ``--debug`` shows the traceback.
    Messages are shown in the command line's terms (:func:`as_options`)."""

    @functools.wraps(func)
    def wrapper(*args: P.args, **kwargs: P.kwargs) -> R:
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
            click.echo(f"cladewright: error: {as_options(err)}", err=True)
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
                from ..io.output import output_error

                mapped = output_error(err, err.filename, tail="the run stopped")
                if mapped is not None:  # full disk, quota, permissions: the user's to fix
                    click.echo(f"cladewright: error: {as_options(mapped)}", err=True)
                    sys.exit(2)
            click.echo(f"cladewright: internal error: {type(err).__name__}: {err} (run again with --debug "
                       "for the traceback, and report it)", err=True)
            sys.exit(1)

    return wrapper


@click.group(context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(None, "--version", package_name="cladewright", prog_name="cladewright")
@click.option("--debug", is_flag=True, help="Show the full traceback on errors.")
@click.option("--quiet", "-q", is_flag=True, help="No summary or progress on stderr.")
@click.pass_context
def main(ctx: click.Context, debug: bool, quiet: bool) -> None:
    """Distance-based phylogenetic trees from sequence alignments, with bootstrap support."""
    ctx.obj = Context(debug, quiet)


def _apply(func: F, options: Sequence[Callable[[F], F]]) -> F:
    for option in reversed(options):
        func = option(func)
    return func


def model_options(func: F) -> F:
    """Options shared by every command that computes distances."""
    return _apply(func, [
        click.option("--model", "-m", default=None, metavar="MODEL",
                     help="Substitution model for the distances (listed below)  [default: k2p for DNA, lg for "
                          "protein]"),
        click.option("--gamma", type=float, default=None, metavar="ALPHA",
                     help="Shape of the gamma distribution of rates across sites (jc69, k2p, f81, tn93, poisson "
                          "and the likelihood models gtr, hky, jtt, wag, lg, dcmut)."),
        click.option("--gaps", type=click.Choice(GAP_MODES), default="pairwise", show_default=True,
                     help="pairwise: each pair uses the sites both have; complete: only sites every sequence has."),
        click.option("--freqs", type=click.Choice(FREQ_MODES), default=None,
                     help="Base frequencies (f81, f84, t92, tn93) from the whole alignment or from each pair; "
                          "amino-acid frequencies of jtt, wag, lg, dcmut from the model or the alignment  "
                          "[default: model for those four, alignment otherwise]"),
        click.option("--saturated", type=click.Choice(SATURATED_MODES), default="error", show_default=True,
                     help="Undefined (saturated) distances: stop, or set them to twice the largest defined one."),
        click.option("--alphabet", type=click.Choice(ALPHABETS), default=None,
                     help="Override the detected alphabet."),
        click.option("--precision", type=click.Choice(list(PRECISIONS)), default="double", show_default=True,
                     help="Distance matrix in float64, or float32 for half the memory (very large runs)."),
    ])


def tree_output_options(func: F) -> F:
    """Options shared by every command that writes trees."""
    return _apply(func, [
        click.option("--format", "fmt", type=click.Choice(TREE_FORMATS), default=None,
                     help="Output format; default from the suffix of OUT (.nex, .nexus: NEXUS; else Newick)."),
        click.option("--digits", type=click.IntRange(1, 17), default=None,
                     help="Significant digits of branch lengths (default: full round-trip precision)."),
        click.option("--support-digits", type=click.IntRange(0, 6), default=0, show_default=True,
                     help="Decimals of support percentages."),
    ])


def check_output_not_input(output: str | None, *inputs: str | None) -> None:
    """Refuse an output path that is one of the inputs: the input would be lost.
    A character device (/dev/null, a terminal) may be both; a FIFO may not."""
    from ..io.output import is_char_device

    if output in (None, "-") or is_char_device(output):
        return
    out = os.path.realpath(output)
    for path in inputs:
        if path in (None, "-") or not os.path.exists(path):
            continue
        # realpath catches symbolic links, samefile hard links
        if os.path.realpath(path) == out or (os.path.exists(output) and os.path.samefile(path, output)):
            raise InputError(f"the output {output} is also an input; choose another output path")


def output_format(output: str, fmt: str | None) -> str:
    """The tree format to write: ``fmt`` when given, else told from the suffix of ``output``."""
    if fmt:
        return fmt
    name = str(output).lower().removesuffix(".gz")  # tree.nex.gz: gzip-compressed NEXUS
    return "nexus" if name.endswith((".nex", ".nexus", ".nxs")) else "newick"


def write_tree(tree: Tree, output: str, fmt: str | None, digits: int | None, support_digits: int) -> None:
    """Write ``tree`` to ``output`` in the format :func:`output_format` tells."""
    tree.write(output, format=output_format(output, fmt), digits=digits, support_digits=support_digits)


ROOT_HELP: str = "Root first: 'midpoint', or outgroup taxa separated by commas."


def root_options(spec: str) -> dict[str, Any]:
    """The ``--root`` option's text as the arguments of :func:`cladewright.rooting.root_tree`.

    Parameters
    ----------
    spec : str
        ``midpoint`` (any case), or outgroup taxa separated by commas.

    Returns
    -------
    dict
        ``midpoint`` (bool) and ``outgroup`` (list of str, or None).
    """
    text = (spec or "").strip()
    if not text:
        raise InputError("empty root specification; give 'midpoint' or outgroup taxa separated by commas")
    if text.lower() == "midpoint":
        return {"midpoint": True, "outgroup": None}
    return {"midpoint": False, "outgroup": text.split(",")}
