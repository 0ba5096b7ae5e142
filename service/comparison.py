"""Field against model: replay each event, calibrate the MOC model on it, compare peaks.

:func:`compare_event` is what the per-event analysis calls. For one detected event it

1. decides whether the model can represent the event at all: a suspected burst or a faulty
   sensor is not compared (the model has no burst at the located point, and a fault is
   not hydraulics); nor is an event whose source stays inside the modelled part after the
   cut, or was not located. Such an event gets one ``model_not_compared`` info flag saying
   why. A line valve with loggers on both sides is replayed on one side
   (:func:`service.comparison_sensors.one_side_of_source`): driven at a logger with loggers
   beyond it, away from the valve; the loggers on the valve's side get measured-only rows;
2. picks the loggers (:mod:`service.comparison_sensors`): never a channel whose clock is
   not synchronised or whose rate cannot resolve the event; the driving sensor is the
   highest-rate usable logger nearest the event's source or a boundary;
3. cuts the system's MOC model there (:func:`models.replay.cut_network_at`) and imposes the
   measured head; the initial flow comes from a flow column on the cut pipe, else from
   the pre-event head drop to another logger on the same run of pipe and friction, else
   from the configured boundaries;
4. calibrates on a copy decimated to the calibration step, from the current calibration,
   within a budget of model runs (:func:`models.calibrate.calibrate_in_stages`: one factor,
   then k only when it helps, then per pipe only when the loggers separate the pipes and
   the budget allows), then reruns the calibrated model at ``model_steps_per_sample``
   steps per sample of the driving logger and compares each logger at its own sample
   times (the model interpolated onto them);
5. returns one ``model_comparisons`` row per logger and the flags (field worse than the
   model, a model that cannot reproduce the event, a refused fit, a field peak beyond the
   worst design scenario; :mod:`service.comparison_flags`).

These are screening findings: the model is only as good as the system file; ratings and
allowances follow local codes, manufacturers' data and the judgement of a licensed engineer.

Settings read (with defaults where the config has no key): ``peak_tolerance_percent``
(10), ``pre_event_s`` (2), ``window_s`` (60), ``max_rms_percent`` (15),
``calibration_reaches`` (48), ``envelope`` (True), ``max_model_runs`` (120),
``min_samples_per_travel`` (10), ``envelope_floor_kpa`` (5), ``model_steps_per_sample`` (4).

A compared run that forms vapour cavities is run again at twice the steps per sample; a
logger's modelled peak or trough whose step error, estimated from the two runs, exceeds the
peak tolerance is not compared with the field (:mod:`service.comparison_convergence`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Mapping

import numpy as np

from detectors.traces import SensorTrace
from models.calibrate import CalibrationOptions, CalibrationResult, calibrate_in_stages
from models.layout import SystemLayout
from models.moc import choose_time_step
from models.moc_layout import transient_friction_factor
from models.network import Network
from models.replay import ReplayModel, block_mean
from models.steady import solve_steady_state

from .comparison_convergence import cavity_caution, unconverged_extremes, unconverged_note
from .comparison_envelope import design_envelopes
from .comparison_flags import (DEFAULT_ENVELOPE_FLOOR_KPA, ScenarioEnvelope, envelope_flags,
                               field_worse_flags, mismatch_flag, not_compared_flag)
from .comparison_replay import (cut_at, filled, initial_flow, inside_reason, in_line_valve,
                                own_samples, window_series)
from .comparison_sensors import choose_sensors, one_side_of_source, separable_pipes

__all__ = ["ComparisonOutcome", "ScenarioEnvelope", "compare_event", "design_envelopes",
           "field_worse_flags", "envelope_flags", "DEFAULT_MAX_MODEL_RUNS",
           "DEFAULT_MODEL_STEPS_PER_SAMPLE"]

KPA = 1000.0
NS = 1e-9
DEFAULT_MAX_MODEL_RUNS = 120
#: Model steps per driving sample in the final, compared run (common practice: a peak
#: between two model steps is missed by up to the change over one step, so the compared
#: run is finer than the data it is compared with).
DEFAULT_MODEL_STEPS_PER_SAMPLE = 4
_TOO_FEW = ("too few sensors: only {drive} has fast, synchronised data over the event, and a "
            "replay needs a second pressure logger in the modelled part of the system")
NOT_MODELLED = {
    "burst_suspected": ("the model has no burst at the located point, so a replay would show "
                        "the burst's pressure drop as a field-worse-than-model difference",
                        "check the main near the located point for a burst or a large new leak"),
    "sensor_fault": ("the event was seen by one sensor only and looks like a sensor fault",
                     "check the logger and its tapping"),
}


@dataclass(frozen=True, eq=False)
class ComparisonOutcome:
    """What the comparison found for one event.

    ``rows`` are ``model_comparisons`` rows (column -> value), ``flags`` are ``flags`` rows
    (asset_id, kind, severity, message), ``calibration`` the fit (None when no replay was
    possible), ``envelopes`` the design scenarios.
    """

    rows: tuple
    flags: tuple
    calibration: CalibrationResult | None
    driving_sensor: str | None
    envelopes: tuple = ()
    notes: tuple = ()
    n_model_runs: int = 0


def _system_network(system: Any) -> Network | None:
    """The system's MOC network in its normal running state."""
    from .model_builder import build_network

    return build_network(system)


