"""Run a configured scenario of a system's MOC model and write traces, envelope and a plot.

``run_scenario`` is what ``surgesift simulate SYSTEM --scenario NAME --out DIR`` calls.
Outputs: ``<system>_<scenario>_traces.parquet`` (time and, per pressure sensor, head [m]
and gauge pressure [kPa]; per surge vessel its gas volume, per air valve its air pocket
[m^3]), ``<system>_<scenario>_envelope.csv`` (per pipe and chainage:
maximum and minimum head and pressure, allowable and minimum pressure) and a PNG of both.

The model is a screening aid: pipe ratings and surge allowances follow local codes,
manufacturers' data and the judgement of a licensed engineer.
"""

from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import pandas as pd  # noqa: E402

from service.model_builder import build_scenario  # noqa: E402

__all__ = ["run_scenario", "CAUTION"]

CAUTION = ("Screening aid only: ratings and surge allowances follow local codes, "
           "manufacturers' data and the judgement of a licensed engineer.")


def _pipe_limits(system) -> dict:
    return {p.id: (p.allowable_pressure_kpa, p.minimum_pressure_kpa) for p in system.pipes}


def _base_pipe(pipe_id: str) -> str:
    return pipe_id.split("/")[0]


def _with_wave_speeds(scenario, wave_speeds_m_s: dict):
    """The scenario's model with calibrated wave speeds (split pipes take their parent's)."""
    from dataclasses import replace as dc_replace

    from models.moc import MocModel, choose_time_step

    from .model_builder import DEFAULT_MAX_TIME_STEP_S

    net = scenario.model.network
    pipes = [dc_replace(p, wave_speed_m_s=wave_speeds_m_s.get(_base_pipe(p.id), p.wave_speed_m_s))
             for p in net.pipes]
    net = net.replace(pipes=pipes)
    return dc_replace(scenario, model=MocModel(net, choose_time_step(net, DEFAULT_MAX_TIME_STEP_S)))


def run_scenario(system_config, scenario_name: str, out_dir, wave_speeds_m_s: dict | None = None) -> dict:
    """Run one scenario and write its outputs; returns the {"traces", "envelope", "plot"}
    paths and "warnings" (a surge vessel that drained).

    ``wave_speeds_m_s`` (pipe id -> [m/s]), when given, replaces the configured wave speeds
    (the newest field calibration).
    """
    scenario = build_scenario(system_config, scenario_name)
    if wave_speeds_m_s:
        scenario = _with_wave_speeds(scenario, wave_speeds_m_s)
    result = scenario.model.run(scenario.duration_s, scenario.probes)
    fluid = scenario.model.network.fluid
    rho_g = fluid.density_kg_m3 * fluid.gravity_m_s2
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    stem = f"{system_config.id}_{scenario_name}"
    traces = {"time_s": result.times_s}
    for probe in scenario.probes:
        head = result.probe_head(probe.name)
        traces[f"{probe.name}_head_m"] = head
        traces[f"{probe.name}_kpa"] = rho_g * (head - scenario.sensor_elevation_m[probe.name]) / 1e3
    for vessel_id, volume in result.vessel_gas_volume_m3.items():
        traces[f"{vessel_id}_gas_m3"] = volume
    for valve_id, volume in result.air_volume_m3.items():
        traces[f"{valve_id}_air_m3"] = volume
    traces_path = out / f"{stem}_traces.parquet"
    pd.DataFrame(traces).to_parquet(traces_path, index=False)
    limits = _pipe_limits(system_config)
    rows = []
    for env in result.envelopes:
        allowable, minimum = limits[_base_pipe(env.pipe_id)]
        offset_base = 0.0
        if env.pipe_id.endswith("/b"):
            offset_base = scenario.model.network.pipe(env.pipe_id.replace("/b", "/a")).length_m
        for j in range(env.offsets_m.size):
            rows.append({"pipe_id": _base_pipe(env.pipe_id),
                         "offset_m": offset_base + env.offsets_m[j],
                         "elevation_m": env.elevation_m[j],
                         "max_head_m": env.max_head_m[j], "min_head_m": env.min_head_m[j],
                         "max_kpa": env.max_pressure_pa[j] / 1e3,
                         "min_kpa": env.min_pressure_pa[j] / 1e3,
                         "allowable_pressure_kpa": allowable, "minimum_pressure_kpa": minimum})
    envelope = pd.DataFrame(rows).sort_values(["pipe_id", "offset_m"])
    envelope_path = out / f"{stem}_envelope.csv"
    envelope.to_csv(envelope_path, index=False)
    plot_path = out / f"{stem}.png"
    _plot(traces, scenario, envelope, plot_path, f"{system_config.name or system_config.id}: "
          f"{scenario_name}")
    warnings = [f"surge vessel {vessel_id} drained at {when:.1f} s: gas entered the main; "
                "results after that time are not valid near it (more water or a larger vessel)"
                for vessel_id, when in result.drained_vessels()]
    return {"traces": traces_path, "envelope": envelope_path, "plot": plot_path,
            "warnings": warnings}


def _plot(traces: dict, scenario, envelope: pd.DataFrame, path: Path, title: str) -> None:
    fig, (top, bottom) = plt.subplots(2, 1, figsize=(10, 8))
    for probe in scenario.probes:
        top.plot(traces["time_s"], traces[f"{probe.name}_kpa"], label=probe.name, lw=1)
    top.set_xlabel("time [s]")
    top.set_ylabel("pressure [kPa, gauge]")
    top.set_title(title)
    if scenario.probes:
        top.legend(fontsize=8)
    for pipe_id, group in envelope.groupby("pipe_id"):
        line, = bottom.plot(group["offset_m"], group["max_kpa"], lw=1.2, label=f"{pipe_id} max")
        bottom.plot(group["offset_m"], group["min_kpa"], lw=1.2, ls="--", color=line.get_color(),
                    label=f"{pipe_id} min")
        bottom.plot(group["offset_m"], group["allowable_pressure_kpa"], lw=0.8, ls=":",
                    color="red")
        bottom.plot(group["offset_m"], group["minimum_pressure_kpa"], lw=0.8, ls=":",
                    color="purple")
    bottom.set_xlabel("offset along each pipe [m]")
    bottom.set_ylabel("envelope [kPa, gauge]")
    bottom.legend(fontsize=7, ncol=3)
    fig.text(0.5, 0.005, CAUTION, ha="center", fontsize=7, style="italic")
    fig.tight_layout(rect=(0, 0.02, 1, 1))
    fig.savefig(path, dpi=110)
    plt.close(fig)
