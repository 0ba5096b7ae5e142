"""The one-pass array summaries agree with the plain numpy expressions they replace."""

import numpy as np
import pytest

from service.array_scan import time_step_range, value_census


@pytest.mark.parametrize("times", [
    np.arange(0, 50, 5, dtype=np.int64),
    np.array([0, 10, 10, 30], dtype=np.int64),
    np.array([0, 10, 5, 30, 200], dtype=np.int64),
])
def test_time_step_range_is_min_and_max_of_the_steps(times):
    steps = np.diff(times)
    assert time_step_range(times) == (int(steps.min()), int(steps.max()))


def test_time_step_range_of_fewer_than_two_samples():
    assert time_step_range(np.array([], np.int64)) == (0, 0)
    assert time_step_range(np.array([7], np.int64)) == (0, 0)


@pytest.mark.parametrize("dtype", [np.float32, np.float64])
def test_value_census_counts_what_the_masks_count(dtype):
    rng = np.random.default_rng(3)
    values = rng.normal(0.0, 60.0, 5000).astype(dtype)
    values[[3, 70, 900]] = np.nan
    values[[11, 12]] = np.inf
    values[40] = -np.inf
    top, bottom, factor = 100.0, -90.0, 1000.0
    low, high = -101_325.0, 50_000.0
    census = value_census(values, top, bottom, low, high, factor)
    x = values.astype(np.float64)
    finite = ~np.isnan(x)
    si = x * factor
    assert census.n_nan == 3
    assert (census.n_pos_inf, census.n_neg_inf) == (2, 1)
    assert census.n_at_top == int(np.count_nonzero(x >= top))
    assert census.n_at_bottom == int(np.count_nonzero(x <= bottom))
    assert census.n_implausible == int(np.count_nonzero(finite & ((si < low) | (si > high))))


def test_rounding_to_float32_equals_numpy_casts():
    # reference: numpy's own float64 -> float32 -> float64 casts (IEEE 754 round to nearest)
    from service.array_scan import rounded_to_float32

    rng = np.random.default_rng(5)
    values = np.concatenate([rng.normal(6e5, 3e4, 10_000), [0.0, -0.0, np.nan, np.inf, -np.inf, 1e-30]])
    got = rounded_to_float32(values)
    want = values.astype(np.float32).astype(np.float64)
    np.testing.assert_array_equal(got, want)
    assert got is not values
