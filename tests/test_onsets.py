"""Tests of detectors.onsets: the AIC picker (Maeda 1985) and the sub-sample refinement."""

import numpy as np
import pytest

from detectors.onsets import aic_curve, pick_onset


def _aic_by_definition(x):
    """Maeda (1985), Eq. 2, written out term by term with 1-based k (published definition)."""
    n = x.size
    out = np.full(n, np.inf)
    for k in range(3, n - 2):
        out[k] = k * np.log(np.var(x[:k])) + (n - k - 1) * np.log(np.var(x[k:]))
    return out


class TestAicCurve:
    def test_matches_published_definition(self):
        # published formula: Maeda 1985, Zisin 38, AIC(k) = k log var(x[1..k]) + (N-k-1) log var(x[k+1..N])
        rng = np.random.default_rng(3)
        x = rng.normal(0, 1, 120)
        x[70:] += 5.0
        ref = _aic_by_definition(x)
        got = aic_curve(x)
        finite = np.isfinite(ref)
        np.testing.assert_allclose(got[finite], ref[finite], rtol=1e-9, atol=1e-9)
        assert int(np.argmin(got)) == 70  # analytical: first post-step sample

    def test_too_short_raises(self):
        with pytest.raises(ValueError, match="at least 6"):
            aic_curve(np.zeros(4))

    def test_nan_raises(self):
        with pytest.raises(ValueError, match="NaN"):
            aic_curve(np.array([0.0, 1, 2, np.nan, 4, 5, 6]))


class TestPickOnset:
    @pytest.mark.parametrize("onset", [150.2, 150.5, 150.8])
    def test_sub_sample_onset_of_a_ramp(self, onset):
        # analytical: a ramp that leaves a flat baseline at a known fractional sample
        rng = np.random.default_rng(11)
        n = np.arange(400)
        errors = []
        for _ in range(20):
            x = 40e3 * np.clip((n - onset) / 4.0, 0, 1) + rng.normal(0, 500.0, n.size)
            errors.append(pick_onset(x, 0.01, quiet_samples=100).index - onset)
        assert np.median(np.abs(errors)) < 0.3

    def test_robust_to_drift(self):
        # analytical: a slow drift under the same ramp must not move the pick by a sample
        rng = np.random.default_rng(5)
        n = np.arange(400)
        x = 40e3 * np.clip((n - 200.5) / 4.0, 0, 1) + 30.0 * n + rng.normal(0, 300.0, n.size)
        pick = pick_onset(x, 0.01, quiet_samples=150)
        assert abs(pick.index - 200.5) < 1.0
        assert 0 < pick.uncertainty_s < 0.02

    def test_abrupt_step_is_centred_in_its_sample(self):
        # analytical: a one-sample step is only known to lie in the interval before it
        x = np.zeros(200)
        x[120:] = 50e3
        x += np.random.default_rng(1).normal(0, 100.0, 200)
        pick = pick_onset(x, 0.01)
        assert pick.index == pytest.approx(119.5, abs=0.01)
        assert pick.uncertainty_samples == pytest.approx(1 / np.sqrt(12), rel=1e-6)

    def test_bad_interval_raises(self):
        with pytest.raises(ValueError, match="sample_interval_s"):
            pick_onset(np.zeros(50), 0.0)
