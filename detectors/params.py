"""Thresholds and windows of the event detector, all in SI units.

:class:`DetectionParams` is filled by the service from the ``[detection]`` table of the
service configuration; every field has a default a practitioner would start from. The
detector never hard-codes a threshold inside a computation: it reads it from here.

>>> params = DetectionParams(min_amplitude_pa=30e3)
>>> params.min_amplitude_pa
30000.0
>>> DetectionParams(wave_speed_min_m_s=1500.0, wave_speed_max_m_s=900.0)
Traceback (most recent call last):
...
ValueError: wave_speed_min_m_s = 1500.0 must be below wave_speed_max_m_s = 900.0; swap them or widen the range
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

__all__ = ["DetectionParams"]


@dataclass(frozen=True)
class DetectionParams:
    """Every threshold of the detector, in SI units, with defaults.

    Parameters
    ----------
    min_amplitude_pa : float
        Smallest excursion from the baseline that counts as a surge event [Pa]
        (config ``min_amplitude_kpa``).
    min_rate_pa_s : float
        Smallest rate of change that triggers on its own, whatever the noise [Pa/s]
        (config ``min_rate_kpa_s``).
    noise_multiple : float
        Trigger when the change over the rate window exceeds this many noise standard
        deviations of that change [-] (config ``noise_multiple``).
    rate_window_s : float
        Span over which the rate trigger differences the signal [s]; at least one sample.
    excursion_window_s : float
        Span of the robust (block-median) baseline that the excursion trigger compares
        with [s].
    block_s : float
        Block length of the cheap pass: noise and baseline are estimated per block [s].
    noise_blocks : int
        Number of blocks in the rolling median that smooths the per-block noise level [-].
    merge_gap_s : float
        Exceedances on one sensor closer than this belong to one episode [s].
    max_event_s : float
        Longest analysis span after an onset [s]; longer activity is split.
    pre_event_s : float
        Quiet span before a trigger used for the baseline, the noise and the drift [s].
    pick_window_s : float
        Half-width of the window handed to the onset picker around a trigger [s].
    settle_tolerance_pa : float
        Absolute band around the final level within which the pressure counts as settled
        [Pa]; the band is never narrower than ``settle_noise_multiple`` noise deviations.
    settle_noise_multiple : float
        Noise multiple of the settle band [-].
    settle_fraction : float
        A final level within this fraction of the first-front amplitude of the old level
        counts as "returned" [-]; further off it counts as a new level.
    wave_speed_min_m_s, wave_speed_max_m_s : float
        Plausible range of wave speeds for associating arrivals across sensors [m/s].
    association_slack_s : float
        Extra time allowed on top of the travel time when associating arrivals [s].
    unsynchronised_clock_s : float
        Clock tolerance for channels whose clock is not synchronised [s].
    source_tolerance_s : float
        Arrival times fit a candidate source (pump station, valve) when every residual is
        within this plus two onset uncertainties [s].
    wave_speed_tolerance_fraction : float
        Relative uncertainty of the layout's wave speeds when fitting a source's arrival
        pattern [-] (config ``wave_speed_tolerance_percent``).
    late_pick_fraction : float
        A pick may lie late against the source fit by this share of the front's rise
        time (onset to first peak) [-]: a gradual front leaves the noise after it leaves
        the baseline (config ``late_pick_percent``).
    asset_distance_m : float
        A source located within this distance of an asset is attributed to it [m].
    severity_margin_fraction : float
        Warning when a pressure is within this fraction of the allowable (or minimum)
        pressure, critical when outside [-].
    spike_max_samples : int
        Excursions no longer than this many samples that return to the old level are
        treated as spikes, not surges [-].
    flatline_min_s : float
        A channel that repeats one value for this long after having shown noise is
        reported as a sensor fault [s].
    context_tolerance_s : float
        A SCADA run-signal or flow change within this time of the onset confirms a cause [s].
    min_flow_step_fraction : float
        Relative flow change that counts as a step in a flow channel [-].
    rate_resolution_s : float
        Span of the difference that measures the maximum rate of rise or fall [s]; at least
        one sample.
    slow_interval_s : float
        Sampling at or slower than this is "slow": the notes say what it cannot resolve [s].
    vapour_pressure_gauge_pa : float
        Gauge pressure of vapour, the physical floor of any reading [Pa]
        (about -99 kPa at 10 C and sea-level atmosphere).
    cycle_bin_pa : float
        Width of the range bins of the stored pressure-cycle counts [Pa].
    cycle_gate_pa : float
        Smallest reversal the cycle counting keeps [Pa]; at least ``noise_multiple`` noise
        deviations of the sensor are used (the hysteresis gate of :mod:`detectors.cycles`).
    cusum_drift_sigmas : float
        Reference value (drift allowance) of the CUSUM that times a gradual front, in noise
        deviations of the pre-event samples [-] (:mod:`detectors.changepoint`).
    inline_head_tolerance_m : float
        Either side of an in-line valve or pump station, a first front and a difference of
        steady heads count only beyond this [m] (:mod:`detectors.sides`).
    """

    min_amplitude_pa: float = 20e3
    min_rate_pa_s: float = 50e3
    noise_multiple: float = 8.0
    rate_window_s: float = 0.2
    excursion_window_s: float = 60.0
    block_s: float = 2.0
    noise_blocks: int = 15
    merge_gap_s: float = 30.0
    max_event_s: float = 600.0
    pre_event_s: float = 20.0
    pick_window_s: float = 2.0
    settle_tolerance_pa: float = 5e3
    settle_noise_multiple: float = 4.0
    settle_fraction: float = 0.25
    wave_speed_min_m_s: float = 200.0
    wave_speed_max_m_s: float = 1600.0
    association_slack_s: float = 0.5
    unsynchronised_clock_s: float = 5.0
    source_tolerance_s: float = 0.05
    wave_speed_tolerance_fraction: float = 0.10
    late_pick_fraction: float = 0.25
    asset_distance_m: float = 150.0
    severity_margin_fraction: float = 0.10
    spike_max_samples: int = 3
    flatline_min_s: float = 30.0
    context_tolerance_s: float = 10.0
    min_flow_step_fraction: float = 0.2
    rate_resolution_s: float = 0.05
    slow_interval_s: float = 1.0
    vapour_pressure_gauge_pa: float = -99.0e3
    cycle_bin_pa: float = 50e3
    cycle_gate_pa: float = 5e3
    cusum_drift_sigmas: float = 0.5
    inline_head_tolerance_m: float = 0.5

    def __post_init__(self) -> None:
        for f in fields(self):
            value = getattr(self, f.name)
            if not isinstance(value, (int, float)) or isinstance(value, bool):
                raise ValueError(f"{f.name} = {value!r} must be a number")
            if not math.isfinite(value):
                raise ValueError(f"{f.name} = {value!r} must be finite")
            if f.name in _MAY_BE_ZERO_OR_NEGATIVE:
                continue
            if f.name in _MAY_BE_ZERO:
                if value < 0:
                    raise ValueError(f"{f.name} = {value!r} must be at least 0")
            elif value <= 0:
                raise ValueError(f"{f.name} = {value!r} must be above 0; give a positive value")
        if self.wave_speed_min_m_s >= self.wave_speed_max_m_s:
            raise ValueError(
                f"wave_speed_min_m_s = {self.wave_speed_min_m_s!r} must be below "
                f"wave_speed_max_m_s = {self.wave_speed_max_m_s!r}; swap them or widen the range"
            )
        if self.noise_blocks < 3:
            raise ValueError(f"noise_blocks = {self.noise_blocks!r} must be at least 3")
        if not 0 < self.settle_fraction < 1:
            raise ValueError(f"settle_fraction = {self.settle_fraction!r} must lie in (0, 1)")
        if self.pre_event_s < 4 * self.rate_window_s:
            raise ValueError(
                f"pre_event_s = {self.pre_event_s!r} must be at least 4 rate windows "
                f"({4 * self.rate_window_s} s) so the noise before a trigger can be measured"
            )

    @property
    def severity_margin(self) -> float:
        """Alias of :attr:`severity_margin_fraction` [-]."""
        return self.severity_margin_fraction


_MAY_BE_ZERO = {"association_slack_s", "late_pick_fraction", "severity_margin_fraction", "source_tolerance_s",
                "inline_head_tolerance_m"}
_MAY_BE_ZERO_OR_NEGATIVE = {"vapour_pressure_gauge_pa"}
