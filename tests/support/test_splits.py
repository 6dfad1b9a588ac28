"""Tests of split support, consensus and tree distances against outside references.

Random trees are made with numpy (random joins in tests/simulate.py, random nearest-neighbour
interchanges here) and handed to DendroPy as Newick written by a small writer in
this file, so the reference side shares no code with the module under test.
"""

import itertools

import dendropy
import numpy as np
import pytest
from dendropy.calculate import treecompare

from cladewright.errors import InputError
from cladewright.support import (
    apply_support,
    branch_score,
    fbp_support,
    group_rows,
    majority_consensus,
    robinson_foulds,
    tbe_support,
)
from cladewright.tree import Tree

from simulate import random_join_tree


# ---- random trees ------------------------------------------------------------

def random_tree(rng, n, rooted=False):
    """Random joins of n leaves t0, t1, ... (in order), exponential lengths (mean 0.1), no support;
    unrooted trees keep a root of degree 3."""
    return random_join_tree(rng, n, rooted, mean_length=0.1, support=False, shuffle=False)


def nni(rng, tree, moves):
    """`moves` random nearest-neighbour interchanges on a binary tree."""
    parent = tree.parent.copy()
    n = tree.n_leaves
    for _ in range(moves):
        kids = [np.flatnonzero(parent == v) for v in range(parent.size)]
        inner = [v for v in range(n, parent.size) if parent[v] >= 0]
        v = inner[rng.integers(len(inner))]
        u = parent[v]
        c = rng.choice(kids[v])
        s = rng.choice([x for x in kids[u] if x != v])
        parent[c], parent[s] = u, v
    length = tree.length * rng.uniform(0.5, 1.5, tree.n_nodes)
    return Tree(parent, length, tree.leaf_names, rooted=tree.rooted)


def shuffled(rng, tree):
    """The same tree with its leaves renumbered in a random order."""
    n = tree.n_leaves
    perm = rng.permutation(n)  # new leaf i is old leaf perm[i]
    new_of_old = np.arange(tree.n_nodes)
    new_of_old[perm] = np.arange(n)
    old = np.concatenate([perm, np.arange(n, tree.n_nodes)])
    p = tree.parent[old]
    parent = np.where(p >= 0, new_of_old[np.maximum(p, 0)], -1)
    names = [tree.leaf_names[i] for i in perm]
    return Tree(parent, tree.length[old], names, rooted=tree.rooted)


def with_root_on_edge(rng, tree):
    """The same unrooted tree with a degree-2 root placed on a root edge."""
    c = int(rng.choice(np.flatnonzero(tree.parent == tree.root)))
    parent = np.append(tree.parent, -1)
    new = parent.size - 1
    parent[tree.root] = new
    parent[c] = new
    length = np.append(tree.length, np.nan)
    length[tree.root] = rng.exponential(0.1)
    return Tree(parent, length, tree.leaf_names, rooted=True)


def newick(tree):
    """Newick text written from the arrays alone (no cladewright writer)."""
    text = {}
    post = np.argsort(depths(tree))[::-1]  # deepest first: children before parents
    for v in post:
        v = int(v)
        kids = np.flatnonzero(tree.parent == v)
        body = tree.leaf_names[v] if v < tree.n_leaves else "(" + ",".join(text[int(c)] for c in kids) + ")"
        if tree.parent[v] >= 0 and np.isfinite(tree.length[v]):
            body += f":{float(tree.length[v])!r}"
        text[v] = body
    return text[tree.root] + ";"


def depths(tree):
    d = np.zeros(tree.n_nodes, dtype=np.int64)
    for v in range(tree.n_nodes):
        u = v
        while tree.parent[u] >= 0:
            u = tree.parent[u]
            d[v] += 1
    return d


def leaf_sets(tree):
    """Name set below every node, found by walking each leaf to the root."""
    below = [set() for _ in range(tree.n_nodes)]
    for i, name in enumerate(tree.leaf_names):
        v = i
        while v >= 0:
            below[v].add(name)
            v = tree.parent[v]
    return below


