"""Identical sequences and branches of length zero (issue: a branch of length zero is not a branch).

References: scipy.cluster.hierarchy (linkage 'average' is UPGMA, Sokal & Michener 1958; cophenet),
scikit-bio (align_dists, nj: Saitou & Nei 1987), DendroPy (Newick reader, bipartitions, edge collapse).
"""

import io

import dendropy
import numpy as np
import pytest
from click.testing import CliRunner
from scipy.cluster.hierarchy import cophenet, linkage
from scipy.spatial.distance import squareform
from skbio import DNA, DistanceMatrix as SkDM, TabularMSA
from skbio.alignment import align_dists
from skbio.tree import nj as sk_nj

from cladewright.alignment import distinct_sequences, identical_groups
from cladewright.cli import main
from cladewright.distances import distance_matrix
from cladewright.io import read_trees
from cladewright.pipeline import tree_from_alignment
from cladewright.polytomies import attach_identical, collapse_zero_branches, resolve_polytomies
from cladewright.tree import Tree

from simulate import make_alignment, random_join_tree, simulate_dna

EXAMPLE = "example_alignments/glass_snails_coi.fasta"


def with_copies(seed=3, n=14, length=300, copies=((2, 3), (7, 1))):
    """A simulated alignment (invented test data) plus copies of some of its sequences."""
    names, seqs = simulate_dna(n, length, seed=seed)
    for src, k in copies:
        for c in range(k):
            names.append(f"{names[src]}_copy{c}")
            seqs.append(seqs[src])
    return names, seqs


def dendropy_splits(newick, names, *, with_lengths=False):
    """Nontrivial splits of a Newick tree as frozensets of the side without the first name (DendroPy)."""
    ns = dendropy.TaxonNamespace(names)
    tree = dendropy.Tree.get(data=newick, schema="newick", taxon_namespace=ns, preserve_underscores=True)
    tree.encode_bipartitions()
    out = {}
    for edge in tree.postorder_edge_iter():
        leaves = frozenset(x.taxon.label for x in edge.head_node.leaf_iter())
        side = leaves if names[0] not in leaves else frozenset(names) - leaves
        if 1 < len(side) < len(names) - 1:
            out[side] = edge.length
    return out if with_lengths else set(out)


def test_identical_groups_equal_a_plain_grouping_of_the_text():
    # reference: a dict over the sequence strings (common practice: identical means the same text; every
    # IUPAC ambiguity code reads as missing, so N and R at a site count alike - see alignment.py)
    names, seqs = with_copies()
    seqs[5] = seqs[5][:10] + "N" + seqs[5][11:]
    names.append("ambiguous_twin")
    seqs.append(seqs[5][:10] + "R" + seqs[5][11:])
    aln = make_alignment(names, seqs)
    first, group = identical_groups(aln)
    seen = {}
    for i, s in enumerate(seqs):
        seen.setdefault(s.replace("R", "N"), i)
    ref_first = sorted(set(seen.values()))
    assert first.tolist() == ref_first
    assert [ref_first[g] for g in group.tolist()] == [seen[s.replace("R", "N")] for s in seqs]


def test_distances_with_copies_equal_scikit_bio_on_the_full_alignment():
    # reference: skbio align_dists on every sequence (no merging); freq-based models pool the composition of
    # all sequences, copies included, so the merged computation must weight each row by its group size.
    names, seqs = with_copies()
    aln = make_alignment(names, seqs)
    msa = TabularMSA([DNA(s) for s in seqs], index=names)
    for model, metric in (("k2p", "k2p"), ("tn93", "tn93"), ("f81", "f81"), ("paralinear", "paralin")):
        ours = distance_matrix(aln, model)
        assert ours.names == tuple(names)
        np.testing.assert_allclose(ours.values, align_dists(msa, metric, shared_by_all=False).data,
                                   rtol=0, atol=1e-9)
    assert distance_matrix(aln, "k2p").info["identical_groups"] == 2


def test_upgma_with_copies_entered_once_equals_scipy_average_linkage_on_all_rows():
    # reference: scipy.cluster.hierarchy.linkage(method="average") (UPGMA, Sokal & Michener 1958) on the full
    # p-distance matrix from skbio; merging copies must keep UPGMA's size-weighted averages.
    names, seqs = with_copies(seed=8, copies=((0, 4), (3, 2), (9, 1)))
    aln = make_alignment(names, seqs)
    full = align_dists(TabularMSA([DNA(s) for s in seqs], index=names), "pdist", shared_by_all=False).data
    tree, info, dm = tree_from_alignment(aln, "p", "upgma")
    assert len(dm.names) == len(names) - 7 and info["identical_sequences"] == 10
    ref = squareform(cophenet(linkage(squareform(full, checks=False), "average")))
    order = [tree.leaf_names.index(x) for x in names]
    np.testing.assert_allclose(tree.patristic()[np.ix_(order, order)], ref, atol=1e-12)


