"""What a calibration is told and what it returns, with the uncertainties of its parameters.

:class:`CalibrationOptions` holds the limits of a fit, :class:`CalibrationResult` its
outcome (a refused result keeps the starting values and says why), and
:func:`jacobian_uncertainties` the standard uncertainties from the Jacobian at the solution.
Used by :mod:`models.calibrate`, which re-exports these names.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

__all__ = ["CalibrationOptions", "CalibrationResult", "jacobian_uncertainties"]


@dataclass(frozen=True)
class CalibrationOptions:
    """Limits of the fit (pure numbers; the service maps them from its config).

    Attributes
    ----------
    max_wave_speed_change : float
        Largest relative change of a wave speed from its start [-].
    friction_scale_bounds : tuple of float
        Bounds of the factor on the steady friction factors [-].
    max_unsteady_coefficient : float
        Upper bound of Brunone's k [-].
    fit_unsteady : bool
        Try k (in a stage of its own, kept only when it improves the fit materially).
    max_model_runs : int
        Budget of model runs of one fit, and of all stages of
        :func:`~models.calibrate.calibrate_in_stages` together (a run of a per-pipe blend
        counts each whole-reach neighbour).
    max_relative_uncertainty : float
        A per-pipe wave speed less certain than this is not separable: fall back to one
        factor [-].
    min_samples_per_parameter : int
        Fewer finite residuals than this per parameter: refuse.
    scan_span, scan_points : float, int
        One-factor fits first scan the factor over +-``scan_span`` at ``scan_points``
        points and start from the best (fronts make the residual ripple in wave speed, so
        a local method needs a start inside the right basin); 0 points: no scan. The
        start is the current calibration, so the span covers its likely error, not the
        whole plausible range.
    min_unsteady_improvement : float
        Keep a fitted k only when it lowers the RMS residual by at least this fraction [-].
    min_stage_runs : int
        A further stage starts only with at least this many runs of the budget left.
    xtol, ftol : float
        Stopping tolerances of the local fit (relative step, relative cost decrease; see
        ``scipy.optimize.least_squares``): a fit that gains less than ``ftol`` of its cost
        per step has converged as far as the event can tell [-].
    """

    max_wave_speed_change: float = 0.4
    friction_scale_bounds: tuple = (0.05, 20.0)
    max_unsteady_coefficient: float = 0.2
    fit_unsteady: bool = True
    max_model_runs: int = 100
    max_relative_uncertainty: float = 0.05
    min_samples_per_parameter: int = 20
    scan_span: float = 0.12
    scan_points: int = 9
    min_unsteady_improvement: float = 0.05
    min_stage_runs: int = 12
    xtol: float = 1e-3
    ftol: float = 1e-5


@dataclass(frozen=True, eq=False)
class CalibrationResult:
    """Outcome of one calibration.

    ``converged`` False means refused: ``reason`` says why and the parameters are the
    starting values. Uncertainties are one standard uncertainty from the Jacobian
    (cov = s^2 (J^T J)^-1); they assume independent residuals and are optimistic where the
    residual is model error rather than noise.
    """

    converged: bool
    reason: str
    mode: str
    wave_speed_m_s: dict
    wave_speed_uncertainty_m_s: dict
    wave_speed_factor: float
    friction_factor: dict
    friction_scale: float
    friction_scale_uncertainty: float
    unsteady_coefficient: float
    unsteady_coefficient_uncertainty: float
    rms_residual_m: float
    rms_by_probe_m: dict
    n_model_runs: int
    n_residuals: int
    modelled_heads_m: np.ndarray | None = None
    parameter_names: tuple = ()
    correlation: np.ndarray | None = None
    notes: tuple = field(default=())


def jacobian_uncertainties(jacobian: np.ndarray, residuals: np.ndarray,
                           rcond: float = 1e-10) -> tuple[np.ndarray, np.ndarray, float]:
    """Standard uncertainties and correlations of least-squares parameters.

    Returns
    -------
    sigma : numpy.ndarray
        Standard uncertainty per parameter (inf where the Jacobian gives no information).
    correlation : numpy.ndarray
    condition : float
        Ratio of the largest to the smallest singular value of J.

    Notes
    -----
    cov = s^2 (J^T J)^-1 with s^2 = r^T r / (m - n), through the SVD J = U S V^T:
    (J^T J)^-1 = V S^-2 V^T (Gauss–Newton covariance; common practice, e.g. the
    ``curve_fit`` convention of scipy).
    """
    m, n = jacobian.shape
    _, s, vt = np.linalg.svd(jacobian, full_matrices=False)
    condition = float(s[0] / s[-1]) if s[-1] > 0 else math.inf
    keep = s > rcond * s[0]
    inv_s2 = np.where(keep, 1.0 / np.where(keep, s, 1.0) ** 2, np.inf)
    s2 = float(residuals @ residuals) / max(m - n, 1)
    with np.errstate(invalid="ignore"):
        cov = (vt.T * inv_s2) @ vt * s2
    variance = np.diag(cov).copy()
    variance[~np.isfinite(variance)] = np.inf
    sigma = np.sqrt(variance)
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sigma, sigma)
    return sigma, corr, condition


def _refused(reason: str, mode: str, speeds, friction, k, runs: int, n_res: int,
             notes=()) -> CalibrationResult:
    return CalibrationResult(False, reason, mode, dict(speeds), {p: math.nan for p in speeds},
                             1.0, dict(friction), 1.0, math.nan, k, math.nan, math.nan, {}, runs,
                             n_res, notes=tuple(notes))
