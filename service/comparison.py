"""Field against model: replay each event, calibrate the MOC model on it, compare peaks.

:func:`compare_event` is what the per-event analysis calls. For one detected event it

1. picks the driving sensor: the pressure logger nearest the event's source (a pump station
   or valve), else nearest a pump station or reservoir, with data over the whole window;
2. cuts the system's MOC model there (:func:`models.replay.cut_network_at`) and imposes the
   measured head; the initial flow comes from a flow column on the cut pipe, else from the
   pre-event head drop to another logger on the same run of pipe and friction, else from
   the configured boundaries;
3. calibrates wave speeds and friction against the other loggers
   (:func:`models.calibrate.calibrate_in_stages`) on a copy decimated to the calibration
   step (block means), then reruns the calibrated model at the logging rate;
4. returns one ``model_comparisons`` row per sensor, the flags (field worse than the model
   by more than ``peak_tolerance_percent``, a model that cannot reproduce the event, a fit
   that was refused, a field peak beyond the design envelope) and the envelope of the
   configured design scenarios run with the calibrated parameters.

These are screening findings: the model is only as good as the system file; ratings and
allowances follow local codes, manufacturers' data and the judgement of a licensed engineer.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Mapping

import numpy as np

from detectors.traces import SensorTrace
from models.calibrate import CalibrationOptions, CalibrationResult, calibrate_in_stages
from models.layout import SystemLayout
from models.moc import MocModel, choose_time_step
from models.moc_results import Probe
from models.network import Network
from models.replay import InitialFlow, ReplayModel, block_mean, cut_network_at
from models.steady import solve_steady_state


__all__ = ["ComparisonOutcome", "ScenarioEnvelope", "compare_event", "design_envelopes",
           "field_worse_flags"]

KPA = 1000.0
NS = 1e-9


@dataclass(frozen=True)
class ScenarioEnvelope:
    """Extreme gauge pressures of one design scenario with the calibrated parameters [kPa]."""

    scenario: str
    sensor_max_kpa: dict
    sensor_min_kpa: dict
    pipe_max_kpa: dict
    pipe_min_kpa: dict


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


def _system_scenarios(system: Any) -> dict:
    """Design scenarios as (network, duration) from the model builder."""
    from .model_builder import scenario_network

    return {sc.name: (scenario_network(system, sc.name), sc.duration_s)
            for sc in getattr(system, "scenarios", ()) if sc.design}


def _setting(settings: Any, name: str, default):
    return getattr(settings, name, default) if settings is not None else default


def _where(layout: SystemLayout, sensor_id: str) -> str:
    site = layout.sensor(sensor_id)
    return f"{sensor_id} (pipe {site.pipe_id}, chainage {site.offset_m:.0f} m)"


def _window_series(trace: SensorTrace, start_ns: int, stop_ns: int):
    take = (trace.times_ns >= start_ns) & (trace.times_ns <= stop_ns)
    return (trace.times_ns[take] - start_ns) * NS, trace.values[take]


def _covers(trace: SensorTrace, start_ns: int, stop_ns: int, max_gap_fraction: float) -> bool:
    if len(trace) < 8 or trace.times_ns[0] > start_ns or trace.times_ns[-1] < stop_ns:
        return False
    _, values = _window_series(trace, start_ns, stop_ns)
    return values.size > 8 and float(np.mean(~np.isfinite(values))) <= max_gap_fraction


def _driving_sensor(layout: SystemLayout, event: Any, candidates: list[str]) -> str:
    source = getattr(event, "source_node", None)
    targets = [source] if source and layout.node(source).kind in ("pump_station", "valve") else []
    targets = targets or [n.id for n in layout.nodes if n.kind in ("pump_station", "reservoir")]
    return min(candidates, key=lambda s: min(layout.distance_from_node_m(s, n) for n in targets))


def _filled(values: np.ndarray) -> np.ndarray:
    good = np.isfinite(values)
    index = np.arange(values.size)
    return np.interp(index, index[good], values[good])


def _initial_flow(layout, system, cut, drive: str, traces, start_ns, pre_ns, heads0: dict):
    """Measured flow on the cut pipe, else the head drop along one run of pipe, else config."""
    site = layout.sensor(drive)
    for s in layout.sensors:
        trace = traces.get(s.id)
        if s.quantity != "flow" or s.pipe_id != site.pipe_id or trace is None:
            continue
        _, values = _window_series(trace, start_ns - pre_ns, start_ns)
        if np.isfinite(values).sum() >= 1:
            kept_beyond = any(piece_start >= cut.offset_m - 1e-9 for _, piece_start, _ in cut.pieces)
            q = float(np.nanmedian(values))
            return InitialFlow("measured", inflow_m3_s=q if kept_beyond else -q), f"flow column {s.id}"
    degree = {}
    for p in layout.pipes:
        degree[p.from_node] = degree.get(p.from_node, 0) + 1
        degree[p.to_node] = degree.get(p.to_node, 0) + 1
    best = None
    for sensor_id, head in heads0.items():
        legs = layout.path_between_sensors(drive, sensor_id) or ()
        pipes = [leg.pipe_id for leg in legs]
        inner = [n for a, b in zip(pipes, pipes[1:]) for n in
                 {layout.pipe(a).from_node, layout.pipe(a).to_node}
                 & {layout.pipe(b).from_node, layout.pipe(b).to_node}]
        if legs and all(degree.get(n, 0) == 2 for n in inner):
            length = sum(leg.length_m for leg in legs)
            if best is None or length > best[0]:
                best = (length, sensor_id, tuple((leg.pipe_id, leg.length_m) for leg in legs))
    if best is not None:
        drop = heads0[drive] - heads0[best[1]]
        return (InitialFlow("gradient", head_drop_m=drop, legs=best[2]),
                f"pre-event head drop {drive} to {best[1]}")
    return InitialFlow("config"), "configured boundaries"


def _calibration_step(network: Network, sample_interval_s: float, reaches: int) -> float:
    shortest = min(p.length_m / p.wave_speed_m_s for p in network.pipes)
    target = max(sample_interval_s, shortest / reaches)
    for limit in (0.002, 0.005, 0.01):
        try:
            return choose_time_step(network, target, limit)
        except ValueError:
            continue
    raise ValueError("no calibration time step fits every pipe within 1 % of its wave speed")


def _replay(cut, boundary, targets, probes, speeds, friction, flow, dt, interval_s, dec):
    tb, hb = block_mean(boundary[0], boundary[1], dec)
    tt, ht = block_mean(targets[0], targets[1], dec)
    keep = tt <= tb[-1]
    return ReplayModel(cut, tb, hb, tuple(probes), tt[keep], dict(speeds), dict(friction), flow,
                       dt), ht[keep]


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
        ``peak_tolerance_percent`` and optional ``pre_event_s`` (2), ``window_s`` (60),
        ``max_rms_percent`` (15), ``calibration_reaches`` (48), ``envelope`` (True).
    network, scenario_networks : optional
        The system's MOC network and its design scenarios; built from ``system`` if omitted.
    """
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
    pressure = [s.id for s in layout.pressure_sensors() if s.id in traces
                and _covers(traces[s.id], start_ns, stop_ns, 0.05)]
    if not pressure:
        return _refusal(layout, event, [], None, "no pressure logger has data over the event window")
    drive = _driving_sensor(layout, event, pressure)
    dsite = layout.sensor(drive)
    t_drive, p_drive = _window_series(traces[drive], start_ns, stop_ns)
    interval = float(np.median(np.diff(t_drive)))
    candidates = [s for s in pressure if s != drive and traces[s].sample_interval_s <= 5 * interval]
    head0 = {s: float(np.nanmedian(_window_series(traces[s], start_ns, start_ns + pre_ns)[1]))
             / rho_g + layout.sensor(s).elevation_m for s in [drive] + candidates}
    cut = cut_network_at(network, dsite.pipe_id, dsite.offset_m, head0[drive],
                         keep_points=[(layout.sensor(s).pipe_id, layout.sensor(s).offset_m)
                                      for s in candidates])
    probes, targets = [], []
    for s in candidates:
        site = layout.sensor(s)
        try:
            probes.append(cut.probe(s, site.pipe_id, site.offset_m))
            targets.append(s)
        except ValueError:
            continue
    if not targets:
        return _refusal(layout, event, [drive], drive,
                        f"too few sensors: only {drive} has fast data over the event, and a replay "
                        "needs a second pressure logger in the modelled part of the system")
    heads_drive = _filled(p_drive) / rho_g + dsite.elevation_m
    measured = np.column_stack([
        np.interp(t_drive, *_window_series(traces[s], start_ns, stop_ns), left=np.nan,
                  right=np.nan) / rho_g + layout.sensor(s).elevation_m for s in targets])
    flow, flow_note = _initial_flow(layout, system, cut, drive, traces, start_ns, pre_ns,
                                    {s: head0[s] for s in [drive] + targets})
    original = sorted({p.id.split("#beyond")[0] for p in cut.network.pipes})
    speeds = {p: layout.pipe(p).wave_speed_m_s for p in original}
    steady = solve_steady_state(cut.network)
    friction = {p: steady.friction_factor[cut.sub_pipe_ids(p)[0]] for p in original}
    trial = cut.network.replace(pipes=[replace(q, wave_speed_m_s=speeds[q.id.split("#beyond")[0]])
                                       for q in cut.network.pipes])
    dt = _calibration_step(trial, interval, int(_setting(settings, "calibration_reaches", 48)))
    dec = max(1, int(round(dt / interval)))
    coarse, coarse_measured = _replay(cut, (t_drive, heads_drive), (t_drive, measured), probes,
                                      speeds, friction, flow, dt, interval, dec)
    fitted = sorted({leg.pipe_id for s in targets for leg in layout.path_between_sensors(drive, s) or ()})
    options = CalibrationOptions()
    result = calibrate_in_stages(coarse, coarse_measured, coarse, coarse_measured,
                                 fitted_pipes=fitted if len(targets) >= len(fitted) else (),
                                 options=options)
    notes = [f"driving sensor {drive}", f"initial flow from {flow_note}",
             f"calibrated on a copy decimated to {dec * interval:.4g} s (model step {dt:.4g} s)"]
    if not result.converged:
        return _refusal(layout, event, [drive] + targets, drive, result.reason, result, notes)
    final_dt = _calibration_step(trial, interval, 10**9) if interval < dt else dt
    final = ReplayModel(cut, t_drive, heads_drive, tuple(probes), t_drive, dict(speeds),
                        dict(friction), flow, final_dt)
    final_speeds = result.wave_speed_m_s
    final.base_wave_speed_m_s = dict(final_speeds)
    modelled = final.predict(final_speeds, result.friction_factor, result.unsteady_coefficient,
                             interpolate=result.mode == "per_pipe")
    envelopes = ()
    if _setting(settings, "envelope", True):
        envelopes = design_envelopes(system, layout, network, result, scenario_networks)
    rows, flags = _rows_and_flags(layout, event, drive, targets, measured, modelled, head0,
                                  rho_g, result, settings, envelopes, notes)
    runs = coarse.runs + final.runs
    return ComparisonOutcome(tuple(rows), tuple(flags), result, drive, envelopes, tuple(notes),
                             runs)


