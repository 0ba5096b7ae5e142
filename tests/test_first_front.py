"""Tests of detectors.metrics.first_front_amplitude: the sign and size of the first front.

Signals are analytical: a front rising (or falling) from the onset to a plateau, then a
reflection that takes it back, plus seeded white noise (common practice: the first front is
the rise before the first reflection).
"""

import numpy as np
import pytest

from detectors.metrics import first_front_amplitude


def _front(rise_samples, amplitude_pa, noise_pa, seed, plateau=400, n=2000):
    rng = np.random.default_rng(seed)
    k = np.arange(n, dtype=float)
    up = amplitude_pa * np.clip(k / rise_samples, 0, 1) ** 3  # gentle start, as a slow closure
    back = np.where(k > rise_samples + plateau, -0.6 * amplitude_pa, 0.0)
    return up + back + rng.normal(0.0, noise_pa, n)


class TestFirstFrontAmplitude:
    @pytest.mark.parametrize("seed", range(8))
    @pytest.mark.parametrize("sign", [1.0, -1.0])
    def test_slow_front_keeps_its_sign_and_size(self, seed, sign):
        # analytical: for the first hundred samples the front is within the noise (its
        # cube stays below 2 % of 400 kPa); single samples there may point either way
        x = _front(600, sign * 400e3, 1.5e3, seed)
        amplitude, peak = first_front_amplitude(x, 6e3)
        assert amplitude == pytest.approx(sign * 400e3, rel=0.03)
        assert 590 <= peak <= 1000

    @pytest.mark.parametrize("seed", range(4))
    def test_sharp_front_ends_at_its_reflection(self, seed):
        # analytical: a four-sample rise to 200 kPa, held 30 samples, then a fall of 60 %
        rng = np.random.default_rng(seed)
        k = np.arange(300, dtype=float)
        x = 200e3 * np.clip(k / 4, 0, 1) - np.where(k > 34, 120e3, 0.0) + rng.normal(0, 800.0, k.size)
        x[100:] += 300e3  # a later, larger rise is not the first front
        amplitude, peak = first_front_amplitude(x, 5e3)
        assert amplitude == pytest.approx(200e3, abs=4e3)
        assert 4 <= peak <= 35

    def test_empty_gives_zero(self):
        assert first_front_amplitude(np.array([]), 5e3) == (0.0, 0)
