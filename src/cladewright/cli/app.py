"""Internal: a part of the command line (run it as the cladewright command).

The command group and what every command shares: the context, the error guard, usage
errors on one line, ``--quiet`` and ``--debug`` after any command, the options common to
several commands (``--root RULE`` with :func:`root_option` and :func:`parse_root`, the model
options, ``--support``), the checks on output paths and the summaries' ``output`` line. The
table that turns the library's parameter spellings into options is in :mod:`.wording`.

No computation here: the commands (:mod:`.build`, :mod:`.support`, :mod:`.tools`)
read, call the library, write and report.
"""

from __future__ import annotations

import functools
import os
import re
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ParamSpec, TypeVar

import click

from ..choices import (ALPHABETS, FREQ_MODES, GAP_MODES, PRECISIONS, SATURATED_MODES, SUPPORT_WORDS,
                       TREE_FORMATS)
from ..errors import CladewrightError, InputError
from ..io.newick_writer import QUOTINGS
from .wording import PARAMETER_OPTIONS, as_options

if TYPE_CHECKING:
    from ..tree import Tree

P = ParamSpec("P")
R = TypeVar("R")
F = TypeVar("F", bound=Callable[..., Any])

__all__ = ["main", "Context", "guarded", "as_options", "PARAMETER_OPTIONS", "model_options",
           "tree_output_options", "check_output_not_input", "output_format", "write_tree", "RootRule",
           "parse_root", "root_option", "ROOT_METAVAR", "output_line", "support_option", "tree_kind",
           "CommandGroup", "UsageLine"]


class Context:
    """What every command is given (``click.pass_obj``): the group's ``--debug`` and ``--quiet``, and
    the command's Newick ``--quoting``."""

    debug: bool
    quiet: bool
    quoting: str

    def __init__(self, debug: bool, quiet: bool) -> None:
        self.debug = debug
        self.quiet = quiet
        self.quoting = "plain"

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


class UsageLine(click.UsageError):
    """A usage error (unknown option, missing argument, bad value) shown as one line,
    ``cladewright: error: ...``, with exit status 2."""

    def show(self, file: Any = None) -> None:
        # the program's own name, however it was started (a script, python -m, a test runner)
        command = " ".join(["cladewright"] + (self.ctx.command_path.split()[1:] if self.ctx is not None else []))
        # click's sentences in the project's form: lower case, joined by semicolons, the help named last
        message = re.sub(r"\((did you mean[^)]*)\)", r"\1", " ".join(self.format_message().split()),
                         flags=re.IGNORECASE)
        parts = [p.strip() for p in message.split(". ") if p.strip()]
        text = "; ".join(p[:1].lower() + p[1:] for p in parts).rstrip(".")
        click.echo(f"cladewright: error: {text}{' ' if text.endswith('?') else '; '}see '{command} --help'",
                   err=True)


def _set_flag(ctx: click.Context, param: click.Parameter, value: bool) -> None:
    """``--quiet`` or ``--debug`` given after the command: set on the shared :class:`Context`."""
    shared = ctx.find_object(Context)
    if value and shared is not None and param.name is not None:
        setattr(shared, param.name, True)


def shared_flags() -> list[click.Option]:
    """``--quiet`` and ``--debug`` for a command, so that they may follow the command's name too."""
    return [click.Option(["--quiet", "-q"], is_flag=True, expose_value=False, callback=_set_flag,
                         help="No summary or progress on stderr."),
            click.Option(["--debug"], is_flag=True, expose_value=False, callback=_set_flag,
                         help="Show the full traceback on errors.")]