def _setting(settings: Any, name: str, default):
    value = getattr(settings, name, None) if settings is not None else None
    return default if value is None else value


def _time_step(network: Network, target_s: float) -> float:
    """Largest step <= target whose whole-reach fit stays within 0.2, 0.5 or 1 % of each speed."""
    for limit in (0.002, 0.005, 0.01):
        try:
            return choose_time_step(network, target_s, limit)
        except ValueError:
            continue
    raise ValueError("no calibration time step fits every pipe within 1 % of its wave speed")


def _with_speeds(cut_network: Network, speeds: Mapping[str, float]) -> Network:
    return cut_network.replace(pipes=[replace(q, wave_speed_m_s=speeds[q.id.split("#beyond")[0]])
                                      for q in cut_network.pipes])


def _measured_only_rows(event, sensors, status: str, reason: str) -> list[dict]:
    """Rows with the measured peaks only, for events the model did not reproduce."""
    observed = {o.sensor_id: o for o in event.observations}
    rows = []
    for s in sensors:
        o = observed.get(s)
        rows.append(dict(sensor_id=s, measured_max_kpa=o.max_pa / KPA if o else None,
                         model_max_kpa=None, measured_min_kpa=o.min_pa / KPA if o else None,
                         model_min_kpa=None, rmse_kpa=None, wave_speed_m_s=None,
                         friction_factor=None, fit_status=status, notes=reason))
    return rows


def _not_compared(layout, event, sensors, asset, reason, check, notes=()) -> ComparisonOutcome:
    rows = _measured_only_rows(event, sensors, "not_compared", reason)
    return ComparisonOutcome(tuple(rows), (not_compared_flag(asset, reason, check),), None, None,
                             (), tuple(notes) + (reason,))


def _refusal(layout, event, sensors, drive, reason, result=None, notes=()) -> ComparisonOutcome:
    rows = _measured_only_rows(event, sensors, "refused", reason)
    asset = layout.sensor(drive).pipe_id if drive else layout.pipes[0].id
    flag = dict(asset_id=asset, kind="model_fit_refused", severity="info", message=(
        f"The MOC model was not calibrated on this event: {reason}. The measured peaks stand "
        "on their own; no model comparison or design envelope was made. Check the loggers' "
        "data over the event and the system file."))
    return ComparisonOutcome(tuple(rows), (flag,), result, drive, (), tuple(notes) + (reason,),
                             result.n_model_runs if result else 0)


def _source_asset(layout: SystemLayout, event: Any) -> str:
    source = getattr(event, "source_node", None)
    if source:
        return source
    origin = getattr(event, "origin_sensor", None)
    try:
        return layout.sensor(origin).pipe_id
    except KeyError:
        return layout.system_id