def _refusal(layout, event, sensors, drive, reason, result=None, notes=()) -> ComparisonOutcome:
    observed = {o.sensor_id: o for o in event.observations}
    rows = []
    for s in sensors:
        o = observed.get(s)
        rows.append(dict(sensor_id=s, measured_max_kpa=o.max_pa / KPA if o else None,
                         model_max_kpa=None, measured_min_kpa=o.min_pa / KPA if o else None,
                         model_min_kpa=None, rmse_kpa=None, wave_speed_m_s=None,
                         friction_factor=None, fit_status="refused", notes=reason))
    asset = layout.sensor(drive).pipe_id if drive else layout.pipes[0].id
    flag = dict(asset_id=asset, kind="model_fit_refused", severity="info", message=(
        f"The MOC model was not calibrated on this event: {reason}. The measured peaks stand "
        "on their own; no model comparison or design envelope was made. Check the loggers' "
        "data over the event and the system file."))
    return ComparisonOutcome(tuple(rows), (flag,), result, drive, (), tuple(notes) + (reason,),
                             result.n_model_runs if result else 0)


def _rows_and_flags(layout, event, drive, targets, measured, modelled, head0, rho_g, result,
                    settings, envelopes, notes):
    rows, flags = [], []
    tolerance = float(_setting(settings, "peak_tolerance_percent", 10.0))
    max_rms = float(_setting(settings, "max_rms_percent", 15.0))
    summary = (f"{result.mode} fit, wave-speed factor {result.wave_speed_factor:.4f}, friction "
               f"x{result.friction_scale:.3f} +- {result.friction_scale_uncertainty:.2g}, unsteady "
               f"k {result.unsteady_coefficient:.4f}, {result.n_model_runs} model runs")
    for j, s in enumerate(targets):
        site = layout.sensor(s)
        z = site.elevation_m
        meas_p, model_p = (measured[:, j] - z) * rho_g, (modelled[:, j] - z) * rho_g
        base_p = (head0[s] - z) * rho_g
        ok = np.isfinite(meas_p)
        rmse = float(np.sqrt(np.mean((meas_p[ok] - model_p[ok]) ** 2)))
        row = dict(sensor_id=s, measured_max_kpa=float(np.max(meas_p[ok])) / KPA,
                   model_max_kpa=float(np.max(model_p)) / KPA,
                   measured_min_kpa=float(np.min(meas_p[ok])) / KPA,
                   model_min_kpa=float(np.min(model_p)) / KPA, rmse_kpa=rmse / KPA,
                   wave_speed_m_s=float(result.wave_speed_m_s[site.pipe_id]),
                   friction_factor=float(result.friction_factor[site.pipe_id]),
                   fit_status="converged")
        note = [summary, f"wave speed +- {result.wave_speed_uncertainty_m_s[site.pipe_id]:.1f} m/s"]
        for env in envelopes:
            rise = env.sensor_max_kpa[s] - base_p / KPA
            if rise > 0:
                note.append(f"measured rise is {100 * (row['measured_max_kpa'] - base_p / KPA) / rise:.0f} % "
                            f"of design scenario {env.scenario}")
        row["notes"] = "; ".join(note)
        rows.append(row)
        flags += field_worse_flags(layout, s, row, base_p / KPA, tolerance)
        span = row["measured_max_kpa"] - row["measured_min_kpa"]
        if span > 0 and 100 * rmse / KPA / span > max_rms:
            flags.append(dict(asset_id=site.pipe_id, kind="model_mismatch", severity="warning",
                              message=(
                f"The calibrated model does not reproduce the event at {_where(layout, s)}: RMS "
                f"error {rmse / KPA:.0f} kPa is {100 * rmse / KPA / span:.0f} % of the measured "
                f"range {span:.0f} kPa (limit {max_rms:.0f} %). No wave speed or friction explains "
                "the shape: check the system file for a missing branch, a closed or open valve, a "
                "leak or an air pocket near the sensor, and the logger's position.")))
        for env in envelopes:
            if row["measured_max_kpa"] > env.sensor_max_kpa[s]:
                flags.append(dict(asset_id=site.pipe_id, kind="beyond_design_envelope",
                                  severity="warning", message=(
                    f"{_where(layout, s)} reached {row['measured_max_kpa']:.0f} kPa, above the "
                    f"{env.sensor_max_kpa[s]:.0f} kPa of design scenario {env.scenario}. The field "
                    "event was worse than the worst case the model predicts: review the surge "
                    "protection design with this event.")))
    dsite = layout.sensor(drive)
    rows.insert(0, dict(sensor_id=drive, measured_max_kpa=None, model_max_kpa=None,
                        measured_min_kpa=None, model_min_kpa=None, rmse_kpa=None,
                        wave_speed_m_s=float(result.wave_speed_m_s.get(dsite.pipe_id, math.nan)),
                        friction_factor=float(result.friction_factor.get(dsite.pipe_id, math.nan)),
                        fit_status="driving", notes="drives the model; " + "; ".join(notes)))
    return rows, flags


