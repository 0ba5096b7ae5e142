"""Invented systems and their true night, for the unseen-system acceptance trial.

Two layouts of an invented utility, the Orrin Vale Water Trust (every name and number here is
invented):

- ``branched``: the Saltmarrow trunk main. Quillby pumping station lifts through a steel main
  (S1) to Tansy junction; a PVC section (P2, push-fit joints: ``expansion_joints``) climbs to
  the Merrow line valve (in line), then a steel main (S3) to Hollin service reservoir; a
  ductile-iron spur (B4) from the junction ends at a closed end (Corbel). Five pressure
  loggers and a station SCADA export.
- ``series``: the Wendle Cross main. Pellan pumping station, a PVC main (L1), a ductile-iron
  main (L2), the Ashby line valve (in line) close to the far end, a short steel main (L3) to
  Cray Top reservoir. Four pressure loggers and a station SCADA export.

:func:`build_scene` writes nothing: it returns the system's TOML text, the logger plan and a
function that evaluates the true (noise-free) head of every sensor at any times, stitched from
the project's own MOC runs of the system's scenarios (:func:`service.model_builder.build_scenario`),
plus the true events (arrival per sensor, peaks per sensor, MOC wave speeds per pipe).
Seeded: the seed moves the event times, the valve stroke, the burst point and size, the noise
levels and the distractors.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np
import pandas as pd

from models.moc import MocModel
from models.network import Valve, ValveMotion
from models.properties import water_density_kg_m3

G = 9.80665
#: departure of the noise-free pressure from its steady value that marks the true arrival [Pa]
#: (as in benchmarks.corpus: far below any logger's noise, far above the model's round-off)
ARRIVAL_DEPARTURE_PA = 10.0
MAX_MODEL_STEP_S = 0.002


@dataclass(frozen=True)
class Logger:
    """How one pressure sensor's logger records and uploads."""

    sensor: str
    rate_hz: float
    form: str  # file form, see benchmarks.trial_files
    noise_kpa: float
    split_s: float  # the logger starts a new file here (seconds from the capture start)


@dataclass
class TrueEvent:
    kind: str
    at_s: float  # scenario instant (seconds from capture start)
    arrival_s: dict = field(default_factory=dict)  # sensor -> 10 Pa departure [s]
    detectable_s: dict = field(default_factory=dict)  # sensor -> departure above 5 noise sd [s]
    max_kpa: dict = field(default_factory=dict)
    min_kpa: dict = field(default_factory=dict)
    span_s: tuple = (0.0, 0.0)
    wave_speed_m_s: dict = field(default_factory=dict)  # pipe -> MOC wave speed after fitting reaches
    origin: str | None = None
    sensors: tuple = ()  # for a sensor fault: the faulty sensor


@dataclass
class Scene:
    layout: str
    seed: int
    system_id: str
    system_toml: str
    night: pd.Timestamp  # capture start (UTC)
    capture_s: float
    loggers: tuple
    scada: dict
    head_m: Callable  # (sensor, times_s) -> noise-free head [m] incl. swing
    pressure_pa: Callable  # (sensor, times_s) -> noise-free gauge pressure [Pa] incl. drift
    events: list
    faults: dict  # distractor description
    density_kg_m3: float
    elevation_m: dict
    limits_kpa: dict  # pipe -> (allowable, minimum)
    sensor_pipe: dict
    pipe_lengths_m: dict
    pipe_ends: dict
    units: dict


# --------------------------------------------------------------------------------------------
# TOML
# --------------------------------------------------------------------------------------------
def _value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(float(v)) if isinstance(v, float) else str(v)
    return '"' + str(v).replace('"', '\\"') + '"'


def to_toml(data: dict) -> str:
    """A small TOML writer for the system file: scalars, sub-tables and arrays of tables."""
    lines = [f"{k} = {_value(v)}" for k, v in data.items() if not isinstance(v, (dict, list))]
    for key, items in data.items():
        if not isinstance(items, list):
            continue
        for item in items:
            lines += ["", f"[[{key}]]"]
            lines += [f"{k} = {_value(v)}" for k, v in item.items() if not isinstance(v, dict)]
            for sub, table in item.items():
                if isinstance(table, dict):
                    lines += [f"[{key}.{sub}]"] + [f"{k} = {_value(v)}" for k, v in table.items()]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------------------------