def test_nj_tree_of_distinct_sequences_with_copies_as_polytomies():
    # reference: skbio.tree.nj on the matrix of the distinct sequences; copies come back at distance 0 from
    # their original and at its distance from everyone else (common practice).
    names, seqs = with_copies(seed=5, n=12, length=600, copies=((1, 2), (6, 1)))
    aln = make_alignment(names, seqs)
    tree, info, dm = tree_from_alignment(aln, "k2p", "nj", negative="keep")
    ref = sk_nj(SkDM(dm.values, ids=list(dm.names)))
    ref_nwk = io.StringIO()
    ref.write(ref_nwk, format="newick")
    P = tree.patristic()
    idx = {x: i for i, x in enumerate(tree.leaf_names)}
    ref_tree = read_trees_text(ref_nwk.getvalue())
    RP = ref_tree.patristic()
    ridx = {x: i for i, x in enumerate(ref_tree.leaf_names)}
    for a in dm.names:
        for b in dm.names:
            assert P[idx[a], idx[b]] == pytest.approx(RP[ridx[a], ridx[b]], abs=1e-9)
    for name in names:
        if "_copy" in name:
            orig = name.split("_copy")[0]
            assert P[idx[name], idx[orig]] == 0.0
            np.testing.assert_allclose(P[idx[name]], P[idx[orig]], atol=1e-12)
    # the copies and their original hang from one node (a polytomy), not a resolved cherry chain
    parent = np.asarray(tree.parent)
    assert len({int(parent[idx[x]]) for x in ("s1", "s1_copy0", "s1_copy1")}) == 1


def read_trees_text(text):
    import os
    import tempfile

    fd, path = tempfile.mkstemp(suffix=".nwk")
    os.write(fd, text.encode())
    os.close(fd)
    try:
        return read_trees(path)[0]
    finally:
        os.unlink(path)


def test_all_identical_sequences_give_a_star_and_no_nan(tmp_path):
    # source: common practice - identical sequences are one polytomy of zero-length leaves; no fit
    # statistic exists on fewer than three distinct points, so none is printed (and never 'nan').
    aln_path = tmp_path / "same.fasta"
    aln_path.write_text("".join(f">h{k}\n{'ACGTTGCAAC' * 8}\n" for k in range(7)))
    out = tmp_path / "same.nwk"
    for method in ("nj", "bionj", "upgma", "single"):
        result = CliRunner().invoke(main, ["tree", str(aln_path), "-o", str(out), "--method", method,
                                           "--report", str(tmp_path / "r.html")])
        assert result.exit_code == 0, result.output
        assert "nan" not in result.output.lower()
        assert "nan" not in (tmp_path / "r.html").read_text().lower().replace("nanoseconds", "")
        assert "identical 1 group(s) of identical sequences (7 sequences)" in result.output
        assert out.read_text().removeprefix("[&R] ") == "(" + ",".join(f"h{k}:0.0" for k in range(7)) + ");\n"
        assert dendropy_splits(out.read_text(), [f"h{k}" for k in range(7)]) == set()


def test_three_copies_in_the_bundled_example_leave_its_tree_alone(tmp_path):
    # metamorphic: adding copies of a sequence changes nothing but the copies' polytomy; reference for the
    # splits: DendroPy's bipartitions of both written trees.
    text = open(EXAMPLE).read()
    first = text.split(">")[1]
    name, seq = first.split("\n", 1)
    name = name.split()[0]
    copies = "".join(f">{name}_copy{k}\n{seq}" for k in range(3))
    (tmp_path / "copies.fasta").write_text(text + copies)
    runner = CliRunner()
    # (UPGMA is left out on purpose: its averages weight each cluster by its size, so copies do move it;
    # that case is checked against scipy above.)
    for method in ("nj", "bionj", "wpgma", "complete"):
        a = runner.invoke(main, ["tree", EXAMPLE, "-o", str(tmp_path / "a.nwk"), "--method", method])
        b = runner.invoke(main, ["tree", str(tmp_path / "copies.fasta"), "-o", str(tmp_path / "b.nwk"),
                                 "--method", method])
        assert a.exit_code == 0 and b.exit_code == 0, b.output
        names = [x.split()[0] for x in text.split(">")[1:] for x in [x.split("\n", 1)[0]]]
        all_names = names + [f"{name}_copy{k}" for k in range(3)]
        sa = dendropy_splits((tmp_path / "a.nwk").read_text(), names, with_lengths=True)
        sb = dendropy_splits((tmp_path / "b.nwk").read_text(), all_names, with_lengths=True)
        group = frozenset([name] + [f"{name}_copy{k}" for k in range(3)])
        side = {s: length for s, length in sb.items() if s != group and s != frozenset(all_names) - group}
        # each split of the copies' tree, with the copies removed, is a split of the first tree
        stripped = {frozenset(x for x in s if "_copy" not in x): length for s, length in side.items()}
        stripped = {(s if names[0] not in s else frozenset(names) - s): length for s, length in stripped.items()}
        assert set(stripped) == set(sa)
        for s, length in sa.items():
            assert stripped[s] == pytest.approx(length, abs=1e-12)
        assert "identical 1 group(s)" in b.output