class CommandGroup(click.Group):
    """The ``cladewright`` group: every command also takes ``--quiet`` and ``--debug``, and usage errors
    are one line (:class:`UsageLine`)."""

    def add_command(self, cmd: click.Command, name: str | None = None) -> None:
        have = {opt for p in cmd.params for opt in getattr(p, "opts", ())}
        cmd.params.extend(p for p in shared_flags() if not have & set(p.opts))
        super().add_command(cmd, name)

    def make_context(self, info_name: str | None, args: list[str], parent: click.Context | None = None,
                     **extra: Any) -> click.Context:
        try:
            return super().make_context(info_name, args, parent=parent, **extra)
        except click.UsageError as err:
            raise _one_line(err) from None

    def invoke(self, ctx: click.Context) -> Any:
        try:
            return super().invoke(ctx)
        except click.UsageError as err:
            raise _one_line(err) from None


def _one_line(err: click.UsageError) -> click.UsageError:
    if isinstance(err, UsageLine) or type(err).__name__ == "NoArgsIsHelpError":  # help is shown as it is
        return err
    line = UsageLine(err.format_message(), err.ctx)
    line.exit_code = 2
    return line


@click.group(cls=CommandGroup, context_settings={"help_option_names": ["-h", "--help"]})
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
        click.option("--gamma-shape", "gamma", type=float, default=None, metavar="ALPHA",
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
        click.option("--quoting", type=click.Choice(QUOTINGS), default="plain", show_default=True,
                     expose_value=False, callback=_keep_quoting,
                     help="Newick names: plain writes names whose only special character is '_' as they are "
                          "(what most software reads); strict quotes them too, for readers that turn a bare "
                          "'_' into a blank. NEXUS output always quotes them."),
    ])


def _keep_quoting(ctx: click.Context, param: click.Parameter, value: str) -> str:
    """Keep ``--quoting`` on the run's :class:`Context`, for :func:`write_tree`."""
    if isinstance(ctx.obj, Context):
        ctx.obj.quoting = value
    return value


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
    """Write ``tree`` to ``output`` in the format :func:`output_format` tells (Newick with the command's
    ``--quoting``)."""
    form = output_format(output, fmt)
    if form == "newick":
        ctx = click.get_current_context(silent=True)
        quoting = ctx.obj.quoting if ctx is not None and isinstance(ctx.obj, Context) else "plain"
        tree.write(output, format=form, digits=digits, support_digits=support_digits, quoting=quoting)
    else:
        tree.write(output, format=form, digits=digits, support_digits=support_digits)


#: The metavar and help of ``--root`` wherever it appears: one spelling of rooting on every command.
ROOT_METAVAR: str = "RULE"


@dataclass(frozen=True)
class RootRule:
    """A rooting rule read from ``--root``: ``midpoint``, ``outgroup:TAXON[,TAXON...]`` or ``stored``.

    ``stored`` keeps the stored root and takes it as meaningful (the tree is marked rooted).
    """

    kind: str
    taxa: tuple[str, ...] = ()

    def __str__(self) -> str:
        """The rule as the command line spells it (``outgroup:A,B``)."""
        return f"outgroup:{','.join(self.taxa)}" if self.kind == "outgroup" else self.kind

    def describe(self) -> str:
        """The rule in words, for summaries."""
        if self.kind == "midpoint":
            return "midpoint of the longest path"
        if self.kind == "outgroup":
            return f"outgroup {', '.join(self.taxa)}"
        return "the stored root"

    def apply(self, tree: Tree) -> Tree:
        """``tree`` rooted by this rule (:mod:`cladewright.rooting`); ``stored`` marks the stored root meaningful."""
        from ..rooting import midpoint_root, outgroup_root

        if self.kind == "midpoint":
            return midpoint_root(tree)
        if self.kind == "outgroup":
            return outgroup_root(tree, list(self.taxa))
        if tree.rooted:
            return tree
        from ..tree import Tree

        return Tree(tree.parent, tree.length, tree.leaf_names, support=tree.support, labels=tree.labels,
                         rooted=True, support_text=tree.support_text)


def _rules_text(stored: bool) -> str:
    return "midpoint, outgroup:TAXON[,TAXON...] or stored" if stored else "midpoint or outgroup:TAXON[,TAXON...]"


