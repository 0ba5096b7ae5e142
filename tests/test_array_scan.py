"""The one-pass array summaries agree with the plain numpy expressions they replace."""

import numpy as np
import pytest

from service.array_scan import float64_copy_census, time_step_range, value_census


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


def test_scaling_in_place_equals_the_product_then_the_numpy_casts():
    # reference: the float64 product, then numpy's float64 -> float32 -> float64 casts
    from service.array_scan import scale_to_float32_in_place

    rng = np.random.default_rng(6)
    values = np.concatenate([rng.normal(600.0, 30.0, 10_000), [0.0, np.nan, np.inf, -np.inf]])
    want = (values * 6894.757293168).astype(np.float32).astype(np.float64)
    got = scale_to_float32_in_place(values, 6894.757293168)
    assert got is values
    np.testing.assert_array_equal(got, want)
    with pytest.raises(ValueError, match="writable, contiguous float64"):
        scale_to_float32_in_place(np.arange(4, dtype=np.float32), 2.0)


def test_copy_census_copies_the_chunks_and_counts_as_the_census_does():
    rng = np.random.default_rng(5)
    chunks = [rng.normal(0.0, 60.0, n).astype(dtype) for n, dtype in
              ((700, np.float32), (1, np.float64), (0, np.float32), (1300, np.float64))]
    chunks[0][[2, 9]] = np.nan
    chunks[3][[5, 6]] = [np.inf, -np.inf]
    limits = (100.0, -90.0, -101_325.0, 50_000.0, 1000.0)
    values, census = float64_copy_census(chunks, *limits)
    expected = np.concatenate([c.astype(np.float64) for c in chunks])
    np.testing.assert_array_equal(values, expected)
    assert values.dtype == np.float64 and values.flags.writeable
    reference = value_census(expected, *limits)
    assert [getattr(census, k) for k in census.__slots__] == \
        [getattr(reference, k) for k in reference.__slots__]
    _, unbounded = float64_copy_census(chunks)  # defaults: gaps and infinities only
    assert (unbounded.n_nan, unbounded.n_pos_inf, unbounded.n_neg_inf) == (2, 1, 1)
    assert (unbounded.n_at_top, unbounded.n_at_bottom, unbounded.n_implausible) == (1, 1, 0)
