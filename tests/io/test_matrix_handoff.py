"""DistanceMatrix.condensed() and DistanceMatrix.to_pandas().

Sources: scipy.spatial.distance.squareform (the condensed order scipy's clustering reads) and pandas'
DataFrame (its own indexing), both independent implementations.
"""

import sys

import numpy as np
import pandas
import pytest
from scipy.spatial.distance import squareform
from simulate import random_matrix

import cladewright as cw
from cladewright.errors import InputError


@pytest.mark.parametrize("n", [1, 2, 3, 17])
@pytest.mark.parametrize("dtype", [np.float64, np.float32])
def test_condensed_is_squareform_order(n, dtype):
    d = random_matrix(np.random.default_rng(n), n)
    dm = cw.DistanceMatrix([f"s{i}" for i in range(n)], d, dtype=dtype)
    got = dm.condensed()
    # reference: scipy.spatial.distance.squareform of the same values
    ref = squareform(np.asarray(dm.values), checks=False)
    assert got.dtype == dm.values.dtype and got.shape == (n * (n - 1) // 2,)
    assert np.array_equal(got, ref)
    assert np.array_equal(squareform(got), np.asarray(dm.values))
    got[...] = -1  # a new array: the matrix is untouched
    assert np.all(dm.values >= 0)


def test_to_pandas_has_names_and_values_and_is_a_copy():
    d = random_matrix(np.random.default_rng(3), 4)
    names = ["Homo_sapiens", "b c", "d", "e"]
    dm = cw.DistanceMatrix(names, d)
    df = dm.to_pandas()
    # reference: pandas' own indexing of the frame
    assert isinstance(df, pandas.DataFrame)
    assert list(df.index) == names and list(df.columns) == names
    for i, a in enumerate(names):
        for j, b in enumerate(names):
            assert df.loc[a, b] == d[i, j]
    df.iloc[0, 1] = 99.0  # the frame is the caller's own: writing it leaves the matrix as it was
    assert dm.values[0, 1] == d[0, 1]


def test_to_pandas_without_pandas_names_the_package(monkeypatch):
    # source: common practice (the error names what to install); None in sys.modules makes the import fail
    monkeypatch.setitem(sys.modules, "pandas", None)
    with pytest.raises(InputError, match="pip install pandas"):
        cw.DistanceMatrix(["a", "b"], [[0, 1], [1, 0]]).to_pandas()
