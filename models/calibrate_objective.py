"""The residual function of a calibration stage over its parameter vector.

:class:`_Objective` maps the stage's parameters (log factors on the wave speeds and the
friction factors, and Brunone's k) to the replay's heads minus the measured ones, and stops
the fit through :class:`_BudgetSpent` when the run budget is used up; :func:`_scan_start`
picks the start of a one-factor fit from a grid. Used by :mod:`models.calibrate`.
"""

from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from models.calibrate_result import CalibrationOptions
from models.replay import ReplayModel


class _BudgetSpent(Exception):
    """Raised inside the residual function when the run budget is used up."""


class _Objective:
    """Residual function over the parameter vector of one stage."""

    def __init__(self, replay: ReplayModel, measured: np.ndarray, mode: str,
                 fitted_pipes: Sequence[str], start_speeds: Mapping[str, float],
                 start_friction: Mapping[str, float], start_k: float, fit_k: bool,
                 max_runs: int):
        self.replay, self.mode, self.fit_k = replay, mode, fit_k
        self.fitted = tuple(fitted_pipes)
        self.start_speeds, self.start_friction = dict(start_speeds), dict(start_friction)
        self.start_k = start_k
        self.mask = np.isfinite(measured)
        self.measured = measured[self.mask]
        self.run_limit = replay.runs + max_runs
        n_speed = 1 if mode == "factor" else len(self.fitted)
        self.names = (("log_wave_speed_factor",) if mode == "factor" else
                      tuple(f"log_wave_speed[{p}]" for p in self.fitted)) + \
            ("log_friction_scale",) + (("unsteady_k",) if fit_k else ())
        self.n_speed = n_speed
        self.runs_per_call = 1

    def parameters(self, x: np.ndarray) -> tuple[dict, dict, float]:
        speeds = dict(self.start_speeds)
        if self.mode == "factor":
            speeds = {p: a * math.exp(x[0]) for p, a in speeds.items()}
        else:
            fitted_logs = x[: self.n_speed]
            for p, lg in zip(self.fitted, fitted_logs):
                speeds[p] = self.start_speeds[p] * math.exp(lg)
            common = math.exp(float(np.mean(fitted_logs)))
            for p in speeds:
                if p not in self.fitted:
                    speeds[p] = self.start_speeds[p] * common
        scale = math.exp(x[self.n_speed])
        friction = {p: f * scale for p, f in self.start_friction.items()}
        k = float(x[self.n_speed + 1]) if self.fit_k else self.start_k
        return speeds, friction, k

    def __call__(self, x: np.ndarray) -> np.ndarray:
        if self.replay.runs + self.runs_per_call > self.run_limit:
            raise _BudgetSpent
        speeds, friction, k = self.parameters(x)
        before = self.replay.runs
        try:
            predicted = self.replay.predict(speeds, friction, k, interpolate=self.mode == "per_pipe")
        except ValueError:
            return np.full(self.measured.size, 1e3)
        finally:
            self.runs_per_call = max(self.runs_per_call, self.replay.runs - before)
        residual = predicted[self.mask] - self.measured
        return np.where(np.isfinite(residual), residual, 1e3)


def _scan_start(objective: _Objective, x0: list, options: CalibrationOptions) -> float:
    """Best wave-speed factor of a grid around the start (see ``scan_span``)."""
    grid = np.linspace(-math.log1p(options.scan_span), math.log1p(options.scan_span),
                       options.scan_points)
    costs = [float(np.sum(objective(np.array([g] + x0[1:])) ** 2)) for g in grid]
    return float(grid[int(np.argmin(costs))])
