"""The cheap pass's compiled statistics against numpy's reference implementations."""

from __future__ import annotations

import numpy as np
import pytest

from detectors.median_networks import _median_inplace
from detectors.triggers import MAD_TO_SIGMA, block_statistics


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


@pytest.mark.parametrize("block, n", [(200, 4000), (200, 40_000), (8, 3000), (47, 9000), (1000, 70_000)])
def test_block_statistics_equal_numpy_on_the_strided_samples_and_skip_nan(block, n):
    # blocks of 8, 200 and 47 samples take the 16-, 32- and 64-element networks; 40 000
    # samples of 200 are several batches of side-by-side blocks, the last one partly filled
    rng = np.random.default_rng(11)
    values = 5e5 + np.cumsum(rng.normal(0.0, 30.0, n))
    values[1234:1300] = np.nan
    values[rng.integers(0, n, n // 50)] = np.nan
    lag = 20
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
        if d.size < max(2, (block // 4) // stride):
            assert np.isnan(mad_lag[j])
        else:
            assert mad_lag[j] == np.median(np.abs(d - np.median(d)))
        first = picks[picks >= 1]
        d1 = values[first] - values[first - 1]
        d1 = d1[~np.isnan(d1)]
        if d1.size >= max(2, (block // 4) // stride):
            assert mad_diff[j] == np.median(np.abs(d1 - np.median(d1)))
    assert MAD_TO_SIGMA == pytest.approx(1.0 / 0.6744897501960817, rel=1e-4)  # 1/Phi^-1(3/4) (Hampel 1974)


@pytest.mark.parametrize("width", [3, 15, 16, 30, 64, 65, 100])
@pytest.mark.parametrize("centred", [True, False])
def test_rolling_median_of_blocks_equals_numpy_nanmedian(width, centred):
    # reference: numpy.nanmedian over each window; widths up to 64 take the side-by-side
    # networks, wider windows the one-at-a-time kernel
    from detectors.triggers import _rolling_nanmedian

    rng = np.random.default_rng(width)
    x = rng.normal(0.0, 1.0, 300)
    x[rng.integers(0, 300, 40)] = np.nan
    x[100:180] = np.nan  # a long gap: some windows hold no value at all
    got = _rolling_nanmedian(x, width, centred)
    before, after = (width // 2, width - width // 2 - 1) if centred else (width, -1)
    for i in range(x.size):
        window = x[max(0, i - before):max(0, min(x.size, i + after + 1))]
        if np.all(np.isnan(window)):
            assert np.isnan(got[i])
        else:
            assert got[i] == np.nanmedian(window)


def _episodes_by_numpy(values, lag, block, rate_thr, base, exc_thr, merge_gap):
    """Plain numpy statement of the marking rule (the reference for the compiled pass)."""
    n = values.size
    blocks = np.arange(n) // block
    with np.errstate(invalid="ignore"):
        rate_hit = np.zeros(n, bool)
        rate_hit[lag:] = np.abs(values[lag:] - values[:-lag]) > rate_thr[blocks[lag:]]
        exc_hit = np.abs(values - base[blocks]) > exc_thr[blocks]
    marked = np.flatnonzero(rate_hit | exc_hit)
    marked = marked[marked >= lag]
    episodes = []
    for i in marked:
        if episodes and i - episodes[-1][1] <= merge_gap:
            episodes[-1][1] = i
        else:
            episodes.append([max(i - lag, 0), i])
    d1 = np.diff(values)
    flat = []
    for j in range((n + block - 1) // block):
        d = d1[max(j * block, 1) - 1:min((j + 1) * block, n) - 1]
        finite = d[np.isfinite(d)]
        flat.append(finite.size >= block // 2 and not np.any(finite != 0))
    return [a for a, _ in episodes], [b + 1 for _, b in episodes], flat


@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_episode_marking_equals_the_plain_numpy_rule(seed):
    from detectors.triggers import _mark_episodes

    rng = np.random.default_rng(seed)
    n, block, lag, merge_gap = 20_000, 200, 20, 300
    values = 5e5 + rng.normal(0.0, 50.0, n)
    for start in rng.integers(0, n - 500, 6):  # steps and bursts that mark
        values[start:start + int(rng.integers(5, 400))] += rng.choice([-1, 1]) * rng.uniform(500, 5000)
    values[rng.integers(0, n, 200)] = np.nan
    values[7000:7600] = 5e5  # a flat run
    n_blocks = (n + block - 1) // block
    rate_thr = rng.uniform(200.0, 400.0, n_blocks)
    base = np.where(rng.random(n_blocks) < 0.1, np.nan, 5e5)
    exc_thr = rng.uniform(800.0, 1500.0, n_blocks)
    starts, stops, flat = _mark_episodes(values, lag, block, rate_thr, base, exc_thr, merge_gap)
    want_starts, want_stops, want_flat = _episodes_by_numpy(values, lag, block, rate_thr, base, exc_thr, merge_gap)
    assert starts.tolist() == want_starts
    assert stops.tolist() == want_stops
    assert flat.tolist() == want_flat
