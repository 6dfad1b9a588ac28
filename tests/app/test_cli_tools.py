"""The tree tools on the command line: root, compare, clusters, draw, show.

reference: DendroPy treecompare.symmetric_difference (Robinson & Foulds 1981),
DendroPy reroot_at_edge and patristic distances (rooting), scipy fcluster
(UPGMA groups), the SVG standard (figures, parsed with xml.etree).
"""

import csv
import io
import xml.etree.ElementTree as ET

import dendropy
import numpy as np
import pytest
from click.testing import CliRunner
from dendropy.calculate import treecompare
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import squareform

from cladewright.build import build_tree
from cladewright.cli import main
from cladewright.io import read_trees
from cladewright.matrix import DistanceMatrix

from simulate import random_join_tree, random_matrix


def random_tree(rng, names):
    """A random unrooted binary tree over ``names`` (in random order) with lengths and support."""
    return random_join_tree(rng, len(names), False, names=names)


def run(*args):
    result = CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)
    return result


def dendropy_rf(a_path, b_path):
    tns = dendropy.TaxonNamespace()
    a = dendropy.Tree.get(path=str(a_path), schema="newick", taxon_namespace=tns, rooting="force-unrooted")
    b = dendropy.Tree.get(path=str(b_path), schema="newick", taxon_namespace=tns, rooting="force-unrooted")
    a.encode_bipartitions()
    b.encode_bipartitions()
    return treecompare.symmetric_difference(a, b)


@pytest.mark.parametrize("seed", range(6))
def test_compare_rf_equals_dendropy(tmp_path, seed):
    # reference: dendropy.calculate.treecompare.symmetric_difference
    rng = np.random.default_rng(seed)
    names = [f"t{i}" for i in range(int(rng.integers(5, 40)))]
    a, b = tmp_path / "a.nwk", tmp_path / "b.nwk"
    a.write_text(random_tree(rng, names).to_newick())
    b.write_text(random_tree(rng, names).to_newick())
    result = run("compare", "--tsv", a, b)
    assert result.exit_code == 0, result.output
    row = next(csv.DictReader(io.StringIO(result.stdout), delimiter="\t"))
    rf = dendropy_rf(a, b)
    assert int(row["robinson_foulds"]) == rf
    n = len(names)
    assert float(row["robinson_foulds_normalised"]) == pytest.approx(rf / (2 * (n - 3)))
    assert int(row["splits_only_in_a"]) + int(row["splits_only_in_b"]) == rf
    assert int(row["splits_shared"]) + int(row["splits_only_in_a"]) == n - 3  # a binary tree has n - 3 splits


def test_compare_many_trees_is_a_matrix(tmp_path):
    # reference: dendropy symmetric_difference for every pair
    rng = np.random.default_rng(11)
    names = [f"t{i}" for i in range(12)]
    paths = []
    for i in range(3):
        p = tmp_path / f"{i}.nwk"
        p.write_text(random_tree(rng, names).to_newick())
        paths.append(p)
    human = run("compare", *paths)
    assert human.exit_code == 0
    lines = human.stdout.splitlines()
    start = lines.index(next(x for x in lines if x.startswith("Robinson–Foulds distance")))
    assert lines[start + 1].split() == ["T1", "T2", "T3"]
    matrix = [line.split()[1:] for line in lines[start + 2:start + 5]]
    for i in range(3):
        for j in range(3):
            expected = 0 if i == j else dendropy_rf(paths[i], paths[j])
            assert int(matrix[i][j]) == expected
    tsv = run("compare", "--tsv", *paths)
    assert len(tsv.stdout.strip().splitlines()) == 1 + 3


def test_compare_needs_the_same_taxa(tmp_path):
    # source: Robinson & Foulds (1981) compare trees over one leaf set
    rng = np.random.default_rng(2)
    a, b = tmp_path / "a.nwk", tmp_path / "b.nwk"
    a.write_text(random_tree(rng, ["p", "q", "r", "s", "t"]).to_newick())
    b.write_text(random_tree(rng, ["p", "q", "r", "s", "u"]).to_newick())
    result = run("compare", a, b)
    assert result.exit_code == 2
    err = result.stderr.strip().splitlines()
    assert len(err) == 1 and "different taxa" in err[0] and "'u'" in err[0]


