"""Internal: a part of the command line (run it as the cladewright command).

The summaries the commands print on stderr after a run: what went in, how
the run was set up, and its warnings, each worded once (by
:func:`cladewright.pipeline.run_warnings`) and shown in the command line's terms."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import TYPE_CHECKING, Any

from ..choices import SUPPORT_WORDS
from ..errors import CladewrightWarning
from ..pipeline import run_warnings
from .wording import as_options

if TYPE_CHECKING:
    from ..alignment import Alignment
    from ..matrix import DistanceMatrix
    from ..resampling import BootstrapResult

__all__ = ["distance_summary", "tree_summary", "identical_lines", "shown_warnings", "support_words"]


def shown_warnings(info: dict[str, Any], alignment: Alignment | None = None) -> list[CladewrightWarning]:
    """The run's warnings (``info["warnings"]``, else made from ``info``), in the command line's terms."""
    found = info.get("warnings")
    if found is None:
        found = run_warnings(info, alignment)
    return [CladewrightWarning(w.kind, as_options(w.message)) for w in found]


def warning_lines(warnings: Iterable[CladewrightWarning]) -> list[str]:
    return [f"warning   {w.message}" for w in warnings]


def identical_lines(info: Mapping[str, Any]) -> list[str]:
    """The summary's line on groups of identical sequences, when there are any."""
    groups = info.get("identical_groups") or 0
    if not groups:
        return []
    return [f"identical {groups} group(s) of identical sequences ({info['identical_sequences']} sequences), "
            "each computed once and written as a polytomy"]


def model_line(info: Mapping[str, Any]) -> str:
    """``model     NAME`` with its gamma shape and, for discrete gamma, the number of categories."""
    line = f"model     {info.get('model', '')}"
    if info.get("gamma"):
        k = info.get("gamma_categories")
        line += f" + gamma (alpha {info['gamma']:g}" + (f", {k} categories)" if k else ")")
    return line


def distance_summary(aln: Alignment, dm: DistanceMatrix, seconds: float) -> str:
    """The summary the ``distances`` command prints: input, sites used, model, warnings, time."""
    info = dm.info
    lines = [
        f"taxa      {aln.n_taxa}",
        f"sites     {aln.n_sites} ({aln.n_patterns} distinct patterns, {info['sites_used']} used, gaps {info['gaps']})",
        model_line(info),
    ]
    lines.extend(warning_lines(shown_warnings(info, aln)))
    lines.extend(identical_lines(info))
    lines.append(f"time      {seconds:.2f} s")
    return "\n".join(lines)


def support_words(word: str) -> str:
    """A support measure in the command line's word with the paper's acronym: ``proportion (FBP)``."""
    return f"{word} ({SUPPORT_WORDS[word].upper()})"


def tree_summary(aln: Alignment | None, dm: DistanceMatrix | None, info: Mapping[str, Any], boot: BootstrapResult | None,
                 seconds: float, warnings: Iterable[CladewrightWarning], measure: str = "proportion") -> str:
    """``warnings``: the run's warnings as :func:`shown_warnings` gives them; ``measure``: the support
    measure in the command line's word."""
    lines = []
    if aln is not None:
        lines.append(f"taxa      {aln.n_taxa}")
        lines.append(f"sites     {aln.n_sites} ({aln.n_patterns} distinct patterns, gaps {info.get('gaps')})")
        lines.append(model_line(info))
    elif dm is None:  # a tree straight from a distance store
        lines.append(f"taxa      {info['taxa']} (distance store, {info['distinct']} distinct)")
        lines.append(model_line(info))
    else:
        lines.append(f"taxa      {len(dm.names)} (distance matrix)")
    lines.append(f"method    {info['method']}" + (f", refined by {info['refine']}" if info.get("refine") not in
                                                      (None, "none") else ""))
    if info.get("criterion") and info.get("length_before") is not None:
        # the criterion's tree length of the start and of the refined tree (Desper & Gascuel 2002)
        crit = str(info["criterion"]).upper()
        if info.get("refine") not in (None, "none"):
            lines.append(f"length    {crit} tree length {info['length_before']:.6g} before, "
                         f"{info['length_after']:.6g} after ({info['moves']} "
                         f"{'regrafts' if info.get('refine') == 'spr' else 'interchanges'})")
        else:
            lines.append(f"length    {crit} tree length {info['length_after']:.6g}")
    if info.get("fit_name") and info.get("fit_value") is not None:
        lines.append(f"fit       {info['fit_name']} {info['fit_value']:.4g}")
    elif info.get("fit_name") or info.get("identical_groups"):
        lines.append("fit       not defined (fewer than three distinct sequences, or every distance zero)")
    lines.extend(identical_lines(info))
    if boot is not None:
        resumed = f", {info['resumed']} resumed" if info.get("resumed") else ""
        lines.append(f"support   {support_words(measure)}, {len(boot.replicates)} replicates{resumed}, "
                     f"seed {boot.seed}")
    lines.extend(warning_lines(warnings))
    lines.append(f"time      {seconds:.2f} s")
    return "\n".join(lines)