def field_worse_flags(layout: SystemLayout, sensor_id: str, row: Mapping[str, float],
                      baseline_kpa: float, tolerance_percent: float) -> list[dict]:
    """Flags where the measured peak or trough is worse than the model's by more than the
    tolerance, in percent of the model's surge amplitude (its larger excursion from the
    pre-event level, up or down; at least 1 kPa)."""
    flags = []
    site = layout.sensor(sensor_id)
    checks = (("max", row["measured_max_kpa"] - row["model_max_kpa"],
               row["model_max_kpa"] - baseline_kpa, "above", "upsurge"),
              ("min", row["model_min_kpa"] - row["measured_min_kpa"],
               baseline_kpa - row["model_min_kpa"], "below", "downsurge"))
    scale = max(max(c[2] for c in checks), 1.0)
    for which, excess, _, word, surge in checks:
        if excess > tolerance_percent / 100.0 * scale:
            measured = row[f"measured_{which}_kpa"]
            flags.append(dict(asset_id=site.pipe_id, kind="field_worse_than_model",
                              severity="warning", message=(
                f"{_where(layout, sensor_id)}: measured {surge} to {measured:.0f} kPa is "
                f"{excess:.0f} kPa {word} the calibrated model's {row[f'model_{which}_kpa']:.0f} kPa "
                f"({100 * excess / scale:.0f} % of the modelled surge; tolerance "
                f"{tolerance_percent:.0f} %). The field behaves worse than the model: check for "
                "trapped air at high points, a valve closing faster than configured, a failed or "
                "slamming check valve, and whether the system file misses a branch or a device.")))
    return flags


