"""A run report: one self-contained HTML file.

Everything is inline (styles, and the figures as SVG), so the file opens
offline, can be mailed or archived, and asks no server for anything. It
records what went in (taxa, sites, alphabet, gaps, distinct patterns), how
the run was set up (every setting and the exact command line), the software
versions, the fit of the tree to the distances, every warning, and three
figures: the tree, a heat map of the distances in the tree's leaf order, and
a histogram of support values.

References
----------
Sokal & Rohlf (1962) Taxon 11:33-40 (cophenetic correlation); Fitch &
Margoliash (1967) Science 155:279-284 (percent standard deviation);
Felsenstein (1985) Evolution 39:783-791 (bootstrap support).
"""

from __future__ import annotations

import datetime as _dt
import html
import os
import platform
import re
import shlex
from collections.abc import Iterable, Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .errors import CladewrightWarning

if TYPE_CHECKING:
    from matplotlib.figure import Figure

    from .alignment import Alignment
    from .matrix import DistanceMatrix
    from .tree import Tree

__all__ = ["write_report", "report_html", "CAUTION", "software_versions", "SETTING_WORDS"]

#: The caution every report opens with (the README's, in short).
CAUTION: str = ("A distance tree is exploratory evidence: a first look at the data. Where results may feed "
           "decisions about people, such as outbreak or transmission inference, do not rely on it alone: "
           "defer to validated methods, expert review and the rules that apply locally.")

_CSS = """
body{font-family:system-ui,-apple-system,"Segoe UI",Roboto,"DejaVu Sans",sans-serif;color:#1b1f24;
max-width:60rem;margin:2rem auto;padding:0 1rem;line-height:1.45}
h1{font-size:1.6rem;margin-bottom:.2rem}h2{font-size:1.2rem;border-bottom:2px solid #1f3a56;padding-bottom:.2rem;
margin-top:2rem}.sub{color:#55616d;margin-top:0}table{border-collapse:collapse;margin:.5rem 0}
td,th{padding:.2rem .8rem .2rem 0;text-align:left;vertical-align:top}th{color:#55616d;font-weight:600}
pre{background:#f3f5f7;padding:.6rem;overflow-x:auto;white-space:pre-wrap;word-break:break-all}
.caution{border-left:5px solid #c4501a;background:#fbf1ec;padding:.6rem 1rem}
.warn li{color:#8a3510}.fig svg{max-width:100%;height:auto}
"""


def software_versions() -> dict[str, str]:
    """Versions of Python and the libraries a run depends on (dict)."""
    from importlib import metadata

    import numba
    import scipy
    import matplotlib

    try:
        version = metadata.version("cladewright")
    except metadata.PackageNotFoundError:  # run from a source tree that was never installed
        version = "not installed"
    return {"cladewright": version, "python": platform.python_version(), "numpy": np.__version__,
            "scipy": scipy.__version__, "numba": numba.__version__, "matplotlib": matplotlib.__version__,
            "platform": platform.platform()}


def _svg(fig: Figure, salt: str) -> str:
    from .draw import figure_bytes

    text = figure_bytes(fig, "svg", salt=salt).decode("utf-8")
    text = text[text.index("<svg"):]
    # The RDF block only names vocabularies; dropping it keeps the page free
    # of any address it could be mistaken to load.
    return re.sub(r"<metadata>.*?</metadata>", "", text, flags=re.S)


