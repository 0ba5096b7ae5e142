"""Tests of detectors.cycles: rainflow counting (ASTM E1049-85) and the per-event summary."""

from collections import defaultdict

import numpy as np
import pytest
import rainflow

from detectors.cycles import pressure_cycle_summary, rainflow_cycles, reversals

#: ASTM E1049-85 (2017), sec. 5.4.4, Fig. 6: the rainflow worked example (published).
ASTM_HISTORY = [-2, 1, -3, 5, -1, 3, -4, 4, -2]
#: Its counting result, Table 4 of the same section: range -> cycles (published).
ASTM_COUNTS = {3: 0.5, 4: 1.5, 6: 0.5, 8: 1.0, 9: 0.5}


def _by_range(cycles):
    out = defaultdict(float)
    for c in cycles:
        out[c.range_pa] += c.count
    return dict(out)


class TestRainflowCycles:
    def test_astm_worked_example(self):
        # published: ASTM E1049-85 sec. 5.4.4 worked example, total 4.0 cycles
        got = _by_range(rainflow_cycles(ASTM_HISTORY))
        assert got == pytest.approx(ASTM_COUNTS)
        assert sum(got.values()) == pytest.approx(4.0)

    def test_astm_example_with_the_rainflow_package(self):
        # reference library: rainflow 3.x count_cycles returns the standard's table
        assert _by_range(rainflow_cycles(ASTM_HISTORY)) == pytest.approx(dict(rainflow.count_cycles(ASTM_HISTORY)))

    @pytest.mark.parametrize("seed", [0, 1, 2])
    def test_random_histories_match_the_rainflow_package(self, seed):
        # reference library: rainflow 3.x extract_cycles (range, mean, count, i_start, i_end)
        x = np.random.default_rng(seed).normal(size=400).cumsum() * 1e4
        ours = [(c.range_pa, c.mean_pa, c.count, c.start_index, c.end_index) for c in rainflow_cycles(x)]
        ref = list(rainflow.extract_cycles(x))
        assert len(ours) == len(ref)
        np.testing.assert_allclose(np.array(ours), np.array(ref), rtol=1e-12, atol=1e-6)

    def test_empty_and_constant_histories_have_no_cycles(self):
        assert rainflow_cycles([]) == ()
        assert rainflow_cycles([5.0, 5.0, 5.0]) == ()

    def test_single_ramp_is_one_half_cycle(self):
        # analytical: a monotonic history is one half cycle of its full range
        (cycle,) = rainflow_cycles(np.linspace(0.0, 100e3, 50))
        assert cycle.count == 0.5 and cycle.range_pa == pytest.approx(100e3)

    def test_nan_samples_are_dropped(self):
        x = np.array(ASTM_HISTORY, dtype=float)
        with_gap = np.insert(x, 3, np.nan)
        assert _by_range(rainflow_cycles(with_gap)) == pytest.approx(ASTM_COUNTS)


class TestReversals:
    def test_plateaus_count_once_and_end_points_are_kept(self):
        idx, levels = reversals([0.0, 2.0, 2.0, 1.0, 3.0, 3.0])
        assert levels.tolist() == [0.0, 2.0, 1.0, 3.0]
        assert idx[0] == 0

    def test_hysteresis_gate_removes_noise_reversals(self):
        # analytical: a decaying 20 s oscillation (amplitude 200 kPa, e-folding 60 s) plus
        # noise of 1 kPa; a 10 kPa gate keeps the oscillation's reversals only
        t = np.arange(0.0, 120.0, 0.01)
        clean = 200e3 * np.exp(-t / 60.0) * np.sin(2 * np.pi * t / 20.0)
        noisy = clean + np.random.default_rng(4).normal(0.0, 1e3, t.size)
        idx, _ = reversals(noisy, hysteresis_pa=10e3)
        # start, 12 peaks and valleys in six periods, the last swing back toward zero, and
        # the end sample (always a reversal)
        assert 13 <= idx.size <= 15
        raw_idx, _ = reversals(noisy)
        assert raw_idx.size > 100 * idx.size

    def test_negative_gate_raises(self):
        with pytest.raises(ValueError, match="hysteresis_pa"):
            reversals([0.0, 1.0], hysteresis_pa=-1.0)


class TestPressureCycleSummary:
    def test_bins_of_the_astm_example(self):
        # published counts of ASTM E1049-85 sec. 5.4.4 binned at width 2:
        # [2,4): range 3 (0.5); [4,6): range 4 (1.5); [6,8): range 6 (0.5); [8,10): 8 and 9 (1.5)
        summary = pressure_cycle_summary(ASTM_HISTORY, bin_width_pa=2.0)
        assert summary.bin_edges_pa[:2] == (0.0, 2.0)
        assert summary.counts == pytest.approx((0.0, 0.5, 1.5, 0.5, 1.5))
        assert summary.total_cycles == pytest.approx(4.0)
        assert summary.max_range_pa == pytest.approx(9.0)

    def test_surge_history_counts_its_largest_range(self):
        # analytical: for A exp(-t/tau) sin(w t) the extremes sit where tan(w t) = w tau,
        # and the largest range lies between the first peak and the first valley
        tau, w = 60.0, 2 * np.pi / 20.0
        t = np.arange(0.0, 120.0, 0.001)
        x = 500e3 + 200e3 * np.exp(-t / tau) * np.sin(w * t)
        summary = pressure_cycle_summary(x, bin_width_pa=50e3, hysteresis_pa=5e3)
        t1 = np.arctan(w * tau) / w
        t2 = t1 + np.pi / w
        expected = 200e3 * (np.exp(-t1 / tau) * np.sin(w * t1) - np.exp(-t2 / tau) * np.sin(w * t2))
        assert summary.max_range_pa == pytest.approx(expected, rel=1e-6)
        assert summary.total_cycles == pytest.approx(sum(summary.counts))

    def test_bad_bin_width_raises(self):
        with pytest.raises(ValueError, match="bin_width_pa"):
            pressure_cycle_summary(ASTM_HISTORY, bin_width_pa=0.0)

    def test_too_many_bins_raises(self):
        with pytest.raises(ValueError, match="widen bin_width_pa"):
            pressure_cycle_summary([0.0, 1e6, 0.0], bin_width_pa=1.0)