def test_root_midpoint_and_outgroup(tmp_path):
    # reference: DendroPy patristic distances (midpoint at half the diameter) and bipartitions
    rng = np.random.default_rng(4)
    names = [f"t{i}" for i in range(15)]
    src = tmp_path / "in.nwk"
    src.write_text(random_tree(rng, names).to_newick())
    diameter = max(dendropy.Tree.get(path=str(src), schema="newick").phylogenetic_distance_matrix().distances())
    out = tmp_path / "mid.nwk"
    assert run("root", src, "-o", out, "--root", "midpoint").exit_code == 0
    d = dendropy.Tree.get(path=str(out), schema="newick", rooting="force-rooted")
    assert max(x.distance_from_root() for x in d.leaf_node_iter()) == pytest.approx(diameter / 2)
    assert read_trees(out)[0].rooted
    nex = tmp_path / "out.nex"
    assert run("root", src, "-o", nex, "--root", "outgroup:t3").exit_code == 0
    assert nex.read_text().lstrip().upper().startswith("#NEXUS")
    d = dendropy.Tree.get(path=str(nex), schema="nexus", rooting="force-rooted")
    assert {"t3"} in [{x.taxon.label for x in c.leaf_nodes()} for c in d.seed_node.child_nodes()]
    # usage errors: one line, status 2, nothing written
    for args in ([], ["--root", "middle"], ["--root", "t1"], ["--root", "outgroup:nobody"]):
        bad = tmp_path / "bad.nwk"
        result = run("root", src, "-o", bad, *args)
        assert result.exit_code == 2 and len(result.stderr.strip().splitlines()) == 1
        assert not bad.exists()
    assert run("root", src, "-o", src, "--root", "midpoint").exit_code == 2  # output would overwrite input


def test_clusters_on_upgma_tree_equals_fcluster(tmp_path):
    # reference: scipy.cluster.hierarchy.fcluster(linkage(average), t=D, criterion="distance")
    rng = np.random.default_rng(9)
    n = 25
    a = random_matrix(rng, n, mirror="mean")
    names = [f"s{i}" for i in range(n)]
    src = tmp_path / "u.nwk"
    src.write_text(build_tree(DistanceMatrix(names, a), "upgma").to_newick())
    z = linkage(squareform(a, checks=False), "average")
    d = float(np.median(z[:, 2]))
    out = tmp_path / "groups.tsv"
    result = run("clusters", src, "--within", d, "-o", out)
    assert result.exit_code == 0
    rows = list(csv.DictReader(out.open(), delimiter="\t"))
    assert len(rows) == n
    ours = {}
    for r in rows:
        ours.setdefault(r["group"], set()).add(r["taxon"])
        assert int(r["group_size"]) > 0
    labels = fcluster(z, t=d, criterion="distance")
    expected = {frozenset(names[i] for i in np.flatnonzero(labels == g)) for g in np.unique(labels)}
    assert {frozenset(v) for v in ours.values()} == expected
    assert "groups" in result.stderr and f"{len(expected)} within" in result.stderr
    assert run("clusters", src, "--within", -1, "-o", out).exit_code == 2


def test_draw_and_show(tmp_path):
    # source: W3C SVG 1.1 text elements, parsed with xml.etree
    rng = np.random.default_rng(5)
    names = [f"taxon_{i}" for i in range(8)]
    src = tmp_path / "t.nwk"
    tree = random_tree(rng, names)
    src.write_text(tree.to_newick())
    fig = tmp_path / "t.svg"
    result = run("draw", src, "-o", fig, "--highlight-below", 70, "--no-ladderize", "--root", "midpoint",
                 "--groups-within", 0.8)
    assert result.exit_code == 0, result.stderr
    texts = {"".join(e.itertext()) for e in ET.parse(fig).getroot().iter("{http://www.w3.org/2000/svg}text")}
    assert set(names) <= texts
    assert run("draw", src, "-o", tmp_path / "t.gif").exit_code == 2
    shown = run("show", src, "--ascii", "--width", 30)
    assert shown.exit_code == 0
    lines = shown.stdout.splitlines()
    assert all(any(line.endswith(" " + x) for line in lines) for x in names)
    assert all(ord(c) < 128 for c in shown.stdout)
    assert run("show", tmp_path / "missing.nwk").exit_code == 2