def _heatmap_svg(dm: DistanceMatrix, order_names: list[str], alias: Mapping[str, str] | None = None) -> str:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    where = {x: i for i, x in enumerate(dm.names)}
    where.update({x: where[rep] for x, rep in (alias or {}).items() if rep in where and x not in where})
    missing = [x for x in order_names if x not in where]
    if missing or len(set(where) & set(order_names)) != len(order_names):
        raise ValueError(f"the tree and the distance matrix hold different taxa (e.g. {missing[:3]})")
    idx = np.array([where[x] for x in order_names], dtype=np.int64)
    values = np.asarray(dm.values, dtype=np.float64)[np.ix_(idx, idx)]
    n = idx.size
    labelled = n <= 60
    side = 6.5 if labelled else 6.0
    fig = Figure(figsize=(side + 1.2, side))
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.3 if labelled else 0.08, 0.3 if labelled else 0.08, 0.55 if labelled else 0.75,
                       0.62 if labelled else 0.86))
    im = ax.imshow(values, cmap="cividis", interpolation="nearest", aspect="equal")
    if labelled:
        font = max(3.0, min(7.0, 300.0 / max(n, 1)))
        ax.set_xticks(range(n))
        ax.set_yticks(range(n))
        ax.set_xticklabels(order_names, rotation=90, fontsize=font)
        ax.set_yticklabels(order_names, fontsize=font)
    else:
        ax.set_xticks([])
        ax.set_yticks([])
        ax.set_xlabel(f"{n} taxa in tree order (top to bottom, left to right)", fontsize=8)
    cb = fig.colorbar(im, ax=ax, fraction=0.05, pad=0.03)
    cb.set_label("distance" + (f" ({dm.info['model']})" if dm.info.get("model") else ""), fontsize=8)
    cb.ax.tick_params(labelsize=7)
    return _svg(fig, "cladewright-heatmap")


def _histogram_svg(values: NDArray[np.float64], threshold: float | None) -> str:
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from .draw import INK, LOW

    fig = Figure(figsize=(6.0, 2.8))
    FigureCanvasAgg(fig)
    ax = fig.add_axes((0.1, 0.2, 0.86, 0.72))
    edges = np.linspace(0.0, 100.0, 21)
    counts, _ = np.histogram(np.clip(values, 0.0, 100.0), bins=edges)
    colours = [LOW if threshold is not None and hi <= threshold else INK for hi in edges[1:]]
    ax.bar(edges[:-1], counts, width=5.0, align="edge", color=colours, edgecolor="white", linewidth=0.6)
    ax.set_xlim(0, 100)
    ax.set_xlabel("support (%)", fontsize=8)
    ax.set_ylabel("internal branches", fontsize=8)
    ax.tick_params(labelsize=7)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    return _svg(fig, "cladewright-histogram")


def _fmt(value: object) -> str:
    if isinstance(value, float):
        return f"{value:.6g}"
    if isinstance(value, (list, tuple)):
        return ", ".join(_fmt(v) for v in value)
    return str(value)


def _rows(pairs: Iterable[tuple[object, object]]) -> str:
    out = ["<table>"]
    for key, value in pairs:
        out.append(f"<tr><th>{html.escape(str(key))}</th><td>{html.escape(_fmt(value))}</td></tr>")
    out.append("</table>")
    return "\n".join(out)


def _identical_alias(alignment: Alignment | None, dm: DistanceMatrix) -> dict[str, str]:
    """Each sequence entered once for its group of identical sequences, with
    the name of the sequence whose row of ``dm`` stands for it."""
    if alignment is None or len(dm.names) == alignment.n_taxa:
        return {}
    from .alignment import identical_groups

    first, group = identical_groups(alignment)
    names = alignment.names
    return {names[i]: names[first[g]] for i, g in enumerate(group.tolist())}


def _warnings(alignment: Alignment | None, dm: DistanceMatrix, info: Mapping[str, Any],
              given: Iterable[str | CladewrightWarning] | None) -> list[str]:
    """The run's warnings, each worded once: the run's records (``info["warnings"]``,
    else made from ``info``, ``dm.info`` and ``alignment`` by
    :func:`cladewright.pipeline.run_warnings`), and those the caller gives; a given
    :class:`CladewrightWarning` stands in for the run's record of its kind."""
    from .pipeline import run_warnings

    given = list(given or [])
    records = info.get("warnings")
    if records is None:
        records = run_warnings({**dm.info, **info}, alignment)
    kinds = {w.kind for w in given if isinstance(w, CladewrightWarning)}
    found = []
    for w in given + [r for r in records if r.kind not in kinds]:
        if str(w) not in found:
            found.append(str(w))
    return found