def test_collapse_removes_exactly_the_zero_length_splits():
    # reference: DendroPy's bipartitions of the original tree, keeping those whose edge length is nonzero
    rng = np.random.default_rng(4)
    for rooted in (False, True):
        for _ in range(10):
            t = random_join_tree(rng, 15, rooted, support=False)
            length = np.array(t.length)
            inner = np.flatnonzero(np.arange(t.n_nodes) >= t.n_leaves)
            inner = inner[inner != t.root]
            length[rng.choice(inner, 5, replace=False)] = 0.0
            t = Tree(t.parent, length, t.leaf_names, rooted=rooted)
            names = sorted(t.leaf_names)
            ref = {s for s, ln in dendropy_splits(t.to_newick(), names, with_lengths=True).items() if ln != 0}
            c = collapse_zero_branches(t)
            assert dendropy_splits(c.to_newick(), names) == ref
            assert c.n_leaves == 15 and np.isfinite(np.asarray(c.length)[:15]).all()


def test_resolved_polytomies_are_binary_and_collapse_back():
    # reference: DendroPy bipartitions; a binary unrooted tree of n leaves has n - 3 nontrivial splits
    # (rooted: n - 2 inner nodes below the root) - common practice.
    names, seqs = with_copies(seed=9, copies=((0, 3), (4, 2)))
    tree, _, _ = tree_from_alignment(make_alignment(names, seqs), "k2p", "nj")
    b = resolve_polytomies(tree)
    kids = b.n_children()
    inner = np.arange(b.n_nodes) >= b.n_leaves
    assert set(kids[inner & (np.arange(b.n_nodes) != b.root)].tolist()) == {2} and kids[b.root] == 3
    assert len(dendropy_splits(b.to_newick(), sorted(names))) == len(names) - 3
    assert dendropy_splits(collapse_zero_branches(b).to_newick(), sorted(names)) == \
        dendropy_splits(tree.to_newick(), sorted(names))
    assert np.isnan(np.asarray(b.support)[tree.n_nodes:]).all()


def test_binary_option_writes_a_binary_tree(tmp_path):
    # reference: DendroPy reads n - 3 splits from the binary output and none from a star (common practice)
    p = tmp_path / "s.fasta"
    p.write_text("".join(f">h{k}\n{'ACGTTGCAAC' * 8}\n" for k in range(6)))
    r = CliRunner().invoke(main, ["tree", str(p), "-o", str(tmp_path / "b.nwk"), "--binary"])
    assert r.exit_code == 0, r.output
    assert len(dendropy_splits((tmp_path / "b.nwk").read_text(), [f"h{k}" for k in range(6)])) == 3


def test_shuffled_sequences_give_the_same_splits():
    # metamorphic: the order of the sequences does not change the tree (ties aside); DendroPy bipartitions
    names, seqs = with_copies(seed=12, copies=((2, 2), (5, 2)))
    a, _, _ = tree_from_alignment(make_alignment(names, seqs), "k2p", "bionj")
    order = np.random.default_rng(1).permutation(len(names))
    b, _, _ = tree_from_alignment(make_alignment([names[i] for i in order], [seqs[i] for i in order]),
                                  "k2p", "bionj")
    s = sorted(names)
    assert dendropy_splits(a.to_newick(), s, with_lengths=True) == pytest.approx(
        dendropy_splits(b.to_newick(), s, with_lengths=True))


def test_attach_identical_keeps_lengths_and_puts_copies_at_zero():
    # source: definition (common practice) - the group's node takes its leaf's branch, copies hang at 0
    t = Tree([3, 3, 3, -1], [0.1, 0.2, 0.3, np.nan], ["a", "b", "c"])
    u = attach_identical(t, ["a", "b", "c", "b2", "a2"], [0, 1, 2, 1, 0])
    P = u.patristic()
    i = {x: k for k, x in enumerate(u.leaf_names)}
    assert P[i["a"], i["a2"]] == 0 and P[i["b"], i["b2"]] == 0
    assert P[i["a2"], i["c"]] == pytest.approx(0.4) and P[i["b2"], i["a2"]] == pytest.approx(0.3)
    d, group = distinct_sequences(make_alignment(["x", "y", "z"], ["ACGT", "ACGA", "ACGT"]))
    assert d.names == ("x", "y") and group.tolist() == [0, 1, 0] and d.multiplicity.tolist() == [2, 1]


