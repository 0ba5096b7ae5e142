"""Turn a validated system configuration into an MOC network, a scenario or a replay model.

The configuration keys are those of ``service.config_schema``; water properties come from
``models.properties`` at the system's water temperature. Everything returned is pure data
from ``models.network``; running it is ``models.moc``'s job.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from models.moc import MocModel, Probe, choose_time_step
from models.network import (AirValve, AirVessel, Burst, DeadEnd, Fluid, HeadSeries, Junction,
                            Network, Pipe, PumpStation, Reservoir, Valve, ValveMotion)
from models.network_edit import cut_at_point, point_after_split, split_pipe
from models.properties import vapour_pressure_pa, water_density_kg_m3
from models.pumps import PumpOperation, PumpUnit

from .pipe_properties import theoretical_wave_speed_m_s

__all__ = ["build_network", "build_scenario", "build_replay", "scenario_network", "ScenarioModel",
           "water_kinematic_viscosity_m2_s", "sensor_probes", "DEFAULT_MAX_TIME_STEP_S"]

DEFAULT_MAX_TIME_STEP_S = 0.01
STANDARD_ATMOSPHERE_PA = 101325.0
DEFAULT_PUMP_START_RAMP_S = 10.0


def water_kinematic_viscosity_m2_s(temperature_c: float) -> float:
    """Kinematic viscosity of water [m^2/s] from the Vogel equation and the density.

    Notes
    -----
    mu = 2.414e-5 * 10^(247.8 / (T - 140)) Pa s with T in kelvin (Vogel 1921 form as used in
    hydraulics handbooks; common practice, about 1 % over 0–40 C).
    """
    mu = 2.414e-5 * 10.0 ** (247.8 / (temperature_c + 273.15 - 140.0))
    return mu / water_density_kg_m3(temperature_c)


def _fluid(system) -> Fluid:
    t = system.water_temperature_c
    rho = water_density_kg_m3(t)
    g = 9.80665
    vapour_head = (vapour_pressure_pa(t) - STANDARD_ATMOSPHERE_PA) / (rho * g)
    return Fluid(rho, water_kinematic_viscosity_m2_s(t), vapour_head, g)


def _wave_speed(pipe_cfg, temperature_c: float) -> float:
    """The configured prior, else the theoretical value of the pipe as configured (material,
    wall and restraint: the same value the detectors' layout uses)."""
    if pipe_cfg.wave_speed_m_s is not None:
        return pipe_cfg.wave_speed_m_s
    return theoretical_wave_speed_m_s(pipe_cfg, temperature_c)


def _pump_unit(pump) -> PumpUnit:
    flows, heads = (), ()
    if pump.shutoff_head_m is not None:
        # shut-off and rated point on h = Hs - (Hs - HR) v^2 (zero slope at shut-off,
        # common practice), a third point at 1.4 Q_R to fix the quadratic
        v = np.array([0.0, 1.0, 1.4])
        heads = tuple(pump.shutoff_head_m - (pump.shutoff_head_m - pump.rated_head_m) * v**2)
        flows = tuple(v * pump.rated_flow_m3_s)
    return PumpUnit(pump.rated_flow_m3_s, pump.rated_head_m, pump.rated_speed_rpm,
                    pump.rated_efficiency, pump.inertia_kg_m2, flows, heads)


def _node(cfg) -> object:
    if cfg.kind == "reservoir":
        return Reservoir(cfg.id, cfg.head_m, cfg.elevation_m)
    if cfg.kind == "junction":
        return Junction(cfg.id, cfg.elevation_m, loss_coefficient=cfg.local_loss_coefficient)
    if cfg.kind == "dead_end":
        return DeadEnd(cfg.id, cfg.elevation_m)
    if cfg.kind == "air_valve":
        return AirValve(cfg.id, cfg.elevation_m, cfg.air_valve.inlet_area_m2,
                        cfg.air_valve.outlet_area_m2)
    if cfg.kind == "air_vessel":
        v = cfg.vessel
        return AirVessel(cfg.id, v.gas_volume_m3, v.vessel_volume_m3, cfg.elevation_m,
                         v.liquid_level_m, v.polytropic_exponent, v.inflow_loss_s2_m5,
                         v.outflow_loss_s2_m5)
    if cfg.kind == "valve":
        v = cfg.valve
        outlet = v.downstream_head_m if v.discharge == "reservoir" else None
        return Valve(cfg.id, v.effective_area_m2, ValveMotion.constant(v.initial_opening),
                     outlet, cfg.elevation_m)
    pump = cfg.pump
    operation = PumpOperation.running() if pump.running else PumpOperation.running(0.0)
    return PumpStation(cfg.id, _pump_unit(pump), operation, pump.count, cfg.suction_head_m,
                       pump.check_valve, cfg.elevation_m)


def build_network(system) -> Network:
    """The system's pipes and nodes as an MOC network in its normal running state."""
    pipes = tuple(Pipe(p.id, p.from_node, p.to_node, p.length_m, p.diameter_m,
                       _wave_speed(p, system.water_temperature_c), p.roughness_m,
                       p.friction_factor) for p in system.pipes)
    return Network(_fluid(system), pipes, tuple(_node(n) for n in system.nodes))


def sensor_probes(system, network: Network, split=None) -> list[Probe]:
    """Probes at the system's pressure sensors (moved onto split pipes where needed)."""
    probes = []
    known = {p.id for p in network.pipes}
    for s in system.sensors:
        if getattr(s, "quantity", "pressure") != "pressure":
            continue
        pipe_id, offset = s.pipe, s.offset_m
        if split is not None:
            pipe_id, offset = point_after_split(pipe_id, offset, *split)
        if pipe_id in known:
            probes.append(Probe(s.id, pipe_id, offset))
    return probes


@dataclass(frozen=True)
class ScenarioModel:
    """A scenario ready to run: model, duration, probes and the sensors' elevations."""

    model: MocModel
    duration_s: float
    probes: tuple
    sensor_elevation_m: dict
    description: str


def build_scenario(system, scenario_name: str, max_time_step_s: float | None = None) -> ScenarioModel:
    """Network with the named scenario's event applied, discretised and ready to run."""
    scenario = system.scenario(scenario_name)
    network = build_network(system)
    split = None
    start = scenario.start_s
    if scenario.kind in ("pump_trip", "pump_start"):
        station = _require(network, scenario.node, PumpStation, scenario)
        if scenario.kind == "pump_trip":
            operation = PumpOperation.trip(start)
        else:
            ramp = scenario.stroke_time_s or DEFAULT_PUMP_START_RAMP_S
            operation = PumpOperation.start(start, ramp)
        network = _replace_node(network, replace(station, operation=operation))
    elif scenario.kind in ("valve_closure", "valve_opening"):
        valve = _require(network, scenario.node, Valve, scenario)
        cfg = system.node(scenario.node).valve
        stroke = scenario.stroke_time_s or cfg.stroke_time_s
        exponent = scenario.closure_exponent or cfg.closure_exponent
        initial = cfg.initial_opening
        if scenario.kind == "valve_closure":
            motion = ValveMotion.closure(start, stroke, exponent, initial)
        else:
            fractions = np.linspace(0.0, 1.0, 41)
            openings = initial + (1.0 - initial) * (1.0 - (1.0 - fractions) ** exponent)
            motion = ValveMotion.from_curve(start, stroke, tuple(fractions), tuple(openings))
        network = _replace_node(network, replace(valve, motion=motion))
    elif scenario.kind == "burst":
        burst = Burst(f"burst@{scenario.pipe}", scenario.effective_area_m2, start,
                      scenario.opening_time_s)
        network = split_pipe(network, scenario.pipe, scenario.offset_m, burst)
        split = (scenario.pipe, scenario.offset_m)
    dt = system.time_step_s or choose_time_step(network, max_time_step_s or DEFAULT_MAX_TIME_STEP_S)
    probes = tuple(sensor_probes(system, network, split))
    elevations = {s.id: s.elevation_m for s in system.sensors}
    return ScenarioModel(MocModel(network, dt), scenario.duration_s, probes, elevations,
                         scenario.description)


def scenario_network(system, scenario_name: str) -> Network:
    """The network of a named scenario (its event applied), not yet discretised."""
    return build_scenario(system, scenario_name).model.network


def build_replay(system, sensor_id: str, times_s: np.ndarray, heads_m: np.ndarray,
                 keep: str = "downstream", max_time_step_s: float | None = None):
    """Model driven by a measured head at one sensor (event replay and calibration).

    The network is cut at the sensor's chainage, a head-series boundary put there and,
    with ``keep`` = "downstream" or "upstream", only that side kept. Returns the model and
    the probes at the other sensors on the kept side.
    """
    sensor = system.sensor(sensor_id)
    network = build_network(system)
    boundary = HeadSeries(f"measured@{sensor_id}", np.asarray(times_s, float), np.asarray(heads_m, float))
    pipe = network.pipe(sensor.pipe)
    offset = min(max(sensor.offset_m, 1e-6 * pipe.length_m), pipe.length_m * (1 - 1e-6))
    cut = cut_at_point(network, sensor.pipe, offset, boundary, keep)
    dt = system.time_step_s or choose_time_step(cut, max_time_step_s or DEFAULT_MAX_TIME_STEP_S)
    probes = [p for p in sensor_probes(system, cut, (sensor.pipe, offset)) if p.name != sensor_id]
    return MocModel(cut, dt), probes


def _require(network: Network, node_id, kind, scenario):
    node = network.node(node_id)
    if not isinstance(node, kind):
        raise ValueError(f"scenario {scenario.name!r} ({scenario.kind}) needs a "
                         f"{kind.__name__} node, but {node_id!r} is a {type(node).__name__}")
    return node


def _replace_node(network: Network, node) -> Network:
    return network.replace(nodes=[node if n.id == node.id else n for n in network.nodes])
