"""Tests of a slow (SCADA, one sample a second) pressure channel in detectors.events and
detectors.metrics: its noise, its spike filter and the pressure range of its events.

The signal is analytical: a steady level, a closure-like rise of 400 kPa over 12 s (as
``u ** 2.5`` of a ramp ``u`` from 0 to 1), then ringing of 9 s period that decays over two
minutes, plus seeded white noise of 1.5 kPa. Its lowest true pressure is the level it left.
"""

import numpy as np
import pytest

from detectors.events import find_arrivals
from detectors.metrics import _despike
from detectors.params import DetectionParams
from detectors.traces import SensorTrace
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

NOISE_PA = 1.5e3
LEVEL_PA = 650e3
T0_NS = 1_700_000_000 * 10**9


def _layout():
    return SystemLayout(
        "slow", nodes=(NodeSite("PS", "pump_station"), NodeSite("R", "reservoir")),
        pipes=(PipeSite("P1", "PS", "R", 3000.0, 0.4, 1000.0),),
        sensors=(SensorSite("SC", "P1", 8.0, clock_synchronised=False),))


def _surge(seed, start_s=600.3):
    rng = np.random.default_rng(seed)
    t = np.arange(1800.0)
    u = np.clip((t - start_s) / 12.0, 0, 1)
    ring = np.where(t > start_s + 12, 250e3 * np.exp(-(t - start_s - 12) / 120)
                    * np.sin(2 * np.pi * (t - start_s - 12) / 9.0), 0.0)
    x = LEVEL_PA + 400e3 * u**2.5 + ring + rng.normal(0.0, NOISE_PA, t.size)
    return SensorTrace("SC", "pressure", T0_NS + (t * 1e9).astype(np.int64), x)


class TestSlowLoggerEvent:
    @pytest.mark.parametrize("seed", [1, 2, 3, 4, 5])
    def test_minimum_is_the_level_it_left(self, seed):
        # analytical: the lowest true pressure is the steady level; the samples before a
        # one-sample onset count, so the minimum lies within the noise of it (the lowest of
        # some 30 noisy samples lies up to about 3 deviations below)
        trace = _surge(seed)
        (arrival,) = find_arrivals(trace, _layout(), DetectionParams())
        o = arrival.observation
        assert LEVEL_PA - 5 * NOISE_PA <= o.min_pa <= LEVEL_PA + NOISE_PA

    @pytest.mark.parametrize("seed", [1, 2, 3])
    def test_noise_is_the_loggers_not_the_ringing(self, seed):
        # analytical: the block estimate around a minutes-long transient holds its swing;
        # the quiet lead-in holds only the logger's noise (1.5 kPa)
        (arrival,) = find_arrivals(_surge(seed), _layout(), DetectionParams())
        assert 0.5 * NOISE_PA <= arrival.observation.noise_sigma_pa <= 2.0 * NOISE_PA

    def test_peak_sample_of_the_ringing_is_kept(self):
        # analytical: with the noise known to be small, the one-sample peaks of the ringing
        # must not be taken for spikes: the despiked maximum is the recorded one
        trace = _surge(4)
        (arrival,) = find_arrivals(trace, _layout(), DetectionParams())
        o = arrival.observation
        assert o.max_pa == pytest.approx(trace.values.max())
        assert o.despiked_max_pa == pytest.approx(o.max_pa)


class TestDespikeLocalSpread:
    def test_spike_in_quiet_samples_is_removed(self):
        # common practice (Hampel identifier; Pearson 2002, IEEE Trans. Control Syst.
        # Technol. 10(1)): a lone sample 40 deviations off its window's median is a spike
        x = np.random.default_rng(0).normal(LEVEL_PA, NOISE_PA, 60)
        x[30] += 40 * NOISE_PA
        out = _despike(x, 3, NOISE_PA, local_spread=True)
        assert abs(out[30] - LEVEL_PA) < 5 * NOISE_PA
        np.testing.assert_array_equal(np.delete(out, 30), np.delete(x, 30))

    def test_steep_samples_of_a_swing_are_kept(self):
        # analytical: a 9 s oscillation of 250 kPa sampled once a second; each sample lies
        # far from its window's median, but so does the window's own spread
        t = np.arange(60.0)
        x = LEVEL_PA + 250e3 * np.sin(2 * np.pi * t / 9.0)
        np.testing.assert_array_equal(_despike(x, 3, NOISE_PA, local_spread=True), x)
        assert not np.array_equal(_despike(x, 3, NOISE_PA), x)  # the global test alone cuts them
