"""models.calibrate: Jacobian uncertainties, one-factor fit, refusals.

The covariance check is analytical (linear least squares: cov = s^2 (X^T X)^-1, common
practice); the fit check is generated (a single-pipe MOC event of known wave speed and
friction, seeded noise; the issue's tolerances: wave speed 1 %, friction factor 10 %).
"""

import numpy as np
import pytest

from models.calibrate import (CalibrationOptions, calibrate_in_stages, calibrate_replay,
                              jacobian_uncertainties, per_pipe_runs_needed)
from models.moc import MocModel, Probe
from models.network import Fluid, HeadSeries, Network, Pipe, Reservoir
from models.replay import InitialFlow, ReplayModel, block_mean, cut_network_at

FLUID = Fluid(1000.0, 1e-6, -10.0)


class TestJacobianUncertainties:
    def test_matches_linear_regression_covariance(self):
        rng = np.random.default_rng(4)
        x = np.linspace(0.0, 1.0, 50)
        design = np.column_stack([np.ones_like(x), x])
        y = 2.0 + 3.0 * x + rng.normal(0.0, 0.1, x.size)
        beta, *_ = np.linalg.lstsq(design, y, rcond=None)
        residual = design @ beta - y
        sigma, corr, condition = jacobian_uncertainties(design, residual)
        s2 = residual @ residual / (x.size - 2)
        expected = np.sqrt(np.diag(s2 * np.linalg.inv(design.T @ design)))
        np.testing.assert_allclose(sigma, expected, rtol=1e-10)
        assert corr[0, 0] == pytest.approx(1.0) and -1.0 < corr[0, 1] < 0.0
        assert condition > 1.0

    def test_singular_jacobian_gives_infinite_uncertainty(self):
        jac = np.column_stack([np.ones(10), 2.0 * np.ones(10)])
        sigma, _, condition = jacobian_uncertainties(jac, np.full(10, 0.1))
        assert not np.all(np.isfinite(sigma)) and condition > 1e10


TRUE_SPEED, TRUE_F = 1100.0, 0.02


@pytest.fixture(scope="module")
def single_pipe_event():
    """A pump-trip-like fall of head at the upstream end of a 2 km main into a reservoir;
    logger D near the source drives the replay, logger T at 1500 m is compared."""
    source = HeadSeries("S", np.array([0.0, 1.0, 1.6, 10.0]), np.array([150.0, 150.0, 105.0, 105.0]))
    net = Network(FLUID, (Pipe("P", "S", "R", 2000.0, 0.4, TRUE_SPEED, friction_factor=TRUE_F),),
                  (source, Reservoir("R", 140.0)))
    model = MocModel(net, 0.002, cavitation=False)
    run = model.run(8.0, [Probe("D", "P", 30.0), Probe("T", "P", 1500.0)])
    rng = np.random.default_rng(11)
    t = np.arange(0.0, 7.9, 0.01)
    heads = run.probe_heads_at(t) + rng.normal(0.0, 0.05, (t.size, 2))
    config = Network(FLUID, (Pipe("P", "S", "R", 2000.0, 0.4, 1030.0, friction_factor=0.016),),
                     (Reservoir("S", 150.0), Reservoir("R", 135.0)))
    cut = cut_network_at(config, "P", 30.0, heads[0, 0], keep_points=[("P", 1500.0)])
    tb, hb = block_mean(t, heads[:, 0], 4)
    tt, ht = block_mean(t, heads[:, 1:], 4)
    replay = ReplayModel(cut, tb, hb, (cut.probe("T", "P", 1500.0),), tt, {"P": 1030.0},
                         {"P": 0.016}, InitialFlow("measured", run.steady.pipe_flow_m3_s["P"]),
                         0.04, cavitation=False)
    return replay, ht, model


class TestCalibrateReplay:
    def test_recovers_wave_speed_and_friction(self, single_pipe_event):
        replay, measured, model = single_pipe_event
        fit = calibrate_replay(replay, measured)
        assert fit.converged, fit.reason
        assert fit.mode == "factor"
        assert fit.wave_speed_m_s["P"] == pytest.approx(model.discretisation.wave_speed_m_s["P"],
                                                        rel=0.01)
        assert fit.friction_factor["P"] == pytest.approx(TRUE_F, rel=0.10)
        assert 0 < fit.wave_speed_uncertainty_m_s["P"] < 0.01 * TRUE_SPEED
        assert fit.n_model_runs == replay.runs and fit.rms_residual_m < 0.5

    def test_refuses_when_the_budget_runs_out(self, single_pipe_event):
        replay, measured, _ = single_pipe_event
        runs = replay.runs
        fit = calibrate_replay(replay, measured, options=CalibrationOptions(max_model_runs=5))
        assert not fit.converged and "run budget of 5 model runs" in fit.reason
        assert replay.runs - runs <= 5

    def test_refuses_too_few_samples(self, single_pipe_event):
        replay, measured, _ = single_pipe_event
        fit = calibrate_replay(replay, np.full_like(measured, np.nan))
        assert not fit.converged and "too few sensors or samples" in fit.reason

    def test_shape_and_mode_errors(self, single_pipe_event):
        replay, measured, _ = single_pipe_event
        with pytest.raises(ValueError, match="expected"):
            calibrate_replay(replay, measured[:10])
        with pytest.raises(ValueError, match="mode must be"):
            calibrate_replay(replay, measured, mode="each")


class TestCalibrateInStages:
    def test_one_factor_within_budget_and_k_only_when_it_helps(self, single_pipe_event):
        # generated event without unsteady friction: k must not be kept (it cannot lower
        # the residual by 5 %), and all stages together stay within the run budget
        replay, measured, model = single_pipe_event
        options = CalibrationOptions(max_model_runs=60)
        fit = calibrate_in_stages(replay, measured, options=options)
        assert fit.converged, fit.reason
        assert fit.n_model_runs <= 60
        assert fit.unsteady_coefficient == 0.0
        assert any("unsteady friction not" in n for n in fit.notes), fit.notes
        assert fit.wave_speed_m_s["P"] == pytest.approx(model.discretisation.wave_speed_m_s["P"],
                                                        rel=0.01)

    def test_per_pipe_stage_skipped_when_budget_is_short(self, single_pipe_event):
        replay, measured, _ = single_pipe_event
        options = CalibrationOptions(max_model_runs=40, fit_unsteady=False)
        fit = calibrate_in_stages(replay, measured, replay, measured, fitted_pipes=("P", "Q"),
                                  options=options)
        assert fit.mode == "factor" and fit.n_model_runs <= 40
        assert any("a per-pipe fit needs about" in n for n in fit.notes), fit.notes

    def test_per_pipe_runs_needed(self):
        # 3 iterations x (3 pipes + friction + residual) x 4 blended runs (arithmetic)
        assert per_pipe_runs_needed(3, 4) == 60
