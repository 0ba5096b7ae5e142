"""From many wave-speed estimates to one calibrated wave speed per pipe, and drift.

* :func:`solve_pipe_wave_speeds`: per-pipe speeds from paths through several pipes, by
  weighted least squares on travel times ``tau_k = sum_i L_ki / a_i``.
* :func:`combine_wave_speeds`: robust (Huber) inverse-variance weighted mean of a pipe's
  accepted estimates, its uncertainty inflated by the Birge ratio when they scatter more than
  their uncertainties say.
* :func:`calibrate_pipes`: the above for every pipe of a set of estimates (the service chooses
  the window and writes ``wave_speed_calibrations``).
* :func:`assess_drift`: whether new estimates depart from the calibration by more than both
  ``k`` standard uncertainties and a percentage.
* :func:`wave_speed_trend`: weighted straight-line trend of a pipe's estimates in time.
* :func:`current_wave_speed`: the speed the model uses: newest calibration, else the prior.

>>> combined = combine_wave_speeds([1150.0, 1160.0, 1155.0], [5.0, 5.0, 5.0])
>>> round(combined.wave_speed_m_s, 1), round(combined.uncertainty_m_s, 2)
(1155.0, 2.89)
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterable, Sequence

import numpy as np

from detectors.wavespeed import WaveSpeedEstimate

__all__ = [
    "PipeWaveSpeed",
    "solve_pipe_wave_speeds",
    "CombinedWaveSpeed",
    "combine_wave_speeds",
    "calibrate_pipes",
    "DriftAssessment",
    "assess_drift",
    "WaveSpeedTrend",
    "wave_speed_trend",
    "current_wave_speed",
]


@dataclass(frozen=True)
class PipeWaveSpeed:
    """One pipe's speed solved from path travel times.

    Attributes
    ----------
    pipe_id : str
    wave_speed_m_s, uncertainty_m_s : float
        NaN when the pipe is not identifiable from the paths given [m/s].
    n_paths : int
        Paths that run through the pipe.
    identifiable : bool
        False when the paths cannot separate this pipe from others (e.g. two pipes always
        travelled together).
    """

    pipe_id: str
    wave_speed_m_s: float
    uncertainty_m_s: float
    n_paths: int
    identifiable: bool


def solve_pipe_wave_speeds(estimates: Sequence[WaveSpeedEstimate]) -> tuple[PipeWaveSpeed, ...]:
    """Per-pipe wave speeds from accepted estimates along paths of one or more pipes.

    Notes
    -----
    Travel time is linear in the slowness ``s_i = 1 / a_i``: ``tau_k = sum_i L_ki s_i``.
    Weighted least squares with weights ``1 / u(tau_k)^2`` gives ``s`` and its covariance
    ``(L^T W L)^-1`` (Aster, Borchers & Thurber, "Parameter Estimation and Inverse Problems",
    2005, sec. 2.2, from memory); ``a_i = 1 / s_i`` and ``u(a_i) = u(s_i) / s_i^2``. A pipe is
    identifiable when its unit vector lies in the row space of ``L`` (checked by projection on
    the right singular vectors with a relative tolerance of 1e-9).
    """
    usable = [e for e in estimates if e.accepted and e.legs and np.isfinite(e.delay_s)
              and e.delay_uncertainty_s > 0]
    pipes = list(dict.fromkeys(leg.pipe_id for e in usable for leg in e.legs))
    if not usable:
        return ()
    design = np.zeros((len(usable), len(pipes)))
    for row, estimate in enumerate(usable):
        for leg in estimate.legs:
            design[row, pipes.index(leg.pipe_id)] += leg.length_m
    sigma = np.array([e.delay_uncertainty_s for e in usable])
    delays = np.array([e.delay_s for e in usable])
    weighted = design / sigma[:, None]
    _, singular, vt = np.linalg.svd(weighted, full_matrices=False)
    rank = int(np.sum(singular > 1e-9 * singular[0]))
    row_space = vt[:rank]
    pseudo_inverse = np.linalg.pinv(weighted, rcond=1e-9)
    slowness = pseudo_inverse @ (delays / sigma)
    covariance = pseudo_inverse @ pseudo_inverse.T
    results = []
    for i, pipe_id in enumerate(pipes):
        unit = np.zeros(len(pipes))
        unit[i] = 1.0
        identifiable = bool(np.linalg.norm(row_space.T @ (row_space @ unit) - unit) < 1e-6)
        n_paths = int(np.count_nonzero(design[:, i]))
        if identifiable and slowness[i] > 0:
            speed = 1.0 / slowness[i]
            results.append(PipeWaveSpeed(pipe_id, float(speed),
                                         float(np.sqrt(covariance[i, i]) * speed**2), n_paths,
                                         True))
        else:
            results.append(PipeWaveSpeed(pipe_id, math.nan, math.nan, n_paths, False))
    return tuple(results)


@dataclass(frozen=True)
class CombinedWaveSpeed:
    """Robust weighted mean of a pipe's estimates.

    Attributes
    ----------
    wave_speed_m_s, uncertainty_m_s : float
        [m/s]; the uncertainty is the larger of the internal one and the Birge-scaled one.
    n_estimates : int
        Estimates combined.
    n_downweighted : int
        Estimates the Huber weights cut below half their inverse-variance weight.
    birge_ratio : float
        ``sqrt(chi^2 / (n - 1))`` [-]; above 1 the estimates scatter more than stated.
    """

    wave_speed_m_s: float
    uncertainty_m_s: float
    n_estimates: int
    n_downweighted: int
    birge_ratio: float


def combine_wave_speeds(
    wave_speeds_m_s: Sequence[float],
    uncertainties_m_s: Sequence[float],
    *,
    huber_k: float = 2.0,
    max_iterations: int = 50,
) -> CombinedWaveSpeed:
    """Robust inverse-variance weighted mean of wave-speed estimates.

    Parameters
    ----------
    wave_speeds_m_s, uncertainties_m_s : sequence of float
        Estimates and their standard uncertainties [m/s]; uncertainties must be > 0.
    huber_k : float
        Huber tuning constant in standardised residuals [-] (2.0: a residual beyond two of
        its own uncertainties, after scaling by the Birge ratio, is downweighted).
    max_iterations : int

    Raises
    ------
    ValueError
        No estimates, lengths that differ, non-positive or non-finite uncertainties.

    Notes
    -----
    Iteratively reweighted least squares with weights ``w_i = psi(r_i)/r_i / u_i^2``,
    ``r_i = (a_i - m) / (u_i s)`` and ``s = max(1, Birge ratio)`` (Huber 1964; Birge 1932;
    the Particle Data Group's scale factor, from memory). The uncertainty is
    ``sqrt(1 / sum w_i) * max(1, birge_ratio)``.

    References
    ----------
    .. [1] Huber, P. J. "Robust estimation of a location parameter", Ann. Math. Statist.
       35(1), 73-101, 1964.
    .. [2] Birge, R. T. "The calculation of errors by the method of least squares", Phys. Rev.
       40, 207-227, 1932.
    """
    values = np.asarray(wave_speeds_m_s, dtype=float)
    sigma = np.asarray(uncertainties_m_s, dtype=float)
    if values.size == 0 or values.shape != sigma.shape:
        raise ValueError(f"need equally many estimates and uncertainties, at least one; got "
                         f"{values.size} and {sigma.size}")
    if not (np.all(np.isfinite(values)) and np.all(np.isfinite(sigma)) and np.all(sigma > 0)):
        raise ValueError("estimates must be finite and uncertainties finite and > 0; drop "
                         "rejected estimates before combining")
    base = 1.0 / sigma**2
    mean = float(np.median(values))
    scale = 1.0
    weights = base
    for _ in range(max_iterations):
        residual = np.abs(values - mean) / (sigma * scale)
        weights = base * np.minimum(1.0, huber_k / np.maximum(residual, 1e-300))
        new_mean = float(np.sum(weights * values) / np.sum(weights))
        chi2 = float(np.sum(weights * (values - new_mean) ** 2))
        scale = max(1.0, math.sqrt(chi2 / (values.size - 1))) if values.size > 1 else 1.0
        converged = abs(new_mean - mean) < 1e-9 * max(1.0, abs(mean))
        mean = new_mean
        if converged:
            break
    birge = math.sqrt(float(np.sum(base * (values - mean) ** 2)) / (values.size - 1)) \
        if values.size > 1 else 1.0
    uncertainty = math.sqrt(1.0 / float(np.sum(weights))) * max(1.0, scale)
    return CombinedWaveSpeed(mean, uncertainty, int(values.size),
                             int(np.sum(weights < 0.5 * base)), birge)


def calibrate_pipes(
    estimates: Iterable[WaveSpeedEstimate], *, method_prefix: str = "gcc", **options
) -> dict[str, CombinedWaveSpeed]:
    """Combine accepted single-pipe estimates of one method family, pipe by pipe.

    Only one method per sensor pair is used (``method_prefix``, default the GCC family), since
    the GCC and onset estimates of a pair share their data and are not independent. Estimates
    over several pipes are left to :func:`solve_pipe_wave_speeds`. ``options`` go to
    :func:`combine_wave_speeds`.
    """
    by_pipe: dict[str, list[WaveSpeedEstimate]] = {}
    for e in estimates:
        if (e.accepted and e.method.startswith(method_prefix) and "+" not in e.pipe_id
                and np.isfinite(e.uncertainty_m_s) and e.uncertainty_m_s > 0):
            by_pipe.setdefault(e.pipe_id, []).append(e)
    return {
        pipe_id: combine_wave_speeds([e.wave_speed_m_s for e in group],
                                     [e.uncertainty_m_s for e in group], **options)
        for pipe_id, group in by_pipe.items()
    }


@dataclass(frozen=True)
class DriftAssessment:
    """New estimates of a pipe against its calibration.

    Attributes
    ----------
    calibrated_m_s, recent_m_s : float
        [m/s]
    difference_m_s : float
        Recent minus calibrated [m/s]; negative when the wave has slowed (air, wall loss).
    difference_percent : float
        [%] of the calibrated speed.
    z_score : float
        Difference over the combined standard uncertainty [-].
    drifted : bool
        True when both limits are exceeded.
    message : str
    """

    calibrated_m_s: float
    recent_m_s: float
    difference_m_s: float
    difference_percent: float
    z_score: float
    drifted: bool
    message: str


def assess_drift(
    calibrated_m_s: float,
    calibrated_uncertainty_m_s: float,
    recent: CombinedWaveSpeed,
    *,
    k_sigma: float = 3.0,
    min_percent: float = 2.0,
) -> DriftAssessment:
    """Drift flag: the recent combination departs from the calibration by more than both
    ``k_sigma`` combined standard uncertainties and ``min_percent`` of the calibrated speed.

    Notes
    -----
    ``z = (a_recent - a_cal) / sqrt(u_recent^2 + u_cal^2)``; requiring a percentage as well
    keeps a very precise calibration from flagging a physically meaningless change (common
    practice).
    """
    if not (calibrated_m_s > 0 and calibrated_uncertainty_m_s >= 0):
        raise ValueError(f"calibrated_m_s={calibrated_m_s!r} must be > 0 and its uncertainty "
                         f"{calibrated_uncertainty_m_s!r} >= 0")
    difference = recent.wave_speed_m_s - calibrated_m_s
    combined = math.hypot(recent.uncertainty_m_s, calibrated_uncertainty_m_s)
    z = difference / combined if combined > 0 else math.copysign(math.inf, difference)
    percent = 100.0 * difference / calibrated_m_s
    drifted = abs(z) > k_sigma and abs(percent) > min_percent
    direction = "slower" if difference < 0 else "faster"
    message = (
        f"wave speed {recent.wave_speed_m_s:.0f} +- {recent.uncertainty_m_s:.0f} m/s is "
        f"{abs(percent):.1f} % {direction} than the calibration {calibrated_m_s:.0f} m/s "
        f"({abs(z):.1f} combined uncertainties)"
        + ("; a falling wave speed can mean entrained air or wall loss" if drifted and
           difference < 0 else "")
    )
    return DriftAssessment(calibrated_m_s, recent.wave_speed_m_s, difference, percent, z,
                           drifted, message)


@dataclass(frozen=True)
class WaveSpeedTrend:
    """Weighted straight-line trend of estimates in time.

    Attributes
    ----------
    slope_m_s_per_year, slope_uncertainty_m_s_per_year : float
        [m/s per year]
    n_estimates : int
    """

    slope_m_s_per_year: float
    slope_uncertainty_m_s_per_year: float
    n_estimates: int


_SECONDS_PER_YEAR = 365.25 * 86400.0


def wave_speed_trend(times_ns: Sequence[int], wave_speeds_m_s: Sequence[float],
                     uncertainties_m_s: Sequence[float]) -> WaveSpeedTrend:
    """Inverse-variance weighted least-squares slope of wave speed against time.

    Needs at least 3 estimates at 2 or more distinct times; the slope's uncertainty is scaled
    by the Birge ratio when above 1 (as in :func:`combine_wave_speeds`).
    """
    t = (np.asarray(times_ns, dtype=np.int64) - int(np.min(times_ns))) / 1e9 / _SECONDS_PER_YEAR
    y = np.asarray(wave_speeds_m_s, dtype=float)
    w = 1.0 / np.asarray(uncertainties_m_s, dtype=float) ** 2
    if y.size < 3 or np.ptp(t) == 0:
        raise ValueError(f"a trend needs at least 3 estimates at distinct times; got {y.size}")
    t_mean = np.sum(w * t) / np.sum(w)
    sxx = np.sum(w * (t - t_mean) ** 2)
    slope = float(np.sum(w * (t - t_mean) * y) / sxx)
    intercept = np.sum(w * y) / np.sum(w) - slope * t_mean
    chi2 = float(np.sum(w * (y - intercept - slope * t) ** 2))
    scale = max(1.0, math.sqrt(chi2 / (y.size - 2)))
    return WaveSpeedTrend(slope, float(scale / math.sqrt(sxx)), int(y.size))


def current_wave_speed(calibrations: Sequence[tuple[int, float]], prior_m_s: float | None,
                       theoretical_m_s: float | None = None) -> tuple[float, str]:
    """The wave speed the model uses and where it comes from.

    Parameters
    ----------
    calibrations : sequence of (created_at_ns, wave_speed_m_s)
        The pipe's calibration rows.
    prior_m_s : float or None
        The prior from the pipe config.
    theoretical_m_s : float or None
        From :func:`models.properties.theoretical_wave_speed`.

    Returns
    -------
    (wave_speed_m_s, source)
        ``source`` is ``calibration``, ``prior`` or ``theoretical``.
    """
    if calibrations:
        return float(max(calibrations, key=lambda row: row[0])[1]), "calibration"
    if prior_m_s is not None:
        return float(prior_m_s), "prior"
    if theoretical_m_s is not None:
        return float(theoretical_m_s), "theoretical"
    raise ValueError("no calibration, no prior and no theoretical wave speed for the pipe; "
                     "give wave_speed_m_s or the pipe's material and wall thickness")