def compare_event(system: Any, layout: SystemLayout, event: Any,
                  traces: Mapping[str, SensorTrace], settings: Any = None, *,
                  network: Network | None = None,
                  scenario_networks: Mapping[str, tuple[Network, float]] | None = None
                  ) -> ComparisonOutcome:
    """Replay one event, calibrate, compare and flag (see the module docstring).

    Parameters
    ----------
    system : service.config_schema.SystemConfig
    layout : SystemLayout
        With the current wave-speed calibration (the fit starts from it).
    event : detectors.events.DetectedEvent
    traces : mapping sensor id -> SensorTrace
        The window's traces (gauge Pa, flows m^3/s).
    settings : service.config_schema.ComparisonSettings
        See the module docstring for the keys read.
    network, scenario_networks : optional
        The system's MOC network and its design scenarios; built from ``system`` if omitted.
    """
    kind = getattr(event, "kind", "")
    observed = [o.sensor_id for o in event.observations]
    if kind in NOT_MODELLED:
        reason, check = NOT_MODELLED[kind]
        where_text = getattr(event, "source_description", "")
        return _not_compared(layout, event, observed, _source_asset(layout, event),
                             reason + (f" ({where_text})" if where_text else ""), check)
    pre_ns = int(_setting(settings, "pre_event_s", 2.0) / NS)
    start_ns = int(event.start_time_ns) - pre_ns
    stop_ns = min(int(event.end_time_ns), int(event.start_time_ns) + int(
        _setting(settings, "window_s", 60.0) / NS))
    stop_ns = max(stop_ns, int(event.start_time_ns) + pre_ns)
    network = network or _system_network(system)
    if network is None:
        return _refusal(layout, event, [], None, "no MOC model of the system is available "
                        "(the model builder did not provide one)")
    rho_g = network.fluid.density_kg_m3 * network.fluid.gravity_m_s2
    choice = choose_sensors(layout, event, traces, start_ns, stop_ns,
                            float(_setting(settings, "min_samples_per_travel", 10.0)))
    left_out = [f"{s} not used: {why}" for s, why in sorted(choice.excluded.items())]
    if choice.drive is None:
        return _refusal(layout, event, [], None, "no clock-synchronised pressure logger with "
                        "data over the event window resolves it", notes=left_out)
    drive, candidates = choice.drive, list(choice.targets)
    if not candidates:
        return _refusal(layout, event, [drive], drive, _TOO_FEW.format(drive=drive),
                        notes=left_out)
    head0 = {s: float(np.nanmedian(window_series(traces[s], start_ns, start_ns + pre_ns)[1]))
             / rho_g + layout.sensor(s).elevation_m for s in [drive] + candidates}
    cut = cut_at(network, layout, drive, candidates, head0[drive])
    source = getattr(event, "source_node", None)
    source_side: tuple = ()
    if source is not None and source in {n.id for n in cut.network.nodes} and \
            in_line_valve(layout, source):
        side = one_side_of_source(layout, source, [drive] + candidates, traces)
        if side is not None:
            drive, candidates, source_side = side.drive, list(side.targets), side.source_side
            left_out.append(f"one side of line valve {source} replayed: the side beyond {drive}")
            left_out += [f"{s} not compared: it lies on the {source} side of {drive}, and the "
                         f"replay covers only the side beyond {drive}" for s in source_side]
            cut = cut_at(network, layout, drive, candidates, head0[drive])
    if source is None or source in {n.id for n in cut.network.nodes}:
        return _not_compared(layout, event, [drive] + candidates, _source_asset(layout, event),
                             inside_reason(layout, source, drive),
                             "compare by hand with a scenario of this event, or add a "
                             "synchronised logger between the source and the rest of the main",
                             notes=left_out)
    dsite = layout.sensor(drive)
    t_drive, p_drive = window_series(traces[drive], start_ns, stop_ns)
    interval = float(np.median(np.diff(t_drive)))
    probes, targets = [], []
    for s in candidates:
        site = layout.sensor(s)
        try:
            probes.append(cut.probe(s, site.pipe_id, site.offset_m))
            targets.append(s)
        except ValueError:
            continue
    if not targets:
        return _refusal(layout, event, [drive], drive, _TOO_FEW.format(drive=drive),
                        notes=left_out)
    heads_drive = filled(p_drive) / rho_g + dsite.elevation_m
    measured = np.column_stack([
        np.interp(t_drive, *window_series(traces[s], start_ns, stop_ns), left=np.nan,
                  right=np.nan) / rho_g + layout.sensor(s).elevation_m for s in targets])
    flow, flow_note = initial_flow(layout, cut, drive, traces, start_ns, pre_ns,
                                    {s: head0[s] for s in [drive] + targets})
    original = sorted({p.id.split("#beyond")[0] for p in cut.network.pipes})
    speeds = {p: layout.pipe(p).wave_speed_m_s for p in original}
    steady = solve_steady_state(cut.network)
    # the factor the forward model marches with: a pipe at rest in the steady state (a
    # dead-end spur, a pipe behind a closed valve) has the laminar factor of Re ~ 0 there,
    # which as a calibration start would be far too large (and not a Darcy factor at all)
    friction = {p: transient_friction_factor(cut.network, cut.network.pipe(cut.sub_pipe_ids(p)[0]),
                                             steady) for p in original}
    trial = _with_speeds(cut.network, speeds)
    reaches = int(_setting(settings, "calibration_reaches", 48))
    shortest = min(p.length_m / p.wave_speed_m_s for p in trial.pipes)
    dt = _time_step(trial, max(interval, shortest / reaches))
    dec = max(1, int(round(dt / interval)))
    tb, hb = block_mean(t_drive, heads_drive, dec)
    tt, ht = block_mean(t_drive, measured, dec)
    keep = tt <= tb[-1]
    coarse = ReplayModel(cut, tb, hb, tuple(probes), tt[keep], dict(speeds), dict(friction),
                         flow, dt)
    fitted = separable_pipes(layout, drive, targets)
    budget = int(_setting(settings, "max_model_runs", DEFAULT_MAX_MODEL_RUNS))
    options = CalibrationOptions(max_model_runs=budget)
    result = calibrate_in_stages(coarse, ht[keep], coarse, ht[keep], fitted_pipes=fitted,
                                 options=options)
    notes = [f"driving sensor {drive}", *left_out, f"initial flow from {flow_note}",
             f"calibrated on a copy decimated to {dec * interval:.4g} s (model step {dt:.4g} s)"]
    if not fitted:
        notes.append("one wave-speed factor: the loggers cannot separate the pipes' speeds")
    if not result.converged:
        return _refusal(layout, event, [drive] + targets, drive, result.reason, result, notes)
    final_speeds = dict(result.wave_speed_m_s)
    steps = int(_setting(settings, "model_steps_per_sample", DEFAULT_MODEL_STEPS_PER_SAMPLE))
    final_dt = _time_step(_with_speeds(cut.network, final_speeds), interval / steps)
    notes.append(f"compared with a run at model step {final_dt:.4g} s ({interval / final_dt:.1f} "
                 "steps per driving sample), each logger at its own sample times")
    final = ReplayModel(cut, t_drive, heads_drive, tuple(probes), t_drive, final_speeds,
                        dict(friction), flow, final_dt)
    own = [own_samples(traces[s], start_ns, stop_ns, t_drive[-1], rho_g,
                        layout.sensor(s).elevation_m) for s in targets]
    modelled = final.predict_at([t for t, _ in own], final_speeds, result.friction_factor,
                                result.unsteady_coefficient,
                                interpolate=result.mode == "per_pipe")
    measured = [h for _, h in own]
    caution = cavity_caution(final.cavity_pipes)
    finer_runs, finer_modelled, steps_pair = 0, None, (interval / final_dt, math.nan)
    if caution:
        notes.append(caution)
        finer_dt = _time_step(_with_speeds(cut.network, final_speeds), final_dt / 2.0)
        finer = ReplayModel(cut, t_drive, heads_drive, tuple(probes), t_drive, final_speeds,
                            dict(friction), flow, finer_dt)
        finer_modelled = finer.predict_at([t for t, _ in own], final_speeds,
                                          result.friction_factor, result.unsteady_coefficient,
                                          interpolate=result.mode == "per_pipe")
        finer_runs, steps_pair = finer.runs, (interval / final_dt, interval / finer_dt)
        notes.append(f"run again at model step {finer_dt:.4g} s ({steps_pair[1]:.1f} steps per "
                     "driving sample) to see whether the modelled peaks hold")
    envelopes = ()
    if _setting(settings, "envelope", True):
        envelopes = design_envelopes(system, layout, network, result, scenario_networks)
    rows, flags = _rows_and_flags(layout, drive, heads_drive, targets, measured, modelled, head0,
                                  rho_g, result, settings, envelopes, notes, caution,
                                  finer_modelled, steps_pair)
    if source_side:
        rows += _measured_only_rows(event, source_side, "not_compared", (
            f"on the {source} side of the driving logger {drive}: the replay of an in-line "
            "source covers only the side beyond the driving logger"))
    return ComparisonOutcome(tuple(rows), tuple(flags), result, drive, envelopes, tuple(notes),
                             result.n_model_runs + final.runs + finer_runs)


