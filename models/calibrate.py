"""Calibrate the MOC model on one measured event: wave speeds and friction by least squares.

The replayed network (:class:`models.replay.ReplayModel`) is driven by the measured head
at one sensor; this module varies its pipe parameters until the heads it predicts at the
other sensors match the measured traces over the event window:

* the wave speed of each pipe, or one factor on all of them when the data cannot separate
  the pipes (a single pipe, or fewer informative sensors than pipes);
* one factor on the steady Darcy friction factors (each pipe's starting factor times it);
* the Brunone unsteady-friction coefficient k (one value for the event).

It uses :func:`scipy.optimize.least_squares` (trust-region reflective, bounded), reports the
fit quality (RMS residual overall and per sensor) and the parameters' standard
uncertainties from the Jacobian at the solution, and refuses, with a reason, a fit that did
not converge, ran to a bound, or whose parameters the data cannot determine.

Parameterisation: wave speeds and the friction factor enter as logarithms of their factor on
the starting value (so 0.01 is 1 %), k directly. A common factor on all wave speeds is
exactly continuous in the fixed-grid MOC (the step is scaled with it); a pipe's own
departure moves whole reaches, so per-pipe fits run on a finer grid and blend the runs on
the whole-reach neighbours of the trial speeds
(:meth:`models.replay.ReplayModel.reach_vertices`), which keeps the residual continuous.

Options, result and uncertainties live in :mod:`models.calibrate_result` (importable from
here as well), the residual function in :mod:`models.calibrate_objective`.

References
----------
.. [1] M. A. Branch, T. F. Coleman, Y. Li, "A subspace, interior, and conjugate gradient
   method for large-scale bound-constrained minimization problems", SIAM J. Sci. Comput.
   21(1), 1999 (the trust-region reflective method of ``least_squares``).
.. [2] J. P. Vitkovsky, A. R. Simpson, M. F. Lambert, "Leak detection and calibration
   using transients and genetic algorithms", J. Water Resour. Plann. Manage. 126(4), 2000
   (inverse transient calibration of friction and wave speed; from memory).
.. [3] B. Brunone, U. M. Golia, M. Greco, "Some remarks on the momentum equation for fast
   transients", Proc. Int. Meeting on Hydraulic Transients with Column Separation, IAHR,
   1991 (unsteady friction coefficient; from memory).
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Mapping, Sequence

import numpy as np
from scipy.optimize import least_squares

from models.calibrate_objective import _BudgetSpent, _Objective, _scan_start
from models.calibrate_result import (CalibrationOptions, CalibrationResult,
                                     jacobian_uncertainties, _refused)
from models.replay import ReplayModel

__all__ = ["CalibrationOptions", "CalibrationResult", "calibrate_replay", "calibrate_in_stages",
           "per_pipe_runs_needed",
           "jacobian_uncertainties"]


def calibrate_replay(replay: ReplayModel, measured_heads_m: np.ndarray, *, mode: str = "factor",
                     fitted_pipes: Sequence[str] | None = None,
                     start_wave_speed_m_s: Mapping[str, float] | None = None,
                     start_friction_factor: Mapping[str, float] | None = None,
                     start_unsteady_coefficient: float = 0.0,
                     options: CalibrationOptions = CalibrationOptions(),
                     fit_unsteady: bool | None = None, scan: bool = True,
                     max_model_runs: int | None = None,
                     diff_step_speed: float | None = None) -> CalibrationResult:
    """Fit wave speed(s), steady friction and (optionally) unsteady friction to one event.

    Parameters
    ----------
    replay : ReplayModel
        The replayed network and its target times.
    measured_heads_m : numpy.ndarray
        Measured heads at the target probes and times, (times, probes) [m]; NaN is ignored.
    mode : {"factor", "per_pipe"}
        One factor on every wave speed, or one speed per pipe of ``fitted_pipes`` (the
        others follow the mean factor).
    start_* : starting values per original pipe id ([m/s], [-]) and k [-]
        Default: the replay's base values (the current calibration).
    fit_unsteady : bool, optional
        Fit Brunone's k as well; default ``options.fit_unsteady``.
    scan : bool
        Scan the factor before the local fit (one-factor mode, ``options.scan_points``).
    max_model_runs : int, optional
        Run budget of this fit; default ``options.max_model_runs``.

    Returns
    -------
    CalibrationResult

    Raises
    ------
    ValueError
        Shapes that do not match, an unknown mode.

    Notes
    -----
    Minimises sum over sensors and times of (H_model - H_measured)^2 [m^2] (equal weights:
    every logger is trusted alike). Refused when: fewer than
    ``min_samples_per_parameter`` finite residuals per parameter; the run budget is spent
    or the optimiser fails; a wave speed or the friction factor ends on its bound; the
    Jacobian is singular (the parameters cannot be told apart). A k that ends on zero is
    reported as zero with zero uncertainty (no unsteady friction is needed).
    """
    if mode not in ("factor", "per_pipe"):
        raise ValueError(f"mode must be 'factor' or 'per_pipe', got {mode!r}")
    measured = np.asarray(measured_heads_m, dtype=float)
    expected = (replay.target_times_s.size, len(replay.probes))
    if measured.shape != expected:
        raise ValueError(f"measured_heads_m has shape {measured.shape}, expected {expected} "
                         "(target times, probes)")
    speeds0 = dict(start_wave_speed_m_s or replay.base_wave_speed_m_s)
    friction0 = dict(start_friction_factor or replay.base_friction_factor)
    fitted = tuple(fitted_pipes or replay.pipe_ids)
    if mode == "per_pipe" and len(fitted) < 2:
        mode = "factor"
    fit_k = options.fit_unsteady if fit_unsteady is None else bool(fit_unsteady)
    budget = int(options.max_model_runs if max_model_runs is None else max_model_runs)
    objective = _Objective(replay, measured, mode, fitted, speeds0, friction0,
                           start_unsteady_coefficient, fit_k, budget)
    n_params = len(objective.names)
    runs0 = replay.runs
    if len(replay.probes) == 0 or objective.measured.size < options.min_samples_per_parameter * n_params:
        return _refused(f"too few sensors or samples to calibrate: {len(replay.probes)} target "
                        f"sensor(s), {objective.measured.size} finite samples for {n_params} "
                        f"parameters (need at least one sensor besides the driving one and "
                        f"{options.min_samples_per_parameter} samples per parameter)",
                        mode, speeds0, friction0, start_unsteady_coefficient, 0,
                        objective.measured.size)
    span = math.log1p(options.max_wave_speed_change)
    f_low, f_high = options.friction_scale_bounds
    lower = [-span] * objective.n_speed + [math.log(f_low)]
    upper = [span] * objective.n_speed + [math.log(f_high)]
    x0 = [0.0] * objective.n_speed + [0.0]
    steps = [diff_step_speed or 1e-3] * objective.n_speed + [5e-3]
    if fit_k:
        x0.append(min(max(start_unsteady_coefficient, 1e-3), options.max_unsteady_coefficient))
        lower.append(0.0)
        upper.append(options.max_unsteady_coefficient)
        steps.append(2e-3)
    spent = (f"the run budget of {budget} model runs was spent before the fit converged; "
             "raise the budget or shorten the window")
    try:
        if mode == "factor" and scan and options.scan_points > 1:
            x0[0] = _scan_start(objective, x0, options)
        result = least_squares(objective, np.array(x0), bounds=(lower, upper), method="trf",
                               x_scale=np.full(len(x0), 0.01), diff_step=np.array(steps),
                               max_nfev=budget, xtol=options.xtol, ftol=options.ftol, gtol=1e-8)
    except _BudgetSpent:
        return _refused(spent, mode, speeds0, friction0, start_unsteady_coefficient,
                        replay.runs - runs0, objective.measured.size)
    runs = replay.runs - runs0
    speeds, friction, k = objective.parameters(result.x)
    if result.status <= 0:
        return _refused(f"the fit did not converge ({result.message.strip()}) after {runs} model "
                        "runs", mode, speeds0, friction0, start_unsteady_coefficient, runs,
                        objective.measured.size)
    at_bound = [objective.names[i] for i in np.flatnonzero(result.active_mask)
                if not objective.names[i] == "unsteady_k"]
    if at_bound:
        return _refused(f"the fit ran to the bound of {', '.join(at_bound)}: no wave speed within "
                        f"+-{100 * options.max_wave_speed_change:.0f} % or friction factor within "
                        f"x{f_low:g}..x{f_high:g} reproduces the event; check the layout, the "
                        "driving sensor and its data", mode, speeds0, friction0,
                        start_unsteady_coefficient, runs, objective.measured.size)
    free = np.ones(n_params, bool)
    if fit_k and result.active_mask[-1] != 0:
        free[-1] = False  # k on a bound: held there, no information on it
    sigma = np.zeros(n_params)
    sigma_free, corr, condition = jacobian_uncertainties(result.jac[:, free], result.fun)
    sigma[free] = sigma_free
    if not np.all(np.isfinite(sigma)):
        return _refused(f"the parameters cannot be determined from this event (Jacobian "
                        f"condition {condition:.3g}); hold some of them fixed", mode, speeds0,
                        friction0, start_unsteady_coefficient, runs, objective.measured.size)
    predicted = replay.predict(speeds, friction, k, interpolate=mode == "per_pipe")
    runs = replay.runs - runs0
    residual = predicted - measured
    rms_by_probe = {p.name: float(np.sqrt(np.nanmean(residual[:, j] ** 2)))
                    for j, p in enumerate(replay.probes)}
    if mode == "factor":
        speed_sigma = {p: a * sigma[0] for p, a in speeds.items()}
        factor = math.exp(result.x[0])
    else:
        speed_sigma = {p: speeds[p] * sigma[i] for i, p in enumerate(fitted)}
        rest = sigma[: objective.n_speed].mean()
        speed_sigma.update({p: speeds[p] * rest for p in speeds if p not in speed_sigma})
        factor = math.exp(float(np.mean(result.x[: objective.n_speed])))
    scale = math.exp(result.x[objective.n_speed])
    notes = [f"{result.message.strip()}", f"Jacobian condition {condition:.3g}"]
    if mode == "per_pipe":
        notes.append("per-pipe wave speeds realised by blending whole-reach neighbour runs")
    return CalibrationResult(
        True, "converged", mode, speeds, speed_sigma, factor, friction, scale,
        scale * sigma[objective.n_speed], k, float(sigma[-1]) if fit_k else 0.0,
        float(np.sqrt(np.nanmean(residual**2))), rms_by_probe, runs, objective.measured.size,
        predicted, objective.names, corr, tuple(notes))


def per_pipe_runs_needed(n_pipes: int, runs_per_prediction: int, iterations: int = 3) -> int:
    """Model runs a per-pipe stage needs for a few Gauss–Newton iterations (estimate).

    Each iteration evaluates the residual once and once per parameter for the
    finite-difference Jacobian (n pipes + friction), and each evaluation blends
    ``runs_per_prediction`` whole-reach runs.
    """
    return iterations * (n_pipes + 2) * max(1, runs_per_prediction)


def calibrate_in_stages(coarse: ReplayModel, coarse_measured_m: np.ndarray,
                        fine: ReplayModel | None = None, fine_measured_m: np.ndarray | None = None,
                        fitted_pipes: Sequence[str] = (), start_unsteady_coefficient: float = 0.0,
                        options: CalibrationOptions = CalibrationOptions()) -> CalibrationResult:
    """One factor first, then k if it helps, then each pipe's speed when data and budget allow.

    Stages, all within ``options.max_model_runs`` runs together:

    1. one factor on every wave speed and one on friction, k held at its start (a scan of
       the factor around the start, then a local fit);
    2. with ``options.fit_unsteady``: k added, from stage 1's solution; kept only when the
       RMS residual falls by ``min_unsteady_improvement`` or more;
    3. with ``fine`` and two or more ``fitted_pipes`` (the caller passes pipes only when
       its sensors can separate them): each pipe's speed from the best so far, k held;
       kept when it converges, every fitted speed is known within
       ``max_relative_uncertainty`` and the residual is not worse; skipped when the budget
       left cannot pay for a few iterations (:func:`per_pipe_runs_needed`).

    Whatever stage is not kept, the result says why in its ``notes``.
    """
    budget = options.max_model_runs
    first = calibrate_replay(coarse, coarse_measured_m, mode="factor", fit_unsteady=False,
                             start_unsteady_coefficient=start_unsteady_coefficient,
                             options=options, max_model_runs=budget)
    used = first.n_model_runs
    if not first.converged:
        return first
    best, notes = first, list(first.notes)
    if options.fit_unsteady and budget - used >= options.min_stage_runs:
        with_k = calibrate_replay(coarse, coarse_measured_m, mode="factor", fit_unsteady=True,
                                  start_wave_speed_m_s=first.wave_speed_m_s,
                                  start_friction_factor=first.friction_factor,
                                  start_unsteady_coefficient=start_unsteady_coefficient,
                                  options=options, scan=False, max_model_runs=budget - used)
        used += with_k.n_model_runs
        gain = (1.0 - with_k.rms_residual_m / first.rms_residual_m
                if with_k.converged and first.rms_residual_m > 0 else 0.0)
        if with_k.converged and gain >= options.min_unsteady_improvement:
            best = _rebase(with_k, first)
            notes.append(f"unsteady friction k {with_k.unsteady_coefficient:.4f} lowers the RMS "
                         f"residual by {100 * gain:.0f} %")
        else:
            needs = f"(needs {100 * options.min_unsteady_improvement:.0f} %)"
            why = with_k.reason if not with_k.converged else (
                f"it lowers the RMS residual by {100 * gain:.1f} % only {needs}" if gain > 0
                else f"it does not lower the RMS residual {needs}")
            notes.append(f"unsteady friction not used: {why}")
    elif options.fit_unsteady:
        notes.append("unsteady friction not tried: run budget spent")
    if fine is not None and len(fitted_pipes) >= 2:
        left = budget - used
        vertices = fine.reach_vertices(best.wave_speed_m_s,
                                       fine.time_step_for(best.wave_speed_m_s))
        needed = per_pipe_runs_needed(len(fitted_pipes), len(vertices) + 1)
        if left < needed:
            notes.append(f"one factor on all pipes: a per-pipe fit needs about {needed} model "
                         f"runs and {left} of the budget are left")
        else:
            second = calibrate_replay(fine, fine_measured_m, mode="per_pipe",
                                      fitted_pipes=fitted_pipes, fit_unsteady=False,
                                      start_wave_speed_m_s=best.wave_speed_m_s,
                                      start_friction_factor=best.friction_factor,
                                      start_unsteady_coefficient=best.unsteady_coefficient,
                                      options=options, max_model_runs=left)
            used += second.n_model_runs
            relative = [second.wave_speed_uncertainty_m_s[p] / second.wave_speed_m_s[p]
                        for p in fitted_pipes] if second.converged else [math.inf]
            if not second.converged or max(relative) > options.max_relative_uncertainty:
                why = second.reason if not second.converged else (
                    f"per-pipe speeds uncertain by up to {100 * max(relative):.1f} %")
                notes.append(f"one factor on all pipes: {why}")
            elif second.rms_residual_m > best.rms_residual_m * 1.001:
                notes.append("one factor on all pipes: per-pipe speeds did not lower the "
                             "residual")
            else:
                best = replace(_rebase(second, best), unsteady_coefficient=best.unsteady_coefficient,
                               unsteady_coefficient_uncertainty=best.unsteady_coefficient_uncertainty)
                notes += list(second.notes)
    return replace(best, n_model_runs=used, notes=tuple(notes))


def _rebase(later: CalibrationResult, earlier: CalibrationResult) -> CalibrationResult:
    """A later stage's result with its factors taken against the first stage's start."""
    base = {p: earlier.wave_speed_m_s[p] / earlier.wave_speed_factor for p in earlier.wave_speed_m_s}
    factor = math.exp(float(np.mean([math.log(later.wave_speed_m_s[p] / base[p]) for p in base])))
    scale = earlier.friction_scale * later.friction_scale
    return replace(later, wave_speed_factor=factor, friction_scale=scale,
                   friction_scale_uncertainty=later.friction_scale_uncertainty * earlier.friction_scale)