#: The settings a library caller's ``info`` may hold, in the order shown, with the words shown
#: (a caller on the command line passes its own settings, in its option words).
SETTING_WORDS: tuple[tuple[str, str], ...] = (
    ("method", "method"), ("refine", "topology search"), ("criterion", "criterion"),
    ("model", "model"), ("gamma", "gamma shape"), ("gamma_categories", "gamma categories"), ("gaps", "gaps"),
    ("freqs", "base frequencies"), ("negative", "negative lengths"), ("replicates", "replicates"),
    ("seed", "seed"), ("support", "support measure"))


def _library_settings(dm: DistanceMatrix, info: Mapping[str, Any]) -> list[tuple[str, object]]:
    """The settings found in ``info`` (and ``dm.info``), in words, those not set left out."""
    merged = {**dm.info, **info}
    return [(word, merged[key]) for key, word in SETTING_WORDS if merged.get(key) not in (None, "")]


def _run_rows(dm: DistanceMatrix, info: Mapping[str, Any]) -> list[tuple[str, object]]:
    """What the run found on its way (not settings): sites used, capped distances, polytomies..."""
    merged = {**dm.info, **info}
    rows: list[tuple[str, object]] = []
    if merged.get("sites_used") is not None:
        rows.append(("sites used", merged["sites_used"]))
    if merged.get("saturated"):
        rows.append(("saturated distances", f"{merged['saturated']} pair(s)"
                     + (f", capped at {merged['cap']:.6g}" if merged.get("cap") is not None else "")))
    if merged.get("identical_groups"):
        rows.append(("identical sequences", f"{merged['identical_sequences']} in {merged['identical_groups']} "
                                            "group(s), each computed once"))
    if merged.get("negative_branches"):
        rows.append(("negative branch lengths", merged["negative_branches"]))
    for key, word in (("resumed", "replicates resumed from the file"), ("replicates_capped",
                                                                          "replicates with capped distances")):
        if merged.get(key):
            rows.append((word, merged[key]))
    return rows


def _as_written(tree: Tree, support_digits: int | None) -> Tree:
    """The tree as its file holds it: support with the file's digits (``support_text``)."""
    if support_digits is None:
        return tree
    from .io.readers import parse_newick

    return parse_newick(tree.to_newick(support_digits=support_digits))[0]


