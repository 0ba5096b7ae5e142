"""Lay a network out into the flat arrays the compiled MOC kernel marches.

See :mod:`models.moc_kernel` for the meaning of the arrays. Initial heads and flows come from
the steady state: along a pipe the head falls by R Q|Q| per reach, which is exactly the
steady solution of the discrete characteristic equations.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from models.friction import TURBULENT_LIMIT_RE, darcy_friction_factor, reach_resistance
from models.moc_air_valve import AIR_ROWS, GAS_CONSTANT_AIR, VALVE_COLUMNS
from models.moc_air_vessel import VESSEL_COLUMNS, vessel_constants
from models.moc_kernel import (KIND_AIR_VALVE, KIND_AIR_VESSEL, KIND_END_VALVE, KIND_FIXED_HEAD,
                               KIND_INLINE_VALVE, KIND_JUNCTION, KIND_LOSSY_JUNCTION, KIND_PUMP)
from models.moc_results import Discretisation
from models.network import (AirValve, AirVessel, Burst, DeadEnd, HeadSeries, Junction,
                            Network, Reservoir, Valve)
from models.steady import SteadyState

__all__ = ["KernelLayout", "build_layout", "head_table", "NO_CAVITATION_HEAD_M"]

NO_CAVITATION_HEAD_M = -1e30


@dataclass(eq=False)
class KernelLayout:
    """Arrays for :func:`models.moc_kernel.run_transient` (one run)."""

    pipe_first: np.ndarray
    pipe_reaches: np.ndarray
    coef: np.ndarray
    hv: np.ndarray
    elevation: np.ndarray
    H0: np.ndarray
    Q0: np.ndarray
    point_pipe_ids: np.ndarray
    point_offsets_m: np.ndarray
    node_kind: np.ndarray
    node_ptr: np.ndarray
    node_param: np.ndarray
    node_demand: np.ndarray
    node_orifice: np.ndarray
    ends: np.ndarray
    head_table: np.ndarray
    orifice_table: np.ndarray
    orifice_z: np.ndarray
    valve_table: np.ndarray
    valve_outlet: np.ndarray
    valve_reverse: np.ndarray
    pump_ids: tuple
    pump_units: np.ndarray
    pump_qr: np.ndarray
    pump_hr: np.ndarray
    pump_ct: np.ndarray
    pump_sump: np.ndarray
    pump_check: np.ndarray
    pump_cmd: np.ndarray
    pump_wh: np.ndarray
    pump_wb: np.ndarray
    pump_inv_step: float
    pump_state: np.ndarray
    initial_outflow: np.ndarray
    pipe_index: dict
    end_loss: np.ndarray  # per end: local-loss resistance of its junction connection [s^2/m^5]
    vessel_ids: tuple = ()
    vessel_table: np.ndarray = None  # (vessels, 5): C, m, R in, R out, gas head offset
    vessel_state: np.ndarray = None  # (vessels, 2): gas volume [m^3], flow in [m^3/s] at start
    air_valve_ids: tuple = ()
    air_table: np.ndarray = None  # (air valves, 6): z, inlet CdA, outlet CdA, p_atm, R T, rho g

    def locate_probes(self, network: Network, probes) -> tuple:
        """Point indices and weights of probes at (pipe, offset)."""
        a = np.zeros(len(probes), dtype=np.int64)
        b = np.zeros(len(probes), dtype=np.int64)
        w = np.zeros(len(probes))
        for j, probe in enumerate(probes):
            p = self.pipe_index.get(probe.pipe_id)
            if p is None:
                raise ValueError(f"probe {probe.name!r} is on unknown pipe {probe.pipe_id!r}")
            length = network.pipe(probe.pipe_id).length_m
            if not 0.0 <= probe.offset_m <= length:
                raise ValueError(f"probe {probe.name!r}: offset {probe.offset_m} m is outside "
                                 f"pipe {probe.pipe_id!r} (0 to {length} m)")
            n = self.pipe_reaches[p]
            x = probe.offset_m / length * n
            k = min(int(math.floor(x)), n - 1)
            a[j] = self.pipe_first[p] + k
            b[j] = a[j] + 1
            w[j] = x - k
        return a, b, w


def transient_friction_factor(network: Network, pipe, steady: SteadyState) -> float:
    """Darcy factor the transient uses: the steady one, unless the pipe starts from rest.

    A pipe without flow at the start (a pump start, a closed valve opening) would get the
    laminar factor of Re ~ 0, far too large once the water moves; such pipes (Re < 4000)
    take the Colebrook–White factor at 1 m/s instead (common practice: friction fixed at a
    representative turbulent flow). Calibrated factors are always used as given.
    """
    fluid = network.fluid
    f = steady.friction_factor[pipe.id]
    if pipe.friction_factor is not None or pipe.id in steady.overridden:
        return f
    re = abs(steady.pipe_flow_m3_s[pipe.id]) / pipe.area_m2 * pipe.diameter_m / (
        fluid.kinematic_viscosity_m2_s)
    if re >= TURBULENT_LIMIT_RE:
        return f
    re_reference = 1.0 * pipe.diameter_m / fluid.kinematic_viscosity_m2_s
    return darcy_friction_factor(max(re_reference, TURBULENT_LIMIT_RE), pipe.roughness_m / pipe.diameter_m)


def _end_order(network: Network, node) -> list:
    """Pipe ends at a node as (pipe id, is_to_end); in-line devices list the inflow first."""
    ending = [(p.id, True) for p in network.pipes_ending_at(node.id)]
    starting = [(p.id, False) for p in network.pipes_starting_at(node.id)]
    return ending + starting


def build_layout(network: Network, disc: Discretisation, steady: SteadyState,
                 unsteady_k: dict, n_steps: int, cavitation: bool) -> KernelLayout:
    """Arrays of one run: pipes, points, nodes, ends and per-step boundary tables."""
    fluid = network.fluid
    g = fluid.gravity_m_s2
    dt = disc.time_step_s
    times = np.arange(n_steps + 1) * dt
    n_pipes = len(network.pipes)
    reaches = np.array([disc.reaches[p.id] for p in network.pipes], dtype=np.int64)
    first = np.concatenate([[0], np.cumsum(reaches + 1)[:-1]]).astype(np.int64)
    n_points = int(np.sum(reaches + 1))
    pipe_b, pipe_r, pipe_kb = np.zeros(n_pipes), np.zeros(n_pipes), np.zeros(n_pipes)
    elevation, h0, q0 = np.zeros(n_points), np.zeros(n_points), np.zeros(n_points)
    offsets = np.zeros(n_points)
    point_pipe = np.empty(n_points, dtype=object)
    for p, pipe in enumerate(network.pipes):
        n = reaches[p]
        area = pipe.area_m2
        pipe_b[p] = disc.wave_speed_m_s[pipe.id] / (g * area)
        pipe_r[p] = reach_resistance(transient_friction_factor(network, pipe, steady),
                                     pipe.length_m / n, pipe.diameter_m, area, g)
        pipe_kb[p] = 0.5 * unsteady_k[pipe.id] * pipe_b[p]
        sl = slice(first[p], first[p] + n + 1)
        x = np.linspace(0.0, pipe.length_m, n + 1)
        offsets[sl] = x
        point_pipe[sl] = pipe.id
        elevation[sl] = network.pipe_elevations(pipe.id, x)
        q = steady.pipe_flow_m3_s[pipe.id]
        h0[sl] = steady.pipe_head_from_m[pipe.id] - np.arange(n + 1) * pipe_r[p] * q * abs(q)
        q0[sl] = q
    hv = elevation + fluid.vapour_head_m if cavitation else np.full(n_points, NO_CAVITATION_HEAD_M)
    pipe_index = {p.id: i for i, p in enumerate(network.pipes)}

    kinds, ptr, params, demand, orifice = [], [0], [], [], []
    end_point, end_nbr, end_sign, end_pipe, end_loss = [], [], [], [], []
    heads, orifices, orifice_z, valves, valve_outlet, valve_reverse = [], [], [], [], [], []
    pumps = []
    vessels, vessel_rows, vessel_start = [], [], []
    air_valves, air_rows = [], []
    initial_outflow = []
    sqrt2g = math.sqrt(2 * g)
    for node in network.nodes:
        ends = _end_order(network, node)
        for pipe_id, is_to_end in ends:
            p = pipe_index[pipe_id]
            point = first[p] + reaches[p] if is_to_end else first[p]
            end_point.append(point)
            end_nbr.append(point - 1 if is_to_end else point + 1)
            end_sign.append(1 if is_to_end else -1)
            end_pipe.append(p)
            end_loss.append(node.connection_resistance(network.pipe(pipe_id), g)
                            if isinstance(node, Junction) else 0.0)
        ptr.append(len(end_point))
        into = sum(steady.pipe_flow_m3_s[pid] * (1 if to else -1) for pid, to in ends)
        param, node_demand, node_orifice = 0, 0.0, -1
        if isinstance(node, (Reservoir, HeadSeries)):
            kind, param = KIND_FIXED_HEAD, len(heads)
            if isinstance(node, Reservoir):
                heads.append(np.full(n_steps + 1, node.head_m))
            else:
                heads.append(np.interp(times, node.times_s, node.heads_m))
        elif isinstance(node, (Junction, DeadEnd, Burst)):
            lossy = isinstance(node, Junction) and node.loss_coefficient > 0.0
            kind = KIND_LOSSY_JUNCTION if lossy else KIND_JUNCTION
            node_demand = getattr(node, "demand_m3_s", 0.0)
            if isinstance(node, Burst):
                node_orifice = len(orifices)
                orifices.append(node.effective_area_m2 * node.opening(times) * sqrt2g)
                orifice_z.append(node.elevation_m)
        elif isinstance(node, AirVessel):
            kind, param = KIND_AIR_VESSEL, len(vessels)
            head = _steady_node_head(ends, steady)
            vessels.append(node.id)
            vessel_rows.append(vessel_constants(node, head, fluid))
            vessel_start.append([node.gas_volume_m3, 0.0])
            into = 0.0
        elif isinstance(node, AirValve):
            kind, param = KIND_AIR_VALVE, len(air_valves)
            _check_air_valve_shut(node, _steady_node_head(ends, steady), fluid)
            air_valves.append(node.id)
            air_rows.append([node.elevation_m, node.inlet_area_m2, node.outlet_area_m2,
                             node.atmospheric_pressure_pa, GAS_CONSTANT_AIR * node.air_temperature_k,
                             fluid.density_kg_m3 * g])
            into = 0.0
        elif isinstance(node, Valve):
            kind = KIND_END_VALVE if len(ends) == 1 else KIND_INLINE_VALVE
            param = len(valves)
            valves.append(node.open_area_m2 * node.motion.opening(times) * sqrt2g)
            reverse = node.outlet_head_m is not None
            valve_outlet.append(node.outlet_head_m if reverse else node.elevation_m)
            valve_reverse.append(1 if reverse else 0)
            if kind == KIND_INLINE_VALVE:
                into = 0.0
        else:
            kind, param = KIND_PUMP, len(pumps)
            pumps.append((node, times))
            if len(ends) == 2:
                into = 0.0
        kinds.append(kind)
        params.append(param)
        demand.append(node_demand)
        orifice.append(node_orifice)
        initial_outflow.append(into)
    pump_arrays = _pump_arrays(pumps, steady, fluid, dt)
    return KernelLayout(
        pipe_first=first, pipe_reaches=reaches,
        coef=np.ascontiguousarray(np.column_stack([pipe_b, pipe_r, pipe_kb])),
        hv=hv, elevation=elevation, H0=h0, Q0=q0, point_pipe_ids=point_pipe,
        point_offsets_m=offsets, node_kind=np.array(kinds, dtype=np.int64),
        node_ptr=np.array(ptr, dtype=np.int64), node_param=np.array(params, dtype=np.int64),
        node_demand=np.array(demand, dtype=float), node_orifice=np.array(orifice, dtype=np.int64),
        ends=np.array([end_point, end_nbr, end_sign, end_pipe], dtype=np.int64).reshape(4, -1).T.copy(),
        head_table=_table(heads, n_steps), orifice_table=_table(orifices, n_steps),
        orifice_z=np.array(orifice_z, dtype=float), valve_table=_table(valves, n_steps),
        valve_outlet=np.array(valve_outlet, dtype=float),
        valve_reverse=np.array(valve_reverse, dtype=np.int64),
        initial_outflow=np.array(initial_outflow), pipe_index=pipe_index,
        end_loss=np.array(end_loss, dtype=float), vessel_ids=tuple(vessels),
        vessel_table=np.array(vessel_rows, dtype=float).reshape(-1, VESSEL_COLUMNS),
        vessel_state=np.array(vessel_start, dtype=float).reshape(-1, 2),
        air_valve_ids=tuple(air_valves),
        air_table=np.array(air_rows, dtype=float).reshape(-1, VALVE_COLUMNS), **pump_arrays)


def _steady_node_head(ends: list, steady: SteadyState) -> float:
    """Steady head at a node whose pipe ends are ``ends`` (pipe id, is_to_end) [m]."""
    pipe_id, is_to_end = ends[0]
    return (steady.pipe_head_to_m if is_to_end else steady.pipe_head_from_m)[pipe_id]


def _check_air_valve_shut(valve: AirValve, head_m: float, fluid) -> None:
    """The model starts from full pipes: an air valve must be shut in the steady state."""
    gauge_kpa = fluid.density_kg_m3 * fluid.gravity_m_s2 * (head_m - valve.elevation_m) / 1e3
    if gauge_kpa < 0.0:
        raise ValueError(
            f"air valve {valve.id!r}: the steady pressure there is {gauge_kpa:.1f} kPa (below "
            "atmospheric), so it would be open and the main part-full at the start; the model "
            "starts from full pipes: check the valve's elevation or the steady heads")


def air_valve_start(layout: "KernelLayout") -> np.ndarray:
    """The air valves' state at the start of a run: shut, no air (valves, 4)."""
    return np.zeros((len(layout.air_valve_ids), AIR_ROWS))


