"""Tests of detectors.changepoint: the one-sided CUSUM (Page 1954) and the gradual-front onset."""

import numpy as np
import pytest

from detectors.changepoint import (cusum_change_point, cusum_statistic, gradual_front_onset,
                                   leave_noise_index, moving_mean_centred)
from detectors.onsets import pick_onset


def _page_recursion(x, mu0, sigma, direction, k):
    """Page (1954), Biometrika 41: S_n = max(0, S_{n-1} + z_n - k), S_0 = 0, written as a loop."""
    s, out = 0.0, []
    for v in x:
        s = max(0.0, s + direction * (v - mu0) / sigma - k)
        out.append(s)
    return np.array(out)


def _ramp(n, start, slope, sigma, seed, direction=1.0):
    """White noise with a straight ramp leaving the baseline after sample ``start``."""
    rng = np.random.default_rng(seed)
    t = np.arange(n, dtype=float)
    return direction * slope * np.clip(t - start, 0, None) + rng.normal(0.0, sigma, n)


class TestCusumStatistic:
    @pytest.mark.parametrize("direction", [1.0, -1.0])
    def test_equals_the_published_recursion(self, direction):
        # published definition: Page 1954, Biometrika 41(1/2), 100-115 (the recursive form)
        x = np.random.default_rng(2).normal(0.3, 1.2, 500)
        got = cusum_statistic(x, 0.1, 1.2, direction, 0.5)
        np.testing.assert_allclose(got, _page_recursion(x, 0.1, 1.2, direction, 0.5), atol=1e-9)

    def test_average_run_length_after_a_one_sigma_shift(self):
        # from memory: with k = 0.5 and h = 5 (noise deviations) a one-sided CUSUM signals a
        # one-deviation shift after about 10.4 samples on average (Siegmund's approximation,
        # Siegmund 1985, Sequential Analysis, sec. X.2; Montgomery, Introduction to Statistical
        # Quality Control, table of tabular-CUSUM run lengths)
        rng = np.random.default_rng(21)
        runs = []
        for _ in range(3000):
            s = cusum_statistic(rng.normal(1.0, 1.0, 200), 0.0, 1.0, 1.0, 0.5)
            runs.append(int(np.argmax(s > 5.0)) + 1)
        assert np.mean(runs) == pytest.approx(10.4, rel=0.05)

    def test_average_run_length_in_control(self):
        # from memory: the same scheme on noise alone runs about 930 samples between false
        # signals (Siegmund's approximation for one side; twice the two-sided 465 of
        # Montgomery's table)
        rng = np.random.default_rng(8)
        runs = []
        for _ in range(400):
            s = cusum_statistic(rng.normal(0.0, 1.0, 20000), 0.0, 1.0, 1.0, 0.5)
            runs.append(int(np.argmax(s > 5.0)) + 1)
        assert np.mean(runs) == pytest.approx(935.0, rel=0.15)

    def test_errors(self):
        with pytest.raises(ValueError, match="noise_sigma"):
            cusum_statistic(np.zeros(5), 0.0, 0.0, 1.0)
        with pytest.raises(ValueError, match="direction"):
            cusum_statistic(np.zeros(5), 0.0, 1.0, 2.0)
        with pytest.raises(ValueError, match="NaN"):
            cusum_statistic(np.array([0.0, np.nan]), 0.0, 1.0, 1.0)


class TestChangePoint:
    @pytest.mark.parametrize("seed", [1, 2, 3, 4, 5])
    @pytest.mark.parametrize("direction", [1.0, -1.0])
    def test_ramp_with_a_known_start(self, seed, direction):
        # analytical: the mean leaves the baseline at sample 600 and exceeds the drift
        # allowance of half a deviation 25 samples later (slope 0.02 deviations a sample);
        # the change point lies near there, and not after the signal left its band
        x = _ramp(1500, 600, 0.02, 1.0, seed, direction)
        leave = leave_noise_index(x, 0.0, 1.0, direction, 1499)
        change = cusum_change_point(x, 0.0, 1.0, direction, 1499)
        assert change is not None
        assert 560 <= change.index <= 660
        assert change.index <= leave
        assert change.statistic_at_end > 5.0

    def test_no_change_under_way_gives_none(self):
        x = np.random.default_rng(0).normal(0.0, 1.0, 300)
        assert cusum_change_point(x - 10.0, 0.0, 1.0, 1.0, 299) is None

    def test_until_outside_raises(self):
        with pytest.raises(ValueError, match="until"):
            cusum_change_point(np.zeros(10), 0.0, 1.0, 1.0, 10)


class TestLeaveNoise:
    def test_step_leaves_at_its_first_sample(self):
        # analytical: a step of 20 deviations; the 5-sample centred mean clears three of its
        # own deviations two samples before the step (it already holds two stepped samples)
        x = np.random.default_rng(3).normal(0.0, 1.0, 400)
        x[250:] += 20.0
        assert 247 <= leave_noise_index(x, 0.0, 1.0, 1.0, 300) <= 250

    def test_inside_the_band_returns_until(self):
        x = np.zeros(100)
        assert leave_noise_index(x, 0.0, 1.0, 1.0, 80) == 80

    def test_centred_mean_by_definition(self):
        x = np.arange(10, dtype=float) ** 2
        got = moving_mean_centred(x, 5)
        assert got[5] == pytest.approx(np.mean(x[3:8]))
        assert got[0] == pytest.approx(np.mean(x[0:3]))


class TestGradualFrontOnset:
    def test_front_that_began_inside_the_quiet_part(self):
        # analytical: the caller's quiet part (900 samples) already holds 300 samples of a
        # slow ramp that starts at sample 600; the passes shrink it to the change point
        x = _ramp(1400, 600, 0.03, 1.0, 11)
        found = gradual_front_onset(x, 900, 1300, 1.0)
        assert found is not None
        assert 560 <= found.change.index <= 660
        assert found.quiet_samples <= 660
        assert found.noise_sigma == pytest.approx(1.0, rel=0.2)

    def test_too_short_a_quiet_part_gives_none(self):
        assert gradual_front_onset(_ramp(200, 5, 0.5, 1.0, 1), 5, 150, 1.0) is None


class TestPickOnsetOnGradualFronts:
    @pytest.mark.parametrize("seed", [1, 2, 3, 4, 5, 6])
    def test_slow_closure_is_timed_well_before_it_leaves_the_noise(self, seed):
        # analytical: a front rising as the cube of time from sample 1000 (as a slow valve
        # closure begins), noise 1 kPa; a single sample stands five deviations out of the
        # noise from sample 1000 + (5e3 / 1e-3) ** (1/3) = 1171. The pick must lie between
        # the start and well before there, and say that the start is fuzzy.
        rng = np.random.default_rng(seed)
        t = np.arange(1300, dtype=float)
        x = 400e3 + 1e-3 * np.clip(t - 1000, 0, None) ** 3 + rng.normal(0, 1e3, t.size)
        pick = pick_onset(x, 0.02, quiet_samples=900)
        assert 995 <= pick.index <= 1110
        assert pick.uncertainty_samples >= 10.0

    def test_sharp_front_keeps_the_aic_pick(self):
        # analytical: a four-sample ramp from sample 200.5 (as in the module doctest)
        rng = np.random.default_rng(7)
        n = np.arange(600)
        x = 40e3 * np.clip((n - 400.5) / 4.0, 0, 1) + rng.normal(0, 500.0, n.size)
        assert abs(pick_onset(x, 0.01, quiet_samples=300).index - 400.5) < 0.3