def bipartition(side, everyone):
    return frozenset([frozenset(side), frozenset(everyone - set(side))])


def edge_keys(tree):
    """Bipartition key of the split of each node listed by tree.splits()."""
    below = leaf_sets(tree)
    everyone = set(tree.leaf_names)
    _, nodes = tree.splits()
    return [bipartition(below[v], everyone) for v in nodes]


def to_dendropy(trees, tns):
    return dendropy.TreeList.get(
        data="\n".join(newick(t) for t in trees), schema="newick",
        taxon_namespace=tns, rooting="force-unrooted")


def dendropy_key(bitmask, tns, everyone):
    side = {t.label for t in tns.bitmask_taxa_list(bitmask)}
    return bipartition(side, everyone)


def replicate_set(seed, n, reps, max_moves=3):
    rng = np.random.default_rng(seed)
    ref = random_tree(rng, n)
    return ref, [shuffled(rng, nni(rng, ref, int(rng.integers(0, max_moves + 1)))) for _ in range(reps)]


# ---- split grouping ----------------------------------------------------------

def test_group_rows_matches_numpy_unique(monkeypatch):
    # reference: numpy.unique(axis=0) on the same rows; also with every hash
    # forced equal, so that the collision fallback is the path taken.
    rng = np.random.default_rng(1)
    rows = rng.integers(0, 4, size=(300, 3)).astype(np.uint64)
    _, inv_ref = np.unique(rows, axis=0, return_inverse=True)
    from cladewright.support import splits as mod
    for forced in (False, True):
        if forced:
            monkeypatch.setattr(mod, "_row_hash", lambda r: np.zeros(r.shape[0], np.uint64))
        first, inv = group_rows(rows)
        assert np.array_equal(rows[first[inv]], rows)
        # same partition of rows into groups as numpy's
        pairs = set(zip(inv.tolist(), inv_ref.reshape(-1).tolist()))
        assert len(pairs) == len(first) == inv_ref.max() + 1


# ---- FBP ---------------------------------------------------------------------

@pytest.mark.parametrize("seed,n", [(2, 9), (3, 30), (4, 70)])
def test_fbp_matches_dendropy_split_frequencies(seed, n):
    # reference: dendropy.TreeList.split_distribution().split_frequencies
    # (Felsenstein 1985 bootstrap proportion = frequency of the split)
    ref, reps = replicate_set(seed, n, 25)
    tns = dendropy.TaxonNamespace()
    dp = to_dendropy(reps, tns)
    freqs = dp.split_distribution().split_frequencies
    everyone = set(ref.leaf_names)
    by_key = {dendropy_key(b, tns, everyone): f for b, f in freqs.items()}
    expected = [100.0 * by_key.get(k, 0.0) for k in edge_keys(ref)]
    assert np.allclose(fbp_support(ref, reps), expected, atol=1e-12)


def test_fbp_of_tree_against_itself_is_full():
    # source: Felsenstein (1985): every split of a replicate identical to the
    # tree is present, so each proportion is 100 %.
    rng = np.random.default_rng(5)
    t = random_tree(rng, 40)
    assert np.all(fbp_support(t, [shuffled(rng, t) for _ in range(3)]) == 100.0)


# ---- TBE ---------------------------------------------------------------------

def brute_tbe(ref, reps):
    """Lemoine et al. (2018) transfer bootstrap written plainly with sets."""
    everyone = set(ref.leaf_names)
    n = len(everyone)
    ref_below = leaf_sets(ref)
    _, nodes = ref.splits()
    out = []
    for v in nodes:
        side = ref_below[v]
        p = min(len(side), n - len(side))
        score = 0.0
        for rep in reps:
            below = leaf_sets(rep)
            d = min(min(len(side ^ c), n - len(side ^ c))
                    for u, c in enumerate(below) if rep.parent[u] >= 0)
            score += 1.0 - d / (p - 1)
        out.append(100.0 * score / len(reps))
    return np.array(out)


