"""The cheap pass's compiled statistics against numpy's reference implementations."""

from __future__ import annotations

import numpy as np
import pytest

from detectors.triggers import MAD_TO_SIGMA, _median_inplace, block_statistics


@pytest.mark.parametrize("n", [1, 2, 3, 15, 16, 17, 24, 25, 31, 32, 33, 64])
def test_median_of_a_block_equals_numpy_median_on_every_path(n):
    # reference: numpy.median; n <= 32 takes the sorting network, above it Wirth's selection,
    # and a buffer shorter than 32 takes selection too
    rng = np.random.default_rng(n)
    for trial in range(60):
        values = rng.integers(0, 4, n).astype(float) if trial % 3 == 0 else rng.normal(3.0, 2.0, n)
        for size in {n, max(n, 32)}:
            buf = np.empty(size)
            buf[:n] = values
            assert _median_inplace(buf, n) == np.median(values)
    assert np.isnan(_median_inplace(np.empty(32), 0))


def test_block_statistics_equal_numpy_on_the_strided_samples_and_skip_nan():
    rng = np.random.default_rng(11)
    values = 5e5 + np.cumsum(rng.normal(0.0, 30.0, 4000))
    values[1234:1300] = np.nan
    lag, block = 20, 200
    medians, mad_diff, mad_lag = block_statistics(values, lag, block)
    stride = max(1, block // 24)
    for j in range(values.size // block):
        picks = np.arange(j * block, (j + 1) * block, stride)
        x = values[picks]
        keep = ~np.isnan(x)
        if keep.sum() < max(2, (block // 4) // stride):
            assert np.isnan(medians[j])
            continue
        assert medians[j] == np.median(x[keep])
        lagged = picks[picks >= lag]
        d = values[lagged] - values[lagged - lag]
        d = d[~np.isnan(d)]
        assert mad_lag[j] == pytest.approx(np.median(np.abs(d - np.median(d))), rel=1e-12)
    assert MAD_TO_SIGMA == pytest.approx(1.0 / 0.6744897501960817, rel=1e-4)  # 1/Phi^-1(3/4) (Hampel 1974)