def design_envelopes(system: Any, layout: SystemLayout, network: Network,
                     result: CalibrationResult,
                     scenario_networks: Mapping[str, tuple[Network, float]] | None = None
                     ) -> tuple[ScenarioEnvelope, ...]:
    """Envelope of each configured design scenario with the calibrated parameters."""
    scenarios = scenario_networks if scenario_networks is not None else _system_scenarios(system)
    out = []
    probes = [Probe(s.id, s.pipe_id, s.offset_m) for s in layout.pressure_sensors()]
    for name, (scenario_net, duration_s) in scenarios.items():
        pipes = [replace(p, wave_speed_m_s=result.wave_speed_m_s.get(p.id, p.wave_speed_m_s),
                         friction_factor=result.friction_factor.get(p.id, p.friction_factor))
                 for p in scenario_net.pipes]
        calibrated = scenario_net.replace(pipes=pipes)
        shortest = min(p.length_m / p.wave_speed_m_s for p in pipes)
        dt = choose_time_step(calibrated, min(0.01, shortest / 4), 0.01)
        model = MocModel(calibrated, dt, unsteady_friction=result.unsteady_coefficient or None)
        run = model.run(duration_s, probes)
        rho_g = calibrated.fluid.density_kg_m3 * calibrated.fluid.gravity_m_s2
        p = (run.probe_heads_m - np.array([s.elevation_m for s in layout.pressure_sensors()])) * rho_g
        out.append(ScenarioEnvelope(
            name, {pr.name: float(p[:, j].max()) / KPA for j, pr in enumerate(probes)},
            {pr.name: float(p[:, j].min()) / KPA for j, pr in enumerate(probes)},
            {e.pipe_id: float(e.max_pressure_pa.max()) / KPA for e in run.envelopes},
            {e.pipe_id: float(e.min_pressure_pa.min()) / KPA for e in run.envelopes}))
    return tuple(out)