# the two invented systems
# --------------------------------------------------------------------------------------------
def _branched(rng) -> dict:
    stroke = float(rng.uniform(14.0, 22.0))
    burst_at = float(rng.uniform(600.0, 1300.0))
    burst_area = float(rng.uniform(0.005, 0.009))
    return dict(
        id="saltmarrow-trunk", name="Saltmarrow trunk main", operator="Orrin Vale Water Trust",
        water_temperature_c=16.0,
        nodes=[
            dict(id="QUILLBY_PS", kind="pump_station", name="Quillby pumping station", elevation_m=6.0,
                 suction_head_m=9.0,
                 pump=dict(count=3, rated_flow_m3_s=0.075, rated_head_m=74.0, shutoff_head_m=92.0,
                           rated_speed_rpm=1475.0, rated_efficiency=0.8, inertia_kg_m2=24.0,
                           check_valve=True)),
            dict(id="TANSY_JCT", kind="junction", name="Tansy junction", elevation_m=20.0),
            dict(id="MERROW_VALVE", kind="valve", name="Merrow line valve", elevation_m=28.0,
                 valve=dict(effective_area_m2=0.10, discharge="inline", stroke_time_s=stroke,
                            closure_exponent=1.5)),
            dict(id="HOLLIN_SR", kind="reservoir", name="Hollin service reservoir", elevation_m=48.0,
                 head_m=52.0),
            dict(id="CORBEL_END", kind="dead_end", name="Corbel spur end", elevation_m=24.0),
        ],
        pipes=[
            dict(id="S1", name="Quillby to Tansy", from_node="QUILLBY_PS", to_node="TANSY_JCT",
                 length_m=2800.0, diameter_m=0.5, wall_thickness_m=0.008, material="steel",
                 roughness_m=5e-5, wave_speed_m_s=1160.0, allowable_pressure_kpa=2500.0,
                 minimum_pressure_kpa=-20.0),
            dict(id="P2", name="Tansy to Merrow (PVC)", from_node="TANSY_JCT", to_node="MERROW_VALVE",
                 length_m=1500.0, diameter_m=0.45, wall_thickness_m=0.022, material="pvc",
                 restraint="expansion_joints", roughness_m=2e-5, allowable_pressure_kpa=1000.0,
                 minimum_pressure_kpa=-10.0),
            dict(id="S3", name="Merrow to Hollin", from_node="MERROW_VALVE", to_node="HOLLIN_SR",
                 length_m=1700.0, diameter_m=0.5, wall_thickness_m=0.008, material="steel",
                 roughness_m=5e-5, allowable_pressure_kpa=1600.0, minimum_pressure_kpa=-20.0),
            dict(id="B4", name="Corbel spur", from_node="TANSY_JCT", to_node="CORBEL_END",
                 length_m=600.0, diameter_m=0.2, wall_thickness_m=0.006, material="ductile_iron",
                 roughness_m=1e-4, allowable_pressure_kpa=1600.0, minimum_pressure_kpa=-20.0),
        ],
        sensors=[
            dict(id="QV-PT1", logger="OV-1101", pipe="S1", offset_m=25.0, elevation_m=6.5, unit="bar",
                 range_max=40.0, timezone="UTC"),
            dict(id="QV-PT2", logger="OV-1102", pipe="S1", offset_m=2300.0, elevation_m=17.0, unit="psi",
                 range_max=500.0, timezone="Asia/Kathmandu"),
            dict(id="QV-PT3", logger="OV-1103", pipe="P2", offset_m=700.0, elevation_m=24.0, unit="m",
                 range_max=250.0, timezone="UTC"),
            dict(id="QV-PT4", logger="OV-1104", pipe="S3", offset_m=150.0, elevation_m=30.0, unit="MPa",
                 range_max=4.0, timezone="UTC"),
            dict(id="QV-PT5", logger="OV-1105", pipe="B4", offset_m=580.0, elevation_m=22.0, unit="kPa",
                 range_max=4000.0, timezone="UTC"),
            dict(id="QV-SCADA-P", logger="Quillby SCADA", pipe="S1", offset_m=8.0, elevation_m=6.2,
                 unit="bar", timezone="America/Denver", clock_synchronised=False),
            dict(id="QV-SCADA-Q", logger="Quillby SCADA", pipe="S1", offset_m=8.0, quantity="flow",
                 unit="m3/h", timezone="America/Denver", clock_synchronised=False),
            dict(id="QV-SCADA-RUN", logger="Quillby SCADA", pipe="S1", offset_m=0.0,
                 quantity="pump_status", unit="1", asset="QUILLBY_PS", timezone="America/Denver",
                 clock_synchronised=False),
        ],
        assets=[
            dict(id="QUILLBY_PS", kind="pump_station", node="QUILLBY_PS", description="Three duty pumps"),
            dict(id="MERROW_VALVE", kind="valve", node="MERROW_VALVE", description="Line valve, motorised"),
        ],
        scenarios=[
            dict(name="valve-closure", kind="valve_closure", node="MERROW_VALVE", start_s=2.0, duration_s=150.0),
            dict(name="pump-trip", kind="pump_trip", node="QUILLBY_PS", start_s=2.0, duration_s=150.0),
            dict(name="pump-start", kind="pump_start", node="QUILLBY_PS", start_s=2.0, duration_s=120.0,
                 stroke_time_s=8.0),
            dict(name="burst", kind="burst", pipe="S3", offset_m=burst_at, effective_area_m2=burst_area,
                 start_s=2.0, duration_s=120.0, design=False),
        ],
    )