def report_html(*, alignment: Alignment | None = None, dm: DistanceMatrix, tree: Tree,
                info: Mapping[str, Any] | None = None, command_line: str | Sequence[str] = "",
                warnings: Iterable[str | CladewrightWarning] | None = None, support_values: ArrayLike | None = None,
                highlight_below: float | None = 70.0, title: str = "cladewright report",
                settings: Sequence[tuple[str, object]] | None = None, support_digits: int | None = None,
                groups: Mapping[str, str] | None = None, group_title: str | None = None) -> str:
    """The report as one HTML string (see :func:`write_report`)."""
    from .draw import scale_unit, tree_figure
    from .textdraw import tree_layout

    info = dict(info or {})
    tree = _as_written(tree, support_digits)
    if not isinstance(command_line, str):
        command_line = shlex.join(str(x) for x in command_line)
    percent, proportions = tree.support_percent()
    if support_values is None:
        shown = percent[np.isfinite(percent)]
    elif proportions:
        shown = 100.0 * np.asarray(support_values, dtype=np.float64)
    else:
        shown = np.asarray(support_values, dtype=np.float64)
    shown = np.asarray(shown, dtype=np.float64).reshape(-1)
    shown = shown[np.isfinite(shown)]
    all_warnings = _warnings(alignment, dm, info, warnings)

    esc = html.escape
    when = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0).isoformat()
    parts = [f"<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{esc(title)}</title>\n"
             f"<style>{_CSS}</style>\n</head>\n<body>\n<header><h1>{esc(title)}</h1>"
             f"<p class=\"sub\">{tree.n_leaves} taxa · made {esc(when)}</p></header>"]
    parts.append(f"<section id=\"caution\" class=\"caution\"><h2>Caution</h2><p>{esc(CAUTION)}</p></section>")

    rows = []
    if alignment is not None:
        s = alignment.summary()
        rows += [("taxa", s["taxa"]), ("sites", s["sites"]), ("alphabet", s["alphabet"]),
                 ("distinct site patterns", s["patterns"]), ("gaps", f"{100 * s['gap_fraction']:.2f}% of cells"),
                 ("missing or ambiguous", f"{100 * s['missing_fraction']:.2f}% of cells")]
        if s.get("least_data"):
            name, share = s["least_data"]
            rows.append(("least data", f"{name} ({100 * share:.0f}% unambiguous)"))
        rows.append(("source", alignment.source))
    else:
        rows.append(("taxa", len(dm.names)))
        rows.append(("input", "a distance matrix (no alignment)"))
    parts.append(f"<section id=\"input\"><h2>Input</h2>{_rows(rows)}</section>")

    shown_settings = list(settings) if settings is not None else _library_settings(dm, info)
    run_rows = _run_rows(dm, info)
    rerun = ("<p>Run in:</p><pre id=\"directory\">" + esc(os.getcwd()) + "</pre>") if settings is not None else ""
    parts.append(f"<section id=\"settings\"><h2>Settings</h2>{_rows(shown_settings)}"
                 f"<p>Command line{' (every setting explicit; it re-runs this run exactly)' if settings else ''}:"
                 f"</p><pre id=\"command-line\">{esc(command_line)}</pre>{rerun}"
                 + (f"<p>What the run found:</p>{_rows(run_rows)}" if run_rows else "") + "</section>")

    if info.get("fit_name") and info.get("fit_value") is not None:
        fit = [(info["fit_name"], info["fit_value"])]
    elif info.get("fit_name") or info.get("identical_groups"):
        fit = [("fit statistic", "not defined (fewer than three distinct sequences, or every distance zero)")]
    else:
        fit = [("fit statistic", "not computed")]
    if info.get("criterion") and info.get("length_after") is not None:
        # the criterion's tree length of the start and of the refined tree (Desper & Gascuel 2002)
        crit = f"{str(info['criterion']).upper()} tree length"
        if info.get("refine") not in (None, "none") and info.get("length_before") is not None:
            fit.append((crit, f"{info['length_before']:.6g} before, {info['length_after']:.6g} after "
                              f"({info.get('moves', 0)} "
                              f"{'regrafts' if info.get('refine') == 'spr' else 'interchanges'})"))
        else:
            fit.append((crit, f"{info['length_after']:.6g}"))
    x, y, kids, leaf_rows, _ = tree_layout(tree, True)
    order_names = [tree.leaf_names[i] for i in leaf_rows.tolist()]
    # the scale bar in the distances' unit: the model's, or the matrix's own when the run read one
    unit = scale_unit(dm.info.get("model") or ("matrix" if alignment is None else None))
    tree_svg = _svg(tree_figure(tree, highlight_below=highlight_below, unit=unit, groups=groups,
                                group_title=group_title), "cladewright-tree")
    parts.append(f"<section id=\"tree\"><h2>Tree</h2>{_rows(fit)}<div class=\"fig\">{tree_svg}</div>"
                 f"<details><summary>Newick</summary><pre>{esc(tree.to_newick())}</pre></details></section>")

    measure = ""
    if info.get("support") and info.get("replicates"):
        measure = (f"{info['support']} from {info['replicates']} bootstrap replicates"
                   + (f", seed {info['seed']}" if info.get("seed") is not None else "") + ". ")
    if shown.size:
        summary = f"{measure}{shown.size} internal branches; median {np.median(shown):.0f}%"
        if highlight_below is not None:
            low = int(np.count_nonzero(shown < highlight_below))
            summary += f"; {low} below {highlight_below:g}%"
        if proportions:
            summary += (". The tree's support values all lie within 0 to 1, so they were read as proportions "
                        "and are shown here as percentages")
        parts.append(f"<section id=\"support\"><h2>Support</h2><p>{esc(summary)}</p>"
                     f"<div class=\"fig\">{_histogram_svg(shown, highlight_below)}</div></section>")
    else:
        parts.append("<section id=\"support\"><h2>Support</h2><p>No support values (no bootstrap was run).</p>"
                     "</section>")

    parts.append(f"<section id=\"distances\"><h2>Distances</h2><p>Pairwise distances, rows and columns in the "
                 f"tree's leaf order (top to bottom).</p><div class=\"fig\">"
                 f"{_heatmap_svg(dm, order_names, _identical_alias(alignment, dm))}</div>"
                 f"</section>")

    if all_warnings:
        items = "".join(f"<li>{esc(w)}</li>" for w in all_warnings)
        parts.append(f"<section id=\"warnings\"><h2>Warnings</h2><ul class=\"warn\">{items}</ul></section>")
    else:
        parts.append("<section id=\"warnings\"><h2>Warnings</h2><p>None.</p></section>")

    parts.append(f"<section id=\"software\"><h2>Software</h2>{_rows(software_versions().items())}</section>")
    parts.append("</body>\n</html>\n")
    return "\n".join(parts)


