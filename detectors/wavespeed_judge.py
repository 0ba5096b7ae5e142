"""Whether a pair's wave-speed estimates can be accepted: plausibility, front quality and
the agreement of the two methods.

Used by :mod:`detectors.wavespeed`, which imports these names.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import TYPE_CHECKING, Mapping

import numpy as np

if TYPE_CHECKING:  # the estimate type lives in detectors.wavespeed, which imports this module
    from detectors.wavespeed import WaveSpeedEstimate

__all__ = ["plausibility_reasons", "front_quality_reasons", "judge_pair"]


def plausibility_reasons(
    estimate: WaveSpeedEstimate,
    *,
    max_wave_speed_m_s: float,
    min_wave_speed_m_s: float,
    clocks_synchronised: bool = True,
) -> tuple[str, ...]:
    """Why an estimate cannot be right; empty when it passes.

    Parameters
    ----------
    estimate : WaveSpeedEstimate
    max_wave_speed_m_s : float
        The speed of sound in water at the water temperature [m/s]
        (:func:`models.properties.speed_of_sound_m_s`): no liquid-filled pipe is faster, so a
        faster estimate is a clock or distance problem (Wylie & Streeter 1993, sec. 2.2).
    min_wave_speed_m_s : float
        Floor [m/s], from the service config.
    clocks_synchronised : bool
        False when either sensor's clock is not synchronised.
    """
    reasons = []
    speed = estimate.wave_speed_m_s
    if not clocks_synchronised:
        reasons.append("sensor clocks not synchronised")
    if not np.isfinite(speed) or estimate.delay_s <= 0:
        reasons.append(f"delay {estimate.delay_s:.4g} s is not positive: the source may lie "
                       "between the sensors, or a clock is off")
    elif speed > max_wave_speed_m_s:
        reasons.append(f"{speed:.0f} m/s is faster than sound in water ({max_wave_speed_m_s:.0f}"
                       " m/s): check the clocks, the distance, or a source between the sensors")
    elif speed < min_wave_speed_m_s:
        reasons.append(f"{speed:.0f} m/s is below the floor of {min_wave_speed_m_s:.0f} m/s")
    if not np.isfinite(estimate.uncertainty_m_s):
        reasons.append("uncertainty could not be determined (no usable front)")
    return tuple(reasons)


def front_quality_reasons(
    estimates: tuple[WaveSpeedEstimate, ...], *, min_snr_db: float, min_correlation: float
) -> tuple[str, ...]:
    """Why the front windows of one pair cannot carry a delay; empty when they can.

    Both methods of a pair read the same two windows, so these reasons hold for the pair:
    a front that does not stand ``min_snr_db`` above the noise in either window (the
    windows then hold noise, or another part of the event, and a delay read from them is
    a difference of picks, however small its computed uncertainty), and a normalised
    cross-correlation peak below ``min_correlation`` (the two windows do not hold the same
    front: a negative peak means opposite shapes). The Cramer-Rao bound that the
    uncertainty builds on holds only above a threshold signal-to-noise ratio; below it the
    estimate breaks away to arbitrary lags (Ianniello, IEEE Trans. ASSP 30(6), 1982, from
    memory), so such estimates are refused rather than widened.
    """
    reasons = []
    snr = min((e.snr_db for e in estimates if np.isfinite(e.snr_db)), default=float("nan"))
    if np.isfinite(snr) and snr < min_snr_db:
        reasons.append(f"front {snr:.0f} dB above the noise, below the {min_snr_db:.0f} dB needed: "
                       "the windows hold no clear front")
    peaks = [e.correlation_peak for e in estimates if np.isfinite(e.correlation_peak)]
    if peaks and min(peaks) < min_correlation:
        reasons.append(f"correlation peak {min(peaks):.2f} is below {min_correlation:.2f}: the two "
                       "windows do not hold the same front")
    return tuple(reasons)


def judge_pair(
    estimates: tuple[WaveSpeedEstimate, ...],
    *,
    max_wave_speed_m_s: float,
    min_wave_speed_m_s: float,
    clocks_synchronised: bool = True,
    agreement_k: float = 3.0,
    min_snr_db: float = 10.0,
    min_correlation: float = 0.5,
    refused: Mapping[str, str] | None = None,
) -> tuple[WaveSpeedEstimate, ...]:
    """Apply the plausibility rules, the front quality and the agreement of the two methods
    to one pair.

    Two estimates of the same pair disagree when ``|a_1 - a_2| > agreement_k sqrt(u_1^2 +
    u_2^2)``; both are then rejected, since it is unknown which is wrong. The methods share the
    data, so the test is a little strict (their errors are partly correlated), which errs on
    the side of rejecting. For the same reason the two methods can agree on windows that
    hold no common front at all; :func:`front_quality_reasons` (``min_snr_db``,
    ``min_correlation``) refuses both then. ``refused`` maps a method to the reason it was
    refused before judging (a reflection inside the correlation windows): that estimate
    keeps the reason and takes no part in the agreement test, so it cannot veto the other
    method. Returns new estimates with ``accepted`` and ``reason`` set.
    """
    refused = dict(refused or {})
    quality = front_quality_reasons(estimates, min_snr_db=min_snr_db, min_correlation=min_correlation)
    judged = []
    for estimate in estimates:
        reasons = list(plausibility_reasons(
            estimate, max_wave_speed_m_s=max_wave_speed_m_s,
            min_wave_speed_m_s=min_wave_speed_m_s, clocks_synchronised=clocks_synchronised))
        reasons += quality
        if estimate.method in refused:
            reasons.append(refused[estimate.method])
        for other in estimates:
            if (other is estimate or other.method == estimate.method
                    or estimate.method in refused or other.method in refused):
                continue
            combined = math.hypot(estimate.uncertainty_m_s, other.uncertainty_m_s)
            gap = abs(estimate.wave_speed_m_s - other.wave_speed_m_s)
            if np.isfinite(combined) and gap > agreement_k * combined:
                reasons.append(f"methods disagree: {estimate.method} {estimate.wave_speed_m_s:.0f}"
                               f" vs {other.method} {other.wave_speed_m_s:.0f} m/s, "
                               f"{gap / combined:.1f} combined uncertainties apart")
        judged.append(replace(estimate, accepted=not reasons, reason="; ".join(reasons)))
    return tuple(judged)