def _series(rng) -> dict:
    stroke = float(rng.uniform(8.0, 14.0))
    burst_at = float(rng.uniform(700.0, 1600.0))
    burst_area = float(rng.uniform(0.003, 0.006))
    return dict(
        id="wendle-cross", name="Wendle Cross main", operator="Orrin Vale Water Trust",
        water_temperature_c=9.0,
        nodes=[
            dict(id="PELLAN_PS", kind="pump_station", name="Pellan pumping station", elevation_m=3.0,
                 suction_head_m=5.0,
                 pump=dict(count=2, rated_flow_m3_s=0.05, rated_head_m=58.0, shutoff_head_m=71.0,
                           rated_speed_rpm=1480.0, rated_efficiency=0.78, inertia_kg_m2=9.0,
                           check_valve=True)),
            dict(id="WENDLE_JCT", kind="junction", name="Wendle material change", elevation_m=14.0),
            dict(id="ASHBY_VALVE", kind="valve", name="Ashby line valve", elevation_m=30.0,
                 valve=dict(effective_area_m2=0.06, discharge="inline", stroke_time_s=stroke,
                            closure_exponent=2.0)),
            dict(id="CRAY_TOP_SR", kind="reservoir", name="Cray Top reservoir", elevation_m=38.0, head_m=42.0),
        ],
        pipes=[
            dict(id="L1", from_node="PELLAN_PS", to_node="WENDLE_JCT", length_m=1800.0, diameter_m=0.35,
                 wall_thickness_m=0.017, material="pvc", roughness_m=2e-5,
                 allowable_pressure_kpa=1000.0, minimum_pressure_kpa=-10.0),
            dict(id="L2", from_node="WENDLE_JCT", to_node="ASHBY_VALVE", length_m=2600.0, diameter_m=0.35,
                 wall_thickness_m=0.0075, material="ductile_iron", roughness_m=1e-4,
                 wave_speed_m_s=1180.0, allowable_pressure_kpa=1600.0, minimum_pressure_kpa=-20.0),
            dict(id="L3", from_node="ASHBY_VALVE", to_node="CRAY_TOP_SR", length_m=400.0, diameter_m=0.35,
                 wall_thickness_m=0.007, material="steel", roughness_m=5e-5,
                 allowable_pressure_kpa=1600.0, minimum_pressure_kpa=-20.0),
        ],
        sensors=[
            dict(id="WX-PT1", logger="OV-2201", pipe="L1", offset_m=30.0, elevation_m=3.5, unit="psi",
                 range_max=300.0, timezone="UTC"),
            dict(id="WX-PT2", logger="OV-2202", pipe="L2", offset_m=300.0, elevation_m=16.0, unit="bar",
                 range_max=25.0, timezone="Asia/Kathmandu"),
            dict(id="WX-PT3", logger="OV-2203", pipe="L2", offset_m=2450.0, elevation_m=29.0, unit="m",
                 range_max=200.0, timezone="UTC"),
            dict(id="WX-PT4", logger="OV-2204", pipe="L3", offset_m=300.0, elevation_m=36.0, unit="MPa",
                 range_max=2.5, timezone="UTC"),
            dict(id="WX-SCADA-P", logger="Pellan SCADA", pipe="L1", offset_m=5.0, elevation_m=3.2,
                 unit="bar", timezone="America/Denver", clock_synchronised=False),
            dict(id="WX-SCADA-Q", logger="Pellan SCADA", pipe="L1", offset_m=5.0, quantity="flow",
                 unit="m3/h", timezone="America/Denver", clock_synchronised=False),
            dict(id="WX-SCADA-RUN", logger="Pellan SCADA", pipe="L1", offset_m=0.0,
                 quantity="pump_status", unit="1", asset="PELLAN_PS", timezone="America/Denver",
                 clock_synchronised=False),
        ],
        assets=[dict(id="PELLAN_PS", kind="pump_station", node="PELLAN_PS"),
                dict(id="ASHBY_VALVE", kind="valve", node="ASHBY_VALVE")],
        scenarios=[
            dict(name="valve-closure", kind="valve_closure", node="ASHBY_VALVE", start_s=2.0, duration_s=150.0),
            dict(name="pump-trip", kind="pump_trip", node="PELLAN_PS", start_s=2.0, duration_s=150.0),
            dict(name="pump-start", kind="pump_start", node="PELLAN_PS", start_s=2.0, duration_s=120.0,
                 stroke_time_s=6.0),
            dict(name="burst", kind="burst", pipe="L2", offset_m=burst_at, effective_area_m2=burst_area,
                 start_s=2.0, duration_s=120.0, design=False),
        ],
    )