def write_report(path: str | os.PathLike[str], *, alignment: Alignment | None = None, dm: DistanceMatrix,
                 tree: Tree, info: Mapping[str, Any] | None = None, command_line: str | Sequence[str] = "",
                 warnings: Iterable[str | CladewrightWarning] | None = None, support_values: ArrayLike | None = None,
                 highlight_below: float | None = 70.0, title: str = "cladewright report",
                 settings: Sequence[tuple[str, object]] | None = None, support_digits: int | None = None,
                 groups: Mapping[str, str] | None = None, group_title: str | None = None) -> None:
    """Write the HTML report of a run, atomically.

    Parameters
    ----------
    path : str or os.PathLike
    alignment : Alignment, optional
        The input alignment (absent when the run started from a matrix).
    dm : DistanceMatrix
        Its ``info`` (model, sites used, saturated pairs...) is reported.
    tree : Tree
        The final tree, with support.
    info : dict, optional
        Settings and results of the run (method, replicates, seed, support,
        ``fit_name``/``fit_value``, ``negative_branches``...). Without
        ``settings``, the settings among them (:data:`SETTING_WORDS`) are
        shown in words, those not set left out; what the run found (sites
        used, capped distances, identical sequences) is shown apart.
    command_line : str or sequence of str
        The exact command line (a sequence is shell-quoted).
    settings : sequence of (str, object), optional
        The run's settings as the caller words them (the command line passes
        its options with their values), shown as given and in order;
        with them the report says that the command line re-runs the run, and
        names the directory it ran in.
    support_digits : int, optional
        Decimals of the support written to the tree file: the figure shows
        support as the file holds it (the tree is re-read from its Newick text
        at these digits, so each value keeps its file's text).
    warnings : sequence of str or CladewrightWarning, optional
        Warnings of the caller's own, shown beside the run's: those in
        ``info["warnings"]``, or, when ``info`` holds none, those
        :func:`cladewright.pipeline.run_warnings` makes from ``dm.info``,
        ``info`` and ``alignment`` (saturated pairs, capped replicates,
        negative branch lengths, sequences with little data). Each is shown
        once; a CladewrightWarning given here replaces the run's own of its
        kind.
    support_values : array_like, optional
        Support of the internal branches, for the histogram, on the tree's
        own scale; default the tree's finite support values. Support read
        on a 0-1 scale (:meth:`cladewright.tree.Tree.support_percent`) is
        shown as percentages, and the report says so.
    highlight_below : float, optional
        Support threshold marked in the figures (default 70).
    title : str
    groups, group_title : optional
        Taxon name -> category, to colour the tree figure's leaves with a
        legend titled ``group_title`` (:func:`cladewright.io.leaf_table.read_leaf_groups`).

    References
    ----------
    Felsenstein (1985) Evolution 39:783-791; Sokal & Rohlf (1962) Taxon
    11:33-40; Fitch & Margoliash (1967) Science 155:279-284.
    """
    from .io.output import write_text_atomic

    text = report_html(alignment=alignment, dm=dm, tree=tree, info=info, command_line=command_line,
                       warnings=warnings, support_values=support_values, highlight_below=highlight_below,
                       title=title, settings=settings, support_digits=support_digits, groups=groups,
                       group_title=group_title)
    write_text_atomic(path, text)