@pytest.mark.parametrize("seed,n,moves", [(6, 8, 3), (7, 20, 6), (8, 45, 12), (9, 64, 5), (10, 65, 20)])
def test_tbe_matches_brute_force(seed, n, moves):
    # reference: brute-force transfer distances (Lemoine et al. 2018), sets
    ref, reps = replicate_set(seed, n, 6, max_moves=moves)
    rng = np.random.default_rng(seed)
    if seed % 2:
        ref = with_root_on_edge(rng, ref)  # the two root edges are one split
    reps.append(random_tree(rng, n, rooted=True))  # a degree-2 root, leaves in index order
    got = tbe_support(ref, reps)
    assert np.allclose(got, brute_tbe(ref, reps), atol=1e-9)


@pytest.mark.parametrize("seed,n", [(11, 12), (12, 50)])
def test_tbe_at_least_fbp(seed, n):
    # source: Lemoine et al. (2018): a replicate holding the split has
    # transfer distance 0 (score 1) and every score is >= 0.
    ref, reps = replicate_set(seed, n, 15, max_moves=6)
    tbe, fbp = tbe_support(ref, reps), fbp_support(ref, reps)
    assert np.all(tbe >= fbp - 1e-9)
    assert np.all((tbe >= 0) & (tbe <= 100))


# ---- consensus ---------------------------------------------------------------

@pytest.mark.parametrize("seed,n,moves", [(13, 10, 8), (14, 40, 4), (32, 25, 30)])
def test_consensus_matches_dendropy(seed, n, moves):
    # reference: dendropy TreeList.consensus(min_freq=0.5) with mean edge
    # lengths (Margush & McMorris 1981 majority rule); an odd number of trees
    # so that no split sits at exactly 1/2.
    ref, reps = replicate_set(seed, n, 21, max_moves=moves)
    rng = np.random.default_rng(seed)
    reps = [with_root_on_edge(rng, t) if i % 3 == 0 else t for i, t in enumerate(reps)]
    con = majority_consensus(reps)
    tns = dendropy.TaxonNamespace()
    dp = to_dendropy(reps, tns).consensus(min_freq=0.5, set_edge_lengths="mean-length")
    dp.encode_bipartitions()
    everyone = set(ref.leaf_names)
    expected = {}
    for node in dp.postorder_node_iter():
        if node.parent_node is None:
            continue
        expected[dendropy_key(node.edge.bipartition.leafset_bitmask, tns, everyone)] = (
            node.support, node.edge.length)
    below = leaf_sets(con)
    got = {}
    for v in range(con.n_nodes):
        if con.parent[v] >= 0:
            got[bipartition(below[v], everyone)] = (con.support[v] / 100.0, con.length[v])
    assert set(got) == set(expected)
    for key, (freq, length) in got.items():
        e_freq, e_len = expected[key]
        if len(min(key, key=len)) > 1:  # dendropy gives leaf edges support too
            assert freq == pytest.approx(e_freq, abs=1e-12)
        assert length == pytest.approx(e_len, rel=1e-9)
    assert np.sum(con.parent == con.root) >= 3
    assert not con.rooted


def test_consensus_of_identical_caterpillars_is_the_tree():
    # source: Margush & McMorris (1981): every split of identical trees has
    # frequency 1 and enters; iterative code must cope with a deep tree.
    n = 3000
    parent = np.empty(2 * n - 2, dtype=np.int64)
    parent[0] = parent[1] = n
    parent[2:n] = np.arange(n, 2 * n - 2)
    parent[n:2 * n - 3] = np.arange(n + 1, 2 * n - 2)
    parent[2 * n - 3] = -1
    t = Tree(parent, np.ones(2 * n - 2), [f"x{i}" for i in range(n)])
    con = majority_consensus([t, t, t])
    assert robinson_foulds(con, t)["rf"] == 0
    assert np.all(tbe_support(t, [con]) == 100.0)
    assert np.nanmin(con.support) == 100.0