def head_table(network: Network, n_steps: int, time_step_s: float) -> np.ndarray:
    """Head per step of every reservoir and measured-head node, in node order [m].

    Rows follow the order in which :func:`build_layout` numbers fixed-head nodes, so a run
    with a new measured-head series can reuse a layout and swap only this table.
    """
    times = np.arange(n_steps + 1) * time_step_s
    rows = [np.full(n_steps + 1, node.head_m) if isinstance(node, Reservoir)
            else np.interp(times, node.times_s, node.heads_m)
            for node in network.nodes if isinstance(node, (Reservoir, HeadSeries))]
    return _table(rows, n_steps)


def _table(rows: list, n_steps: int) -> np.ndarray:
    return np.array(rows, dtype=float) if rows else np.zeros((0, n_steps + 1))


def _pump_arrays(pumps: list, steady: SteadyState, fluid, dt: float) -> dict:
    n = len(pumps)
    table_size = 721
    out = dict(pump_ids=tuple(node.id for node, _ in pumps), pump_units=np.zeros(n),
               pump_qr=np.zeros(n), pump_hr=np.zeros(n), pump_ct=np.zeros(n),
               pump_sump=np.full(n, np.nan), pump_check=np.zeros(n, dtype=np.int64),
               pump_wh=np.zeros((n, table_size)), pump_wb=np.zeros((n, table_size)),
               pump_inv_step=(table_size - 1) / (2 * math.pi), pump_state=np.zeros((n, 4)))
    cmds = []
    for m, (node, times) in enumerate(pumps):
        unit = node.unit
        chars = unit.characteristics()
        if chars.head.size != table_size:
            raise ValueError(f"pump {node.id!r}: characteristics need {table_size} table points")
        torque = unit.rated_torque_n_m(fluid.density_kg_m3, fluid.gravity_m_s2)
        out["pump_units"][m] = node.units_running
        out["pump_qr"][m] = unit.rated_flow_m3_s
        out["pump_hr"][m] = unit.rated_head_m
        out["pump_ct"][m] = torque * dt / (unit.inertia_kg_m2 * unit.rated_angular_speed_rad_s)
        if node.suction_head_m is not None:
            out["pump_sump"][m] = node.suction_head_m
        out["pump_check"][m] = 1 if node.check_valve else 0
        out["pump_wh"][m], out["pump_wb"][m] = chars.head, chars.torque
        cmds.append(node.operation.speed_command(times))
        alpha = steady.pump_speed_ratio[node.id]
        v = steady.pump_flow_m3_s[node.id] / (node.units_running * unit.rated_flow_m3_s)
        beta = float(chars.torque_ratio(alpha, v))
        is_open = 1.0 if (v > 0 or not node.check_valve) else 0.0
        out["pump_state"][m] = (alpha, beta, v, is_open)
    out["pump_cmd"] = np.array(cmds) if cmds else np.zeros((0, 1))
    return out
