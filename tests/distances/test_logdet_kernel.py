"""The compiled ln det of each pair's 4 x 4 frequency table (LogDet, Lockhart, Steel, Hendy & Penny 1994; paralinear,
Lake 1994) against numpy.linalg.slogdet (LAPACK's LU factorisation), an independent reference."""

import numpy as np

from cladewright._kernels.counts import log_det_frequencies, log_det_frequencies_serial


def test_log_det_of_count_tables_equals_numpy_slogdet():
    rng = np.random.default_rng(11)
    tables = rng.integers(0, 60, size=(400, 4, 4))
    tables[:100] += np.eye(4, dtype=np.int64) * rng.integers(50, 500, size=(100, 1, 1))  # close sequences
    tables[100] = 0  # no shared site
    tables[101] = np.outer([1, 2, 3, 4], [1, 1, 1, 1])  # rank one: det 0
    tables[102] = np.array([[0, 9, 0, 0], [9, 0, 0, 0], [0, 0, 9, 0], [0, 0, 0, 9]])  # det < 0
    block = np.ascontiguousarray(tables.reshape(400, 16).T)  # (16, m), row 4a + b: the engine's layout
    ours = log_det_frequencies(block)
    f = tables / np.maximum(tables.sum(axis=(1, 2)), 1)[:, None, None]
    sign, logabs = np.linalg.slogdet(f)
    expected = np.where(sign > 0, logabs, np.nan)
    expected[100] = np.nan
    assert np.isnan(ours[[100, 101, 102]]).all()
    np.testing.assert_allclose(ours, expected, rtol=1e-12, atol=1e-12, equal_nan=True)
    np.testing.assert_array_equal(log_det_frequencies_serial(block), ours)  # the same arithmetic on one thread
