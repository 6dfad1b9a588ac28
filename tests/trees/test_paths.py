"""The shared longest-path pass (cladewright.paths) against a plain all-pairs computation written here:
every clade's diameter is the largest leaf-to-leaf path length between two of its leaves, and every node's
height the longest path down to one of its leaves (definitions; Sokal & Rohlf 1962, Taxon 11:33-40, for the
cophenetic values of a dendrogram). The test trees are invented (random joins, tests/simulate.py)."""

import math

import numpy as np
import pytest

from cladewright.paths import longest_paths
from simulate import random_join_tree


def _plain(parent, length, n):
    """Heights and clade diameters by walking every leaf up to the top (no shared code with the module)."""
    m = len(parent)
    ln = [0.0 if x != x else float(x) for x in length]
    up = []  # for each leaf: {ancestor (itself included): path length from the leaf}
    for leaf in range(n):
        d, v, run = {}, leaf, 0.0
        while v >= 0:
            d[v] = run
            run += ln[v]
            v = parent[v]
        up.append(d)
    height = [max((up[a][v] for a in range(n) if v in up[a]), default=-math.inf) for v in range(m)]
    diam = [-math.inf] * m
    for a in range(n):
        for b in range(a + 1, n):
            lca = next(v for v in up[a] if v in up[b])  # the first common one walking up (dicts keep order)
            path = up[a][lca] + up[b][lca]
            for v in up[a]:  # every clade holding both leaves: the LCA and its ancestors
                if v in up[b]:
                    diam[v] = max(diam[v], path)
    return np.array(height), np.array(diam), up


@pytest.mark.parametrize("seed", range(12))
@pytest.mark.parametrize("signs", ["positive", "mixed"])
def test_heights_and_diameters_match_all_pairs(seed, signs):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 16))
    tree = random_join_tree(rng, n, rooted=bool(seed % 2), support=False)
    length = np.array(tree.length)
    if signs == "mixed":
        # integer lengths of both signs (and zeros) make ties and negative paths
        length = np.where(np.isnan(length), np.nan, rng.integers(-2, 3, length.size).astype(float))
    parent = tree.parent.tolist()
    got = longest_paths(tree.parent, length, tree.postorder(), n)
    height, diam, up = _plain(parent, length, n)
    assert np.allclose(got.height, height, rtol=0, atol=1e-12)
    assert np.array_equal(np.isinf(got.diameter), np.isinf(diam))
    finite = np.isfinite(diam)
    assert np.allclose(got.diameter[finite], diam[finite], rtol=0, atol=1e-12)
    for v in np.flatnonzero(finite).tolist():
        # the reported ends are two leaves of the clade whose path through the apex has that length
        a, b, apex = got.ends[v].tolist()
        assert a != b and v in up[a] and v in up[b] and apex == next(u for u in up[a] if u in up[b])
        assert math.isclose(up[a][apex] + up[b][apex], diam[v], abs_tol=1e-12)
        assert up[a][apex] >= up[b][apex]  # the first end closes the longer arm
    for v in range(tree.n_nodes):
        if got.far_leaf[v] >= 0:
            assert math.isclose(up[got.far_leaf[v]][v], height[v], abs_tol=1e-12)