def _loggers(layout: str, rng) -> tuple:
    def noise():
        return float(rng.uniform(0.3, 1.5))

    if layout == "branched":
        return (
            Logger("QV-PT1", 200.0, "parquet_utc", noise(), 1530.0),
            Logger("QV-PT2", 100.0, "csv_semicolon_local", noise(), 1500.0),
            Logger("QV-PT3", 250.0, "csv_gz_long_offset", noise(), 1515.0),
            Logger("QV-PT4", 50.0, "parquet_epoch", noise(), 1800.0),
            Logger("QV-PT5", 500.0, "csv_comma_utc", noise(), 1500.0),
        )
    return (
        Logger("WX-PT1", 100.0, "csv_semicolon_local", noise(), 1530.0),
        Logger("WX-PT2", 200.0, "parquet_utc", noise(), 1500.0),
        Logger("WX-PT3", 500.0, "csv_gz_long_offset", noise(), 1800.0),
        Logger("WX-PT4", 50.0, "parquet_epoch", noise(), 1515.0),
    )


# --------------------------------------------------------------------------------------------
# the true night
# --------------------------------------------------------------------------------------------
def _closed_level(system, scenario, probes) -> dict:
    """Heads with the line valve shut and the pumps running (after the closure)."""
    net = scenario.model.network
    nodes = [replace(n, motion=ValveMotion.constant(0.0)) if isinstance(n, Valve) else n for n in net.nodes]
    model = MocModel(net.replace(nodes=nodes), scenario.model.time_step_s)
    result = model.run(1.0, probes)
    return {p.name: float(result.probe_heads_m[-1, i]) for i, p in enumerate(probes)}


