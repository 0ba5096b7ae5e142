"""The short-array statistics agree with numpy's and scipy's general routines (reference
libraries from PyPI: numpy.median, numpy.polyfit, scipy.stats.median_abs_deviation)."""

import numpy as np
import pytest
from scipy import stats

from detectors.small_stats import line_fit, median, median_abs_deviation


@pytest.mark.parametrize("n", [1, 2, 5, 16, 17, 31, 32, 33, 200, 5001])
def test_median_and_mad_match_the_reference_libraries(n):
    x = np.random.default_rng(n).standard_t(3, n) * 40.0 + 7.0
    assert median(x) == pytest.approx(float(np.median(x)), rel=0, abs=1e-12)
    assert median_abs_deviation(x) == pytest.approx(
        float(stats.median_abs_deviation(x, scale=1.0)), rel=0, abs=1e-12)


def test_median_of_integers_and_of_a_nan():
    assert median(np.array([10, 30, 20, 40], np.int64)) == 25.0
    assert np.isnan(median(np.array([1.0, np.nan, 3.0])))
    assert np.isnan(median(np.array([])))


def test_line_fit_matches_polyfit():
    rng = np.random.default_rng(5)
    x = np.arange(300, dtype=float) * 0.01
    y = 3.5 * x - 2.0 + rng.normal(0.0, 0.3, x.size)
    slope, intercept = line_fit(x, y)
    ref_slope, ref_intercept = np.polyfit(x, y, 1)
    assert slope == pytest.approx(ref_slope, rel=1e-12)
    assert intercept == pytest.approx(ref_intercept, rel=1e-12)


def test_line_fit_refuses_a_vertical_set():
    with pytest.raises(ValueError, match="all x are equal"):
        line_fit([2.0, 2.0, 2.0], [1.0, 2.0, 3.0])