def test_consensus_threshold_must_keep_compatibility():
    # source: Margush & McMorris (1981): only splits in more than half of the
    # trees are sure to be compatible, so a lower threshold is refused.
    rng = np.random.default_rng(15)
    t = random_tree(rng, 6)
    with pytest.raises(InputError, match="threshold"):
        majority_consensus([t], threshold=0.3)


# ---- RF and branch score -----------------------------------------------------

@pytest.mark.parametrize("seed", range(16, 22))
def test_rf_matches_dendropy(seed):
    # reference: dendropy.calculate.treecompare.symmetric_difference
    # (Robinson & Foulds 1981)
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 40))
    a = random_tree(rng, n)
    b = shuffled(rng, nni(rng, a, int(rng.integers(0, 6)))) if seed % 2 else random_tree(rng, n, rooted=True)
    tns = dendropy.TaxonNamespace()
    da, db = to_dendropy([a, b], tns)
    res = robinson_foulds(a, b)
    assert res["rf"] == treecompare.symmetric_difference(da, db)
    # source: Robinson & Foulds (1981): a binary unrooted tree has n - 3
    # nontrivial splits, and two such trees are at most 2(n - 3) apart.
    assert res["shared"] + res["only_a"] == n - 3
    assert res["max"] == 2 * (n - 3)
    assert res["normalised"] == pytest.approx(res["rf"] / (2 * (n - 3)))


@pytest.mark.parametrize("seed", range(22, 28))
def test_branch_score_matches_dendropy(seed):
    # reference: dendropy.calculate.treecompare.euclidean_distance, which is
    # sqrt(sum over all bipartitions, leaf edges included, of squared length
    # differences, 0 for a missing one): the same definition as ours, the
    # square root of the Kuhner & Felsenstein (1994) branch score.
    rng = np.random.default_rng(seed)
    n = int(rng.integers(5, 40))
    a = random_tree(rng, n)
    b = shuffled(rng, nni(rng, a, 3)) if seed % 2 else random_tree(rng, n, rooted=True)
    tns = dendropy.TaxonNamespace()
    da, db = to_dendropy([a, b], tns)
    assert branch_score(a, b) == pytest.approx(treecompare.euclidean_distance(da, db), rel=1e-12)


# ---- support on trees, errors --------------------------------------------------

def test_apply_support_puts_values_on_split_nodes():
    # source: common practice (support sits on the node below its edge)
    ref, reps = replicate_set(28, 15, 5)
    values = fbp_support(ref, reps)
    out = apply_support(ref, values)
    _, nodes = ref.splits()
    assert np.array_equal(out.support[nodes], values)
    others = np.setdiff1d(np.arange(ref.n_nodes), nodes)
    assert np.all(np.isnan(out.support[others]))


@pytest.mark.parametrize("func", [fbp_support, tbe_support, majority_consensus, robinson_foulds, branch_score])
def test_taxon_mismatch_names_missing_and_extra(func):
    # source: common practice (the error names what differs)
    rng = np.random.default_rng(29)
    a = random_tree(rng, 8)
    names = list(a.leaf_names)
    names[3] = "stranger"
    b = Tree(a.parent, a.length, names)
    args = (a, b) if func in (robinson_foulds, branch_score) else (
        ([a, b],) if func is majority_consensus else (a, [a, b]))
    with pytest.raises(InputError, match=r"missing 't3'.*extra 'stranger'"):
        func(*args, source="boot.nwk")


def test_all_pairs_small_exhaustive_rf_symmetry():
    # source: Robinson & Foulds (1981): the distance is a metric (symmetric,
    # zero exactly for the same unrooted tree).
    rng = np.random.default_rng(30)
    trees = [random_tree(rng, 7) for _ in range(6)]
    for a, b in itertools.combinations(trees, 2):
        ab, ba = robinson_foulds(a, b), robinson_foulds(b, a)
        assert ab["rf"] == ba["rf"] and ab["shared"] == ba["shared"]
    assert robinson_foulds(trees[0], shuffled(rng, trees[0]))["rf"] == 0