def _rows_and_flags(layout, drive, drive_heads_m, targets, measured, modelled, head0, rho_g,
                    result, settings, envelopes, notes, caution="", finer=None,
                    steps_pair=(math.nan, math.nan)):
    rows, flags, baselines = [], [], {}
    tolerance = float(_setting(settings, "peak_tolerance_percent", 10.0))
    max_rms = float(_setting(settings, "max_rms_percent", 15.0))
    summary = (f"{result.mode} fit, wave-speed factor {result.wave_speed_factor:.4f}, friction "
               f"x{result.friction_scale:.3f} +- {result.friction_scale_uncertainty:.2g}, unsteady "
               f"k {result.unsteady_coefficient:.4f}, {result.n_model_runs} model runs")
    for j, s in enumerate(targets):
        site = layout.sensor(s)
        z = site.elevation_m
        meas_p, model_p = (measured[j] - z) * rho_g, (modelled[j] - z) * rho_g
        base_kpa = (head0[s] - z) * rho_g / KPA
        baselines[s] = base_kpa
        ok = np.isfinite(meas_p) & np.isfinite(model_p)
        rmse = float(np.sqrt(np.mean((meas_p[ok] - model_p[ok]) ** 2))) / KPA
        row = dict(sensor_id=s, measured_max_kpa=float(np.max(meas_p[ok])) / KPA,
                   model_max_kpa=float(np.max(model_p[ok])) / KPA,
                   measured_min_kpa=float(np.min(meas_p[ok])) / KPA,
                   model_min_kpa=float(np.min(model_p[ok])) / KPA, rmse_kpa=rmse,
                   wave_speed_m_s=float(result.wave_speed_m_s[site.pipe_id]),
                   friction_factor=float(result.friction_factor[site.pipe_id]),
                   fit_status="converged")
        note = [summary, f"wave speed +- {result.wave_speed_uncertainty_m_s[site.pipe_id]:.1f} m/s"]
        for env in envelopes:
            rise = env.sensor_max_kpa.get(s, math.nan) - base_kpa
            if rise > 0:
                note.append(f"measured rise is {100 * (row['measured_max_kpa'] - base_kpa) / rise:.0f} % "
                            f"of design scenario {env.scenario}")
        if caution:
            note.append(caution)
        moved = {}
        if finer is not None:
            moved = unconverged_extremes(model_p / KPA, (finer[j] - z) * rho_g / KPA, base_kpa,
                                         tolerance)
            note.append(unconverged_note(moved, steps_pair, tolerance) or
                        f"modelled peak and trough settled within the {tolerance:g} % tolerance "
                        f"(checked at {steps_pair[1]:.1f} steps per driving sample)")
        row["notes"] = "; ".join(note)
        rows.append(row)
        worse = field_worse_flags(layout, s, row, base_kpa, tolerance, skip=tuple(moved))
        flags += [dict(f, message=f["message"] + f" Note: {caution}.") if caution else f
                  for f in worse]
        flag = mismatch_flag(layout, s, rmse, row["measured_max_kpa"] - row["measured_min_kpa"],
                             max_rms)
        if flag is not None:
            flags.append(flag)
    dsite = layout.sensor(drive)
    drive_p = (drive_heads_m - dsite.elevation_m) * rho_g / KPA
    baselines[drive] = (head0[drive] - dsite.elevation_m) * rho_g / KPA
    rows.insert(0, dict(sensor_id=drive, measured_max_kpa=float(np.max(drive_p)),
                        model_max_kpa=None, measured_min_kpa=float(np.min(drive_p)),
                        model_min_kpa=None, rmse_kpa=None,
                        wave_speed_m_s=float(result.wave_speed_m_s.get(dsite.pipe_id, math.nan)),
                        friction_factor=float(result.friction_factor.get(dsite.pipe_id, math.nan)),
                        fit_status="driving", notes="drives the model; " + "; ".join(notes)))
    flags += envelope_flags(layout, rows, baselines, envelopes, tolerance,
                            float(_setting(settings, "envelope_floor_kpa",
                                           DEFAULT_ENVELOPE_FLOOR_KPA)))
    return rows, flags