class _Segments:
    """Per sensor, a time line of holds, smooth ramps and pasted model runs."""

    def __init__(self):
        self.parts: dict[str, list] = {}

    def add(self, sensor, start, end, fn):
        self.parts.setdefault(sensor, []).append((start, end, fn))

    def __call__(self, sensor, t):
        out = np.full(np.shape(t), np.nan)
        for start, end, fn in self.parts[sensor]:
            sel = (t >= start) & (t < end)
            if np.any(sel):
                out[sel] = fn(t[sel])
        return out


def _hold(level):
    return lambda t: np.full(t.shape, level)


def _ramp(a, b, start, end):
    return lambda t: a + (b - a) * 0.5 * (1 - np.cos(np.pi * np.clip((t - start) / (end - start), 0, 1)))


def _paste(t_model, head, offset):
    return lambda t: np.interp(t - offset, t_model, head)


def _split_speeds(speeds: dict, lengths: dict) -> dict:
    """Wave speed per configured pipe; a pipe split for a burst gets its travel-time mean."""
    out = {}
    for pipe, length in lengths.items():
        parts = [k for k in speeds if k == pipe or k.startswith(pipe + "/")]
        if len(parts) == 1:
            out[pipe] = speeds[parts[0]]
        else:  # equal wave speeds on both parts in practice; length unknown here: mean
            out[pipe] = float(np.mean([speeds[k] for k in parts]))
    return out


