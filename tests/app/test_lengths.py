"""The ``lengths`` command: branch lengths fitted to a given tree.

References: ordinary least squares (Rzhetsky & Nei 1993) checked with numpy.linalg.lstsq on the
path-incidence system built here; weighted least squares with weights 1/d^2 (Fitch & Margoliash 1967)
minimises the weighted sum of squares, so it is never above the OLS fit's (from the definition).
"""

import re

import dendropy
import numpy as np
from click.testing import CliRunner

from cladewright.cli import main
from simulate import random_join_tree


def incidence(newick, names):
    """Pairs x edges path-incidence matrix of a tree read by DendroPy, and the edges' leaf sets."""
    ns = dendropy.TaxonNamespace(names)
    tree = dendropy.Tree.get(data=newick, schema="newick", taxon_namespace=ns, preserve_underscores=True)
    edges = [e for e in tree.postorder_edge_iter() if e.tail_node is not None]
    below = [frozenset(x.taxon.label for x in e.head_node.leaf_iter()) for e in edges]
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1:]]
    A = np.array([[1.0 if (a in s) != (b in s) else 0.0 for s in below] for a, b in pairs])
    return A, pairs, below, edges


def test_ols_lengths_from_the_command_line_equal_lstsq(tmp_path):
    rng = np.random.default_rng(5)
    t = random_join_tree(rng, 9, False, support=False, shuffle=False)
    names = list(t.leaf_names)
    D = t.patristic() * rng.uniform(0.9, 1.1, (9, 9))
    D = (D + D.T) / 2
    np.fill_diagonal(D, 0)
    (tmp_path / "d.tsv").write_text("\t" + "\t".join(names) + "\n" + "".join(
        f"{a}\t" + "\t".join(repr(float(x)) for x in row) + "\n" for a, row in zip(names, D)))
    (tmp_path / "t.nwk").write_text(t.to_newick())
    runner = CliRunner()
    out = {}
    for c in ("ols", "wls"):
        r = runner.invoke(main, ["lengths", str(tmp_path / "t.nwk"), str(tmp_path / "d.tsv"), "-o",
                                 str(tmp_path / f"{c}.nwk"), "--criterion", c])
        assert r.exit_code == 0, r.output
        out[c] = float(re.search(r"weighted sum of squares ([0-9.e+-]+)", r.output).group(1))
    A, pairs, below, edges = incidence((tmp_path / "t.nwk").read_text(), names)
    d = np.array([D[names.index(a), names.index(b)] for a, b in pairs])
    # the two edges at a degree-2 root are one unrooted edge; here the tree is unrooted (basal trifurcation)
    ref, *_ = np.linalg.lstsq(A, d, rcond=None)
    A2, _, below2, edges2 = incidence((tmp_path / "ols.nwk").read_text(), names)
    got = {s: e.length for s, e in zip(below2, edges2)}
    for s, value in zip(below, ref):
        assert abs(got[s] - value) < 1e-6 * max(1.0, abs(value))
    assert out["wls"] <= out["ols"] + 1e-12
