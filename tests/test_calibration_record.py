"""Calibration of a pipe's wave speed from its estimates, drift and trend
(detectors.calibration).

Expected values are analytical (inverse-variance mean: sigma/sqrt(n) for equal weights;
least squares on travel times) or generated with known truth.
"""

import numpy as np
import pytest
from numpy.testing import assert_allclose

from detectors.calibration import (
    assess_drift,
    calibrate_pipes,
    combine_wave_speeds,
    current_wave_speed,
    solve_pipe_wave_speeds,
    wave_speed_trend,
)
from detectors.wavespeed import wave_speed_estimate
from models.layout import PathLeg


def _estimate(pipe_id, legs, speed_by_pipe, sigma_s=0.001, method="gcc_plain", noise=0.0):
    delay = sum(length / speed_by_pipe[p] for p, length in legs) + noise
    return wave_speed_estimate(
        pipe_id="+".join(p for p, _ in legs), sensor_a="A", sensor_b="B",
        distance_m=sum(length for _, length in legs), delay_s=delay,
        delay_uncertainty_s=sigma_s, method=method,
        legs=tuple(PathLeg(p, length) for p, length in legs))


class TestCombine:
    def test_equal_weights_give_mean_and_sigma_over_root_n(self):
        combined = combine_wave_speeds([1100.0, 1104.0, 1102.0, 1098.0], [4.0] * 4)
        assert_allclose(combined.wave_speed_m_s, 1101.0)
        assert_allclose(combined.uncertainty_m_s, 2.0)  # 4/sqrt(4), Birge ratio below 1
        assert combined.n_estimates == 4 and combined.n_downweighted == 0

    def test_inverse_variance_weighting(self):
        combined = combine_wave_speeds([1000.0, 1010.0], [1.0, 2.0])
        assert_allclose(combined.wave_speed_m_s, (1000 + 1010 / 4) / 1.25)

    def test_outlier_is_downweighted(self):
        rng = np.random.default_rng(41)
        values = list(1150.0 + rng.normal(0, 5.0, 20)) + [1400.0]
        combined = combine_wave_speeds(values, [5.0] * 21)
        plain = np.mean(values)
        assert abs(combined.wave_speed_m_s - 1150.0) < 4.0 < abs(plain - 1150.0)
        assert combined.n_downweighted >= 1

    def test_excess_scatter_inflates_uncertainty(self):
        rng = np.random.default_rng(42)
        values = 1150.0 + rng.normal(0, 20.0, 30)  # scatter 20, stated 5
        combined = combine_wave_speeds(values, [5.0] * 30)
        assert combined.birge_ratio > 2.5
        assert combined.uncertainty_m_s > 2.5 * 5.0 / np.sqrt(30)

    @pytest.mark.parametrize("values, sigmas, match", [
        ([], [], "at least one"), ([1.0, 2.0], [1.0], "equally many"),
        ([1100.0], [0.0], "uncertainties finite and > 0"),
    ])
    def test_bad_input(self, values, sigmas, match):
        with pytest.raises(ValueError, match=match):
            combine_wave_speeds(values, sigmas)

    def test_calibrate_pipes_uses_accepted_single_pipe_gcc(self):
        speeds = {"P1": 1100.0, "P2": 950.0}
        estimates = [_estimate("P1", [("P1", 600.0)], speeds, noise=n) for n in (0.0, 1e-4)]
        estimates.append(_estimate("P1", [("P1", 600.0)], speeds, method="onset"))
        estimates.append(_estimate("P1+P2", [("P1", 300.0), ("P2", 300.0)], speeds))
        calibrations = calibrate_pipes(estimates)
        assert list(calibrations) == ["P1"] and calibrations["P1"].n_estimates == 2


class TestSolvePipes:
    def test_two_pipes_from_three_paths(self):
        speeds = {"P1": 1120.0, "P2": 980.0}
        estimates = [
            _estimate("P1", [("P1", 1200.0)], speeds),
            _estimate("P1+P2", [("P1", 700.0), ("P2", 900.0)], speeds),
            _estimate("P2", [("P2", 800.0)], speeds),
        ]
        solved = {p.pipe_id: p for p in solve_pipe_wave_speeds(estimates)}
        for pipe_id, speed in speeds.items():
            assert solved[pipe_id].identifiable
            assert_allclose(solved[pipe_id].wave_speed_m_s, speed, rtol=1e-9)
        # u(a) = u(s) a^2: a single-pipe path alone would give a^2 u_tau / L.
        assert solved["P1"].uncertainty_m_s < 1120.0**2 * 0.001 / 1200.0

    def test_pipes_always_travelled_together_are_not_identifiable(self):
        speeds = {"P1": 1120.0, "P2": 980.0, "P3": 900.0}
        estimates = [
            _estimate("P1+P2", [("P1", 700.0), ("P2", 900.0)], speeds),
            _estimate("P1+P2", [("P1", 350.0), ("P2", 450.0)], speeds),
            _estimate("P3", [("P3", 500.0)], speeds),
        ]
        solved = {p.pipe_id: p for p in solve_pipe_wave_speeds(estimates)}
        assert not solved["P1"].identifiable and not solved["P2"].identifiable
        assert np.isnan(solved["P1"].wave_speed_m_s)
        assert solved["P3"].identifiable
        assert_allclose(solved["P3"].wave_speed_m_s, 900.0, rtol=1e-9)


class TestDriftTrendAndChoice:
    def test_drift_needs_both_sigma_and_percent(self):
        recent = combine_wave_speeds([1050.0] * 4, [4.0] * 4)  # 2 m/s
        flagged = assess_drift(1150.0, 5.0, recent, k_sigma=3.0, min_percent=2.0)
        assert flagged.drifted and flagged.difference_m_s == pytest.approx(-100.0)
        assert "slower" in flagged.message and "air" in flagged.message
        small = assess_drift(1060.0, 0.5, recent, k_sigma=3.0, min_percent=2.0)
        assert not small.drifted  # 4.6 sigma but only 0.9 %
        vague = assess_drift(1150.0, 60.0, recent, k_sigma=3.0, min_percent=2.0)
        assert not vague.drifted  # 8.7 % but 1.7 sigma

    def test_trend_recovers_a_slope(self):
        rng = np.random.default_rng(43)
        years = np.linspace(0, 3, 40)
        times_ns = (1.7e18 + years * 365.25 * 86400e9).astype(np.int64)
        speeds = 1150.0 - 12.0 * years + rng.normal(0, 3.0, years.size)
        trend = wave_speed_trend(times_ns, speeds, [3.0] * years.size)
        assert abs(trend.slope_m_s_per_year + 12.0) < 3 * trend.slope_uncertainty_m_s_per_year
        with pytest.raises(ValueError, match="at least 3"):
            wave_speed_trend(times_ns[:2], speeds[:2], [3.0, 3.0])

    def test_newest_calibration_then_prior_then_theory(self):
        rows = [(100, 1120.0), (300, 1105.0), (200, 1130.0)]
        assert current_wave_speed(rows, 1150.0) == (1105.0, "calibration")
        assert current_wave_speed([], 1150.0, 1180.0) == (1150.0, "prior")
        assert current_wave_speed([], None, 1180.0) == (1180.0, "theoretical")
        with pytest.raises(ValueError, match="no calibration, no prior"):
            current_wave_speed([], None)