def build_scene(layout: str, seed: int) -> Scene:
    """The invented system, its loggers and the true, noise-free night (see module notes)."""
    from service.config_schema import SystemConfig
    from service.model_builder import build_scenario

    rng = np.random.default_rng(seed)
    data = _branched(rng) if layout == "branched" else _series(rng)
    system = SystemConfig.model_validate(data)
    loggers = _loggers(layout, rng)
    night = pd.Timestamp("2027-05-19T01:00:00Z" if layout == "branched" else "2027-08-03T22:00:00Z")
    capture_s = 3000.0
    jitter = lambda: float(rng.uniform(-20.0, 20.0))  # noqa: E731
    at = {"valve-closure": 240.0 + jitter(), "pump-trip": 1230.0 + jitter() * 0.5,
          "pump-start": 1720.0 + jitter(), "burst": 2230.0 + jitter()}
    runs = {}
    for name in at:
        sc = build_scenario(system, name, max_time_step_s=MAX_MODEL_STEP_S)
        res = sc.model.run(sc.duration_s, sc.probes)
        t = res.times_s - system.scenario(name).start_s
        heads = {p.name: res.probe_heads_m[:, i] for i, p in enumerate(sc.probes)}
        pump = res.pump_flow_m3_s[:, 0]  # station flow
        runs[name] = (sc, t, heads, pump, dict(sc.model.discretisation.wave_speed_m_s))
    sc_close = runs["valve-closure"][0]
    closed = _closed_level(system, sc_close, sc_close.probes)
    line = _Segments()
    pressure_ids = [s.id for s in system.sensors if s.quantity == "pressure"]
    reopen = (at["valve-closure"] + 300.0, at["valve-closure"] + 900.0)
    for s in pressure_ids:
        _, vt, vh, _, _ = runs["valve-closure"]
        _, pt, ph, _, _ = runs["pump-trip"]
        _, st, sh, _, _ = runs["pump-start"]
        _, bt, bh, _, _ = runs["burst"]
        e1, e2, e3, e4 = (at[k] for k in ("valve-closure", "pump-trip", "pump-start", "burst"))
        line.add(s, -1e9, e1 + vt[0], _hold(vh[s][0]))
        line.add(s, e1 + vt[0], e1 + vt[-1], _paste(vt, vh[s], e1))
        line.add(s, e1 + vt[-1], e1 + vt[-1] + 90.0, _ramp(vh[s][-1], closed[s], e1 + vt[-1], e1 + vt[-1] + 90.0))
        line.add(s, e1 + vt[-1] + 90.0, reopen[0], _hold(closed[s]))
        line.add(s, reopen[0], reopen[1], _ramp(closed[s], ph[s][0], *reopen))
        line.add(s, reopen[1], e2 + pt[0], _hold(ph[s][0]))
        line.add(s, e2 + pt[0], e2 + pt[-1], _paste(pt, ph[s], e2))
        line.add(s, e2 + pt[-1], e2 + pt[-1] + 240.0, _ramp(ph[s][-1], sh[s][0], e2 + pt[-1], e2 + pt[-1] + 240.0))
        line.add(s, e2 + pt[-1] + 240.0, e3 + st[0], _hold(sh[s][0]))
        line.add(s, e3 + st[0], e3 + st[-1], _paste(st, sh[s], e3))
        line.add(s, e3 + st[-1], e3 + st[-1] + 240.0, _ramp(sh[s][-1], bh[s][0], e3 + st[-1], e3 + st[-1] + 240.0))
        line.add(s, e3 + st[-1] + 240.0, e4 + bt[0], _hold(bh[s][0]))
        line.add(s, e4 + bt[0], e4 + bt[-1], _paste(bt, bh[s], e4))
        tail = float(np.mean(bh[s][-int(5.0 / MAX_MODEL_STEP_S):]))
        line.add(s, e4 + bt[-1], e4 + bt[-1] + 120.0, _ramp(bh[s][-1], tail, e4 + bt[-1], e4 + bt[-1] + 120.0))
        line.add(s, e4 + bt[-1] + 120.0, 1e9, _hold(tail))

    density = water_density_kg_m3(system.water_temperature_c)
    elevation = {s.id: s.elevation_m for s in system.sensors}
    swing_phase = float(rng.uniform(0, 2 * np.pi))

    def swing_m(t):  # a slow demand swing on the whole system: +-0.3 m over 40 minutes
        return 0.3 * np.sin(2 * np.pi * t / 2400.0 + swing_phase)

    drifting = pressure_ids[2]
    drift_kpa = float(rng.uniform(8.0, 14.0)) * float(rng.choice([-1, 1]))

    def head_m(sensor, t):
        return line(sensor, t) + swing_m(t)

    def pressure_pa(sensor, t):
        p = density * G * (head_m(sensor, t) - elevation[sensor])
        if sensor == drifting:  # a slowly drifting transducer
            p = p + drift_kpa * 1e3 * t / capture_s
        return p

    # pump station context: flow and run status
    _, vt, _, v_pump, _ = runs["valve-closure"]
    _, pt, _, p_pump, _ = runs["pump-trip"]
    _, st, _, s_pump, _ = runs["pump-start"]
    e1, e2, e3 = at["valve-closure"], at["pump-trip"], at["pump-start"]
    q_run = float(p_pump[0])
    q_closed = float(v_pump[-1])

    def flow_m3_s(t):
        q = np.full(t.shape, q_run)
        sel = (t >= e1) & (t < e1 + vt[-1]); q[sel] = np.interp(t[sel] - e1, vt, v_pump)
        sel = (t >= e1 + vt[-1]) & (t < reopen[0]); q[sel] = q_closed
        sel = (t >= reopen[0]) & (t < reopen[1]); q[sel] = _ramp(q_closed, q_run, *reopen)(t[sel])
        sel = (t >= e2); q[sel] = np.interp(t[sel] - e2, pt, p_pump)
        sel = (t >= e3); q[sel] = np.interp(t[sel] - e3, st, s_pump)
        return q

    def running(t):
        return np.where((t >= e2) & (t < e3), 0.0, 1.0)

    # true events
    noise = {lg.sensor: lg.noise_kpa for lg in loggers}
    rates = {lg.sensor: lg.rate_hz for lg in loggers}
    scada_p = [s.id for s in system.sensors if s.quantity == "pressure" and not s.clock_synchronised][0]
    events = []
    kinds = {"valve-closure": "valve_closure", "pump-trip": "pump_trip", "pump-start": "pump_start",
             "burst": "burst_suspected"}
    lengths = {p.id: p.length_m for p in system.pipes}
    for name, when in at.items():
        sc, t_model, heads, _, speeds = runs[name]
        ev = TrueEvent(kinds[name], when, span_s=(when + t_model[0], when + t_model[-1]),
                       wave_speed_m_s=_split_speeds(speeds, lengths))
        for s in pressure_ids:
            p_model = density * G * (heads[s] - elevation[s])
            dep = np.abs(p_model - p_model[0])
            i = int(np.flatnonzero(dep > ARRIVAL_DEPARTURE_PA)[0])
            ev.arrival_s[s] = when + float(np.interp(ARRIVAL_DEPARTURE_PA, dep[i - 1:i + 1], t_model[i - 1:i + 1]))
            sd = noise.get(s, 10.0) * 1e3
            j = np.flatnonzero(dep > max(5 * sd, 2e3))
            ev.detectable_s[s] = when + float(t_model[j[0]]) if j.size else float("nan")
            rate = rates.get(s, 1.0)
            offset = SCADA_CLOCK_S if s == scada_p else 0.0
            grid = np.arange(np.ceil((ev.span_s[0] + offset) * rate), np.floor((ev.span_s[1] + offset) * rate)) / rate
            p_seen = pressure_pa(s, grid - offset)
            ev.max_kpa[s], ev.min_kpa[s] = float(p_seen.max()) / 1e3, float(p_seen.min()) / 1e3
        timed = [s for s in pressure_ids if s != scada_p]
        ev.origin = min(timed, key=lambda s: ev.arrival_s[s])
        events.append(ev)

    # distractors on the sensors (applied by the file writer): a spike, a gap, a flat line,
    # a one-sensor fault (a 20 s offset step: a failing cable joint), plus noise and drift
    ids = [lg.sensor for lg in loggers]
    faults = dict(
        spike=(ids[1], 700.0 + float(rng.uniform(0, 60)), float(rng.choice([-1, 1])) * float(rng.uniform(120, 200))),
        gap=(ids[-1], 1000.0 + float(rng.uniform(0, 60)), 60.0),
        flat=(ids[0], 2500.0 + float(rng.uniform(0, 40)), 80.0),
        step=(ids[-1] if layout == "branched" else ids[2], 2750.0 + float(rng.uniform(0, 60)), 20.0,
              float(rng.uniform(50, 80))),
        drift=(drifting, drift_kpa),
    )
    for kind_key in ("flat", "step"):
        sensor, start, length = faults[kind_key][:3]
        ev = TrueEvent("sensor_fault", start, span_s=(start, start + length), origin=sensor, sensors=(sensor,))
        ev.arrival_s[sensor] = start
        events.append(ev)
    events.sort(key=lambda e: e.at_s)
    scada = dict(pressure=scada_p,
                 flow=[s.id for s in system.sensors if s.quantity == "flow"][0],
                 run=[s.id for s in system.sensors if s.quantity == "pump_status"][0],
                 flow_m3_s=flow_m3_s, running=running, clock_s=SCADA_CLOCK_S, zone="America/Denver")
    return Scene(
        layout=layout, seed=seed, system_id=system.id, system_toml=to_toml(data), night=night,
        capture_s=capture_s, loggers=loggers, scada=scada, head_m=head_m, pressure_pa=pressure_pa,
        events=events, faults=faults, density_kg_m3=density, elevation_m=elevation,
        limits_kpa={p.id: (p.allowable_pressure_kpa, p.minimum_pressure_kpa) for p in system.pipes},
        sensor_pipe={s.id: (s.pipe, s.offset_m) for s in system.sensors},
        pipe_lengths_m=lengths, pipe_ends={p.id: (p.from_node, p.to_node) for p in system.pipes},
        units={s.id: s.unit for s in system.sensors},
    )


#: the SCADA clock runs this many seconds slow (its stamps are late by this) [s]
SCADA_CLOCK_S = -2.0