def parse_root(text: str, *, stored: bool = True) -> RootRule:
    """The ``--root`` option's text as a :class:`RootRule`.

    Parameters
    ----------
    text : str
        ``midpoint``, ``outgroup:TAXON[,TAXON...]`` or (when ``stored``) ``stored``; the rule's word in any case.
    stored : bool
        Whether ``stored`` (keep the stored root) is offered.

    Returns
    -------
    RootRule

    Raises
    ------
    InputError
        Any other text; the message names the option and the rules offered.

    Example
    -------
    >>> parse_root("outgroup:a,b")
    RootRule(kind='outgroup', taxa=('a', 'b'))
    """
    raw = (text or "").strip()
    word, colon, rest = raw.partition(":")
    word = word.strip().lower()
    if word == "midpoint" and not colon:
        return RootRule("midpoint")
    if word == "stored" and not colon and stored:
        return RootRule("stored")
    if word == "outgroup" and colon:
        taxa = tuple(t.strip() for t in rest.split(","))
        if taxa and all(taxa):
            return RootRule("outgroup", taxa)
    raise InputError(f"--root {raw!r} is not a rooting rule; give {_rules_text(stored)}")


def root_option(*, stored: bool = True, required: bool = False, help: str | None = None) -> Callable[[F], F]:
    """The ``--root RULE`` option, read by :func:`parse_root` into the parameter ``root_rule``
    (a :class:`RootRule`, or None when not given).

    Parameters
    ----------
    stored : bool
        Offer ``stored`` (keep the stored root) among the rules.
    required : bool
        Whether the option must be given.
    help : str, optional
        A sentence put before the list of rules in the option's help.

    Returns
    -------
    callable
        A click decorator.
    """

    def convert(ctx: click.Context, param: click.Parameter, value: str | None) -> RootRule | None:
        if value is None:
            if required:
                raise click.MissingParameter(ctx=ctx, param=param)
            return None
        try:
            return parse_root(value, stored=stored)
        except InputError as err:
            raise click.UsageError(str(err), ctx) from None

    words = ["midpoint (halfway along the longest leaf-to-leaf path)",
             "outgroup:TAXON[,TAXON...] (on the branch separating these taxa from the rest)"]
    if stored:
        words.append("stored (the file's own root, taken as meaningful)")
    rules = "RULE: " + ", ".join(words[:-1]) + " or " + words[-1] + "."
    return click.option("--root", "root_rule", default=None, required=required, metavar=ROOT_METAVAR,
                        callback=convert, help=((help + " ") if help else "") + rules)


SUPPORT_HELP: str = ("proportion: the percentage of replicate trees that hold the split (Felsenstein's bootstrap "
                     "proportion, FBP); transfer: the transfer bootstrap expectation (TBE, Lemoine et al. 2018).")


def support_option(func: F) -> F:
    """``--support proportion|transfer``: the support measure, in this command line's words
    (:data:`cladewright.choices.SUPPORT_WORDS` gives the library's spelling of each)."""
    return click.option("--support", "measure", type=click.Choice(tuple(SUPPORT_WORDS)), default="proportion",
                        show_default=True, help=SUPPORT_HELP)(func)


def tree_kind(output: str, fmt: str | None) -> str:
    """The format of a tree file to be written, in words: ``Newick`` or ``NEXUS``, gzip-compressed or not."""
    kind = "NEXUS" if output_format(output, fmt) == "nexus" else "Newick"
    return kind + (", gzip-compressed" if str(output).lower().endswith(".gz") else "")


def output_line(output: str, kind: str) -> str:
    """The last line of every summary: where the run wrote, and in what form.

    ``output    PATH (kind)``, or ``output    standard output (kind)`` for ``-``.
    """
    return f"output    {'standard output' if output in (None, '-') else output} ({kind})"

