"""The HTML run report.

Structure checked with the standard library's html.parser (WHATWG HTML:
title, sections, inline <svg> figures, no external resources); versions
against the modules themselves; the caution and the command line verbatim.
When a Chromium browser is installed, the page is also opened headless and
its DOM checked for the taxon names.
"""

import os
import platform
import re
import subprocess
from html.parser import HTMLParser

import numba
import numpy as np
import pytest
import scipy

import cladewright
from cladewright.build import build_tree_with_info
from cladewright.distances import distance_matrix
from cladewright.report import CAUTION, write_report
from cladewright.support import apply_support

from simulate import make_alignment, simulate_dna

CHROMIUM = "/usr/bin/chromium"


class Page(HTMLParser):
    """Collects what the checks need from the page."""

    def __init__(self):
        super().__init__()
        self.title = ""
        self.sections = []
        self.svg = 0
        self.links = []
        self.tags = []
        self._in_title = False
        self.text = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        attrs = dict(attrs)
        if tag == "title":
            self._in_title = True
        if tag == "section":
            self.sections.append(attrs.get("id"))
        if tag == "svg":
            self.svg += 1
        for key in ("src", "href", "xlink:href", "action", "data"):
            if key in attrs:
                self.links.append((tag, attrs[key]))

    def handle_endtag(self, tag):
        if tag == "title":
            self._in_title = False

    def handle_data(self, data):
        if self._in_title:
            self.title += data
        self.text.append(data)


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    names, seqs = simulate_dna(12, 300, seed=5)
    # one sequence mostly missing: must be reported as having little data
    seqs[3] = seqs[3][:60] + "-" * 240
    aln = make_alignment(names, seqs)
    dm = distance_matrix(aln, "k2p")
    dm.info.update(saturated=1, cap=2.5, saturated_pairs=[("s1", "s2")])
    tree, info = build_tree_with_info(dm, "nj", "keep")
    info["negative_branches"] = max(info["negative_branches"], 2)
    info["negative"] = "keep"
    _, nodes = tree.splits()
    values = np.linspace(20, 100, nodes.size)
    tree = apply_support(tree, values)
    path = tmp_path_factory.mktemp("report") / "run.html"
    command = ["cladewright", "tree", "my alignment.fasta", "-o", "out.nwk", "--replicates", "100"]
    write_report(path, alignment=aln, dm=dm, tree=tree, info=info, command_line=command,
                 warnings=["a warning given by the caller"], support_values=values)
    return path, tree, aln


def test_structure(report):
    # source: WHATWG HTML, parsed with html.parser
    path, tree, _ = report
    text = path.read_text(encoding="utf-8")
    assert text.startswith("<!DOCTYPE html>")
    page = Page()
    page.feed(text)
    page.close()
    assert page.title == "cladewright report"
    for section in ("caution", "input", "settings", "tree", "support", "distances", "warnings", "software"):
        assert section in page.sections
    assert page.svg >= 3  # tree, support histogram, heat map: inline
    # self-contained: nothing fetched from anywhere (only in-page and data: references)
    for tag, link in page.links:
        assert link.startswith(("#", "data:")), (tag, link)
    assert "script" not in page.tags and "link" not in page.tags and "iframe" not in page.tags
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", text)


def test_content(report):
    # source: the modules' own version attributes; the caution and command line verbatim
    path, tree, aln = report
    page = Page()
    page.feed(path.read_text(encoding="utf-8"))
    body = " ".join(" ".join(page.text).split())
    assert " ".join(CAUTION.split()) in body
    assert "outbreak or transmission inference" in body
    assert "cladewright tree 'my alignment.fasta' -o out.nwk --replicates 100" in body
    for version in (platform.python_version(), np.__version__, scipy.__version__, numba.__version__,
                    cladewright.__version__):
        assert version in body
    for name in tree.leaf_names:
        assert name in body
    assert f"{aln.n_patterns}" in body and "300" in body and "dna" in body
    assert "a warning given by the caller" in body
    assert "saturated" in body and "s1 – s2" in body
    assert "negative" in body
    assert "sequence s3 has unambiguous states at only" in body


@pytest.mark.skipif(not os.path.exists(CHROMIUM), reason=f"{CHROMIUM} is not installed; the page structure is "
                    "still checked by test_structure")
def test_opens_in_a_headless_browser(report, tmp_path):
    # reference: a real browser's DOM (Chromium, headless)
    path, tree, _ = report
    cmd = [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
           "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={tmp_path}",
           "--dump-dom", path.resolve().as_uri()]
    dom = subprocess.run(cmd, capture_output=True, text=True, timeout=120, check=True).stdout
    for name in tree.leaf_names:
        assert name in dom
    assert dom.count("<svg") >= 3


def test_settings_in_words_without_none_or_internal_keys(report):
    # source: the report's documented contract (docs/trees.md): settings in words, none unset, no internal
    # keys (the info dict of build_tree_with_info holds None values and keys such as sites_used)
    path, _, _ = report
    text = path.read_text(encoding="utf-8")
    section = text.split('<section id="settings">', 1)[1].split("</section>", 1)[0]
    cells = re.findall(r"<t[hd]>([^<]*)</t[hd]>", section)
    assert cells, section[:200]
    assert "None" not in cells and "nan" not in cells
    assert not [c for c in cells if re.fullmatch(r"[a-z]+(_[a-z]+)+", c)], cells
    assert "sites used" in cells and "900" not in cells  # 300 sites simulated; what the run found, in words


def test_the_report_colours_its_tree_by_a_column_of_a_leaf_table(tmp_path):
    # The request: leaves coloured by a column of a metadata table, with a legend, in the report; the
    # colours are the Okabe & Ito (2008) palette (checked in tests/app/test_draw.py). Here: every category is in
    # the legend, the command line recorded re-runs with the table, a table without --report is a usage error
    # (common practice: an option that cannot take effect is refused), and a bad column stops the run before any
    # file is written.
    from click.testing import CliRunner

    from cladewright.cli import main

    names, seqs = simulate_dna(9, 120, 5)
    fasta = tmp_path / "a.fasta"
    fasta.write_text("".join(f">{a}\n{s}\n" for a, s in zip(names, seqs)))
    table = tmp_path / "taxa.tsv"
    table.write_text("taxon\tisland\n" + "".join(f"{a}\t{('Aster', 'Brill', 'Corran')[i % 3]}\n"
                                                 for i, a in enumerate(names)))
    html = tmp_path / "r.html"
    run = CliRunner().invoke(main, ["tree", str(fasta), "-o", str(tmp_path / "t.nwk"), "--report", str(html),
                                    "--leaf-table", str(table), "--colour-by", "island"])
    assert run.exit_code == 0, run.output
    text = html.read_text(encoding="utf-8")
    for island in ("Aster", "Brill", "Corran"):
        assert island in text
    assert "--leaf-table" in text and "--colour-by island" in text
    alone = CliRunner().invoke(main, ["tree", str(fasta), "-o", str(tmp_path / "u.nwk"), "--leaf-table",
                                      str(table), "--colour-by", "island"])
    assert alone.exit_code == 2 and "--report" in alone.stderr
    bad = CliRunner().invoke(main, ["tree", str(fasta), "-o", str(tmp_path / "v.nwk"), "--report",
                                    str(tmp_path / "v.html"), "--leaf-table", str(table), "--colour-by", "reef"])
    assert bad.exit_code != 0 and "reef" in bad.stderr and len(bad.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "v.nwk").exists() and not (tmp_path / "v.html").exists()