def labelled_splits(newick, names):
    """{split: (support label, length)} of the nontrivial splits of a Newick tree, read by DendroPy."""
    ns = dendropy.TaxonNamespace(names)
    tree = dendropy.Tree.get(data=newick, schema="newick", taxon_namespace=ns, preserve_underscores=True)
    out = {}
    for node in tree.postorder_node_iter():
        if node.is_leaf() or node.parent_node is None:
            continue
        leaves = frozenset(x.taxon.label for x in node.leaf_iter())
        side = leaves if names[0] not in leaves else frozenset(names) - leaves
        if 1 < len(side) < len(names) - 1:
            out[side] = (node.label, node.edge.length)
    return out


def test_bootstrap_of_identical_sequences_shows_no_support_on_no_branch(tmp_path):
    # source: common practice - a star has no internal branch, hence no support value to show; the summary
    # and the written tree hold no 'nan' (DendroPy reads the star back with no internal node).
    p = tmp_path / "same.fasta"
    p.write_text("".join(f">h{k}\n{'ACGTTGCAAC' * 8}\n" for k in range(5)))
    r = CliRunner().invoke(main, ["tree", str(p), "-o", str(tmp_path / "t.nwk"), "--replicates", "20",
                                  "--seed", "3", "--workers", "1", "--report", str(tmp_path / "r.html")])
    assert r.exit_code == 0, r.output
    assert "nan" not in r.output.lower()
    assert (tmp_path / "t.nwk").read_text() == "(h0:0.0,h1:0.0,h2:0.0,h3:0.0,h4:0.0);\n"


def test_copies_do_not_change_the_support_of_the_other_branches(tmp_path):
    # metamorphic: copies of a sequence are identical in every replicate, so every other split keeps its
    # support (same seed); the copies' own clade is a real branch and carries support. DendroPy reads both.
    names, seqs = simulate_dna(12, 400, seed=21, gaps=0.02)
    plain = tmp_path / "plain.fasta"
    plain.write_text("".join(f">{a}\n{s}\n" for a, s in zip(names, seqs)))
    copies = tmp_path / "copies.fasta"
    copies.write_text(plain.read_text() + "".join(f">s4_copy{k}\n{seqs[4]}\n" for k in range(3)))
    runner = CliRunner()
    out = {}
    for label, path in (("plain", plain), ("copies", copies)):
        r = runner.invoke(main, ["tree", str(path), "-o", str(tmp_path / f"{label}.nwk"), "--replicates", "30",
                                 "--seed", "7", "--workers", "1"])
        assert r.exit_code == 0, r.output
        out[label] = (tmp_path / f"{label}.nwk").read_text()
    a = labelled_splits(out["plain"], names)
    all_names = names + [f"s4_copy{k}" for k in range(3)]
    b = labelled_splits(out["copies"], all_names)
    group = frozenset(["s4"] + [f"s4_copy{k}" for k in range(3)])
    assert b.pop(group if "s0" not in group else frozenset(all_names) - group)[0] == "100"
    stripped = {}
    for s, v in b.items():
        core = frozenset(x for x in s if "_copy" not in x)
        stripped[core if "s0" not in core else frozenset(names) - core] = v
    assert set(stripped) == set(a)
    for split, (label, length) in a.items():
        assert stripped[split][0] == label and stripped[split][1] == pytest.approx(length, abs=1e-12)


def test_zero_length_branches_between_different_sequences_carry_no_support(tmp_path):
    # source: common practice - sequences that differ only where one is ambiguous are at distance 0 under
    # pairwise deletion, so the branch joining them has length 0 and is contracted; DendroPy finds no
    # labelled edge of length 0 in the output and no internal label where the branch is gone.
    names, seqs = simulate_dna(9, 300, seed=2, gaps=0, ambiguous=0)
    names += ["s0_ambiguous", "s3_ambiguous"]
    seqs += ["N" + seqs[0][1:], seqs[3][:50] + "N" * 10 + seqs[3][60:]]
    p = tmp_path / "amb.fasta"
    p.write_text("".join(f">{a}\n{s}\n" for a, s in zip(names, seqs)))
    r = CliRunner().invoke(main, ["tree", str(p), "-o", str(tmp_path / "t.nwk"), "--replicates", "20",
                                  "--seed", "1", "--workers", "1"])
    assert r.exit_code == 0, r.output
    splits = labelled_splits((tmp_path / "t.nwk").read_text(), names)
    assert splits and all(length > 0 for _, length in splits.values())
    assert all(label is not None for label, _ in splits.values())
    assert frozenset(["s0", "s0_ambiguous"]) not in splits
