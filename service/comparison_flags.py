"""Rows and flags of a model comparison, and the design-scenario envelope check.

Every flag names the asset (a pipe, or the system for a system-wide finding) and says what
a person should check. These are screening findings: ratings and allowances follow local
codes, manufacturers' data and the judgement of a licensed engineer.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

from models.layout import SystemLayout

__all__ = ["ScenarioEnvelope", "field_worse_flags", "envelope_flags", "mismatch_flag",
           "not_compared_flag", "where", "DEFAULT_ENVELOPE_FLOOR_KPA"]

#: Smallest excess over the design worst case that is flagged [kPa] (common practice:
#: a few kPa is within logger accuracy and model noise).
DEFAULT_ENVELOPE_FLOOR_KPA = 5.0


@dataclass(frozen=True)
class ScenarioEnvelope:
    """Extreme gauge pressures of one design scenario with the calibrated parameters [kPa]."""

    scenario: str
    sensor_max_kpa: dict
    sensor_min_kpa: dict
    pipe_max_kpa: dict
    pipe_min_kpa: dict


def where(layout: SystemLayout, sensor_id: str) -> str:
    """A sensor with its pipe and chainage, for messages."""
    site = layout.sensor(sensor_id)
    return f"{sensor_id} (pipe {site.pipe_id}, chainage {site.offset_m:.0f} m)"


def field_worse_flags(layout: SystemLayout, sensor_id: str, row: Mapping[str, float],
                      baseline_kpa: float, tolerance_percent: float,
                      skip: tuple[str, ...] = ()) -> list[dict]:
    """Flags where the measured peak or trough is worse than the model's by more than the
    tolerance, in percent of the model's surge amplitude (its larger excursion from the
    pre-event level, up or down; at least 1 kPa). ``skip`` names the extremes (``"max"``,
    ``"min"``) not compared: a modelled extreme that is not converged
    (:mod:`service.comparison_convergence`)."""
    flags = []
    site = layout.sensor(sensor_id)
    checks = (("max", row["measured_max_kpa"] - row["model_max_kpa"],
               row["model_max_kpa"] - baseline_kpa, "above", "upsurge"),
              ("min", row["model_min_kpa"] - row["measured_min_kpa"],
               baseline_kpa - row["model_min_kpa"], "below", "downsurge"))
    scale = max(max(c[2] for c in checks), 1.0)
    for which, excess, _, word, surge in checks:
        if which not in skip and excess > tolerance_percent / 100.0 * scale:
            measured = row[f"measured_{which}_kpa"]
            flags.append(dict(asset_id=site.pipe_id, kind="field_worse_than_model",
                              severity="warning", message=(
                f"{where(layout, sensor_id)}: measured {surge} to {measured:.0f} kPa is "
                f"{excess:.0f} kPa {word} the calibrated model's {row[f'model_{which}_kpa']:.0f} kPa "
                f"({100 * excess / scale:.0f} % of the modelled surge; tolerance "
                f"{tolerance_percent:.0f} %). The field behaves worse than the model: check for "
                "trapped air at high points, a valve closing faster than configured, a failed or "
                "slamming check valve, and whether the system file misses a branch or a device.")))
    return flags


def mismatch_flag(layout: SystemLayout, sensor_id: str, rmse_kpa: float, span_kpa: float,
                  max_rms_percent: float) -> dict | None:
    """A flag when the calibrated model's RMS error is above its limit (percent of range)."""
    if span_kpa <= 0 or 100 * rmse_kpa / span_kpa <= max_rms_percent:
        return None
    return dict(asset_id=layout.sensor(sensor_id).pipe_id, kind="model_mismatch",
                severity="warning", message=(
        f"The calibrated model does not reproduce the event at {where(layout, sensor_id)}: RMS "
        f"error {rmse_kpa:.0f} kPa is {100 * rmse_kpa / span_kpa:.0f} % of the measured range "
        f"{span_kpa:.0f} kPa (limit {max_rms_percent:.0f} %). No wave speed or friction explains "
        "the shape: check the system file for a missing branch, a closed or open valve, a leak "
        "or an air pocket near the sensor, and the logger's position."))


def _worst_case(envelopes: Sequence[ScenarioEnvelope], sensor_id: str, upper: bool):
    values = [((e.sensor_max_kpa if upper else e.sensor_min_kpa).get(sensor_id), e.scenario)
              for e in envelopes]
    values = [(v, name) for v, name in values if v is not None]
    if not values:
        return None
    return max(values) if upper else min(values)


def envelope_flags(layout: SystemLayout, rows: Sequence[Mapping], baselines_kpa: Mapping[str, float],
                   envelopes: Sequence[ScenarioEnvelope], tolerance_percent: float,
                   floor_kpa: float = DEFAULT_ENVELOPE_FLOOR_KPA) -> list[dict]:
    """At most one flag per sensor whose field peak or trough is beyond every design scenario.

    For each sensor the worst case over all design scenarios is taken (highest maximum,
    lowest minimum); the field value must pass it by more than ``tolerance_percent`` of the
    worst case's surge amplitude (its excursion from the sensor's pre-event level), and by
    at least ``floor_kpa``. When every compared sensor passes it, one system-wide flag
    replaces the per-sensor ones.
    """
    if not envelopes:
        return []
    beyond: list[tuple[str, str]] = []
    for row in rows:
        s = row["sensor_id"]
        base = baselines_kpa.get(s)
        if row.get("measured_max_kpa") is None or base is None:
            continue
        parts = []
        for upper, key, word in ((True, "measured_max_kpa", "above"),
                                 (False, "measured_min_kpa", "below")):
            worst = _worst_case(envelopes, s, upper)
            if worst is None:
                continue
            design, scenario = worst
            excess = (row[key] - design) if upper else (design - row[key])
            allowance = max(tolerance_percent / 100.0 * abs(design - base), floor_kpa)
            if excess > allowance:
                parts.append(f"{'reached' if upper else 'fell to'} {row[key]:.0f} kPa, "
                             f"{excess:.0f} kPa {word} the design worst case {design:.0f} kPa "
                             f"(scenario {scenario}; tolerance {allowance:.0f} kPa)")
        if parts:
            beyond.append((s, " and ".join(parts)))
    compared = [r for r in rows if r.get("measured_max_kpa") is not None]
    advice = ("The field event was worse than the worst case the model predicts for the "
              "configured design scenarios: review the surge protection design with this event, "
              "and check the scenarios in the system file (pump inertia, valve stroke, "
              "check-valve behaviour) against the station's records.")
    if len(compared) >= 2 and len(beyond) == len(compared):
        detail = "; ".join(f"{where(layout, s)} {text}" for s, text in beyond)
        return [dict(asset_id=layout.system_id, kind="beyond_design_envelope", severity="warning",
                     message=f"Every compared logger of {layout.system_id} was beyond the design "
                             f"envelope: {detail}. {advice}")]
    return [dict(asset_id=layout.sensor(s).pipe_id, kind="beyond_design_envelope",
                 severity="warning", message=f"{where(layout, s)} {text}. {advice}")
            for s, text in beyond]


def not_compared_flag(asset_id: str, reason: str, check: str) -> dict:
    """The one info flag of an event the model is not compared with, saying why."""
    return dict(asset_id=asset_id, kind="model_not_compared", severity="info", message=(
        f"No model comparison for this event at {asset_id}: {reason}. The measured peaks stand "
        f"on their own; {check}"))
