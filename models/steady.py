"""Steady state of a network: flows and heads from its boundaries, pumps and friction.

The MOC run starts from this solution, so that nothing is typed in: reservoirs and measured
heads fix heads, junctions balance flow, valves and orifices pass Q = c sqrt(dH), pumps add
their head at the initial speed, and each pipe loses f L Q|Q| / (2 g D A^2) with f from
Colebrook–White at its own flow (unless a calibrated factor overrides it).

>>> from models.network import Fluid, Network, Pipe, Reservoir
>>> net = Network(Fluid(1000.0, 1e-6, -10.0),
...               (Pipe("P", "A", "B", 1000.0, 0.3, 1000.0, friction_factor=0.02),),
...               (Reservoir("A", 60.0), Reservoir("B", 50.0)))
>>> round(solve_steady_state(net).pipe_flow_m3_s["P"], 5)
0.12124
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from models.friction import darcy_friction_factor, reynolds_number
from models.network import (AirValve, AirVessel, Burst, DeadEnd, HeadSeries, Junction,
                            Network, PumpStation, Reservoir, Valve)

__all__ = ["SteadyState", "solve_steady_state", "initial_settings"]


@dataclass(frozen=True)
class SteadyState:
    """Steady flows and heads.

    Attributes
    ----------
    pipe_flow_m3_s : dict
        Flow in each pipe, positive from its from_node [m^3/s].
    pipe_head_from_m, pipe_head_to_m : dict
        Head at each pipe's two ends [m].
    friction_factor : dict
        Darcy factor used per pipe [-].
    pump_flow_m3_s, pump_speed_ratio : dict
        Station flow [m^3/s] and speed per unit [-]; flow 0 where the check valve is shut.
    overridden : frozenset
        Pipes whose factor was given by the caller (calibration), not computed.
    iterations : int
        Newton iterations used.
    residual : float
        Largest equation residual at the solution (m or m^3/s).
    """

    pipe_flow_m3_s: dict
    pipe_head_from_m: dict
    pipe_head_to_m: dict
    friction_factor: dict
    pump_flow_m3_s: dict
    pump_speed_ratio: dict
    overridden: frozenset
    iterations: int
    residual: float


def initial_settings(network: Network) -> dict:
    """Valve openings, pump speeds, measured heads and orifice openings at t = 0."""
    t0 = np.array([0.0])
    settings = {}
    for node in network.nodes:
        if isinstance(node, Valve):
            settings[node.id] = float(node.motion.opening(t0)[0])
        elif isinstance(node, PumpStation):
            op = node.operation
            settings[node.id] = float(np.interp(0.0, op.speed_times_s, op.speed_ratios))
        elif isinstance(node, HeadSeries):
            settings[node.id] = float(np.interp(0.0, node.times_s, node.heads_m))
        elif isinstance(node, Burst):
            settings[node.id] = float(node.opening(t0)[0])
    return settings


class _System:
    """Links (pipes, valves, pumps) between hydraulic points with fixed or free heads."""

    def __init__(self, network: Network, friction_override: dict | None):
        self.network = network
        self.g = network.fluid.gravity_m_s2
        self.settings = initial_settings(network)
        self.override = friction_override or {}
        self.fixed = {}            # point -> head
        self.free = []             # free points in unknown order
        self.outflow = {}          # point -> (demand, orifice c, orifice z, reverse allowed)
        self.links = []            # (kind, name, a, b, data)
        self.side = {}             # (node id, "in"|"out") -> point
        self._losses = {}          # pipe id -> connection losses (from end, to end)
        for node in network.nodes:
            self._add_node(node)
        for pipe in network.pipes:
            a = self.side.get((pipe.from_node, "out"), pipe.from_node)
            b = self.side.get((pipe.to_node, "in"), pipe.to_node)
            self.links.append(("pipe", pipe.id, a, b, pipe))
        self.index = {p: i for i, p in enumerate(self.free)}

    def _add_free(self, point, demand=0.0, c=0.0, z=0.0):
        self.free.append(point)
        self.outflow[point] = (demand, c, z)

    def _add_node(self, node) -> None:
        g2 = math.sqrt(2.0 * self.g)
        if isinstance(node, Reservoir):
            self.fixed[node.id] = node.head_m
        elif isinstance(node, HeadSeries):
            self.fixed[node.id] = self.settings[node.id]
        elif isinstance(node, (Junction, DeadEnd, AirVessel, AirValve)):  # no steady flow out
            self._add_free(node.id, getattr(node, "demand_m3_s", 0.0))
        elif isinstance(node, Burst):
            self._add_free(node.id, 0.0, node.effective_area_m2 * self.settings[node.id] * g2,
                           node.elevation_m)
        elif isinstance(node, Valve):
            c = node.open_area_m2 * self.settings[node.id] * g2
            pipes = len(self.network.pipes_ending_at(node.id)) + len(
                self.network.pipes_starting_at(node.id))
            if pipes == 1 and node.outlet_head_m is None:
                self._add_free(node.id, 0.0, c, node.elevation_m)
            elif pipes == 1:
                outlet = node.id + "#outlet"
                self.fixed[outlet] = node.outlet_head_m
                self._add_free(node.id)
                self.links.append(("valve", node.id, node.id, outlet, c))
            else:
                up, down = node.id + "#in", node.id + "#out"
                self._add_free(up)
                self._add_free(down)
                self.side[(node.id, "in")], self.side[(node.id, "out")] = up, down
                self.links.append(("valve", node.id, up, down, c))
        elif isinstance(node, PumpStation):
            down = node.id + "#out"
            self._add_free(down)
            self.side[(node.id, "out")] = down
            if self.network.pipes_ending_at(node.id):
                up = node.id + "#in"
                self._add_free(up)
                self.side[(node.id, "in")] = up
            else:
                up = node.id + "#sump"
                self.fixed[up] = node.suction_head_m
            self.links.append(("pump", node.id, up, down, node))

    def friction_factor(self, pipe, flow: float) -> float:
        if pipe.id in self.override:
            return self.override[pipe.id]
        if pipe.friction_factor is not None:
            return pipe.friction_factor
        velocity = flow / pipe.area_m2
        re = reynolds_number(velocity, pipe.diameter_m, self.network.fluid.kinematic_viscosity_m2_s)
        return darcy_friction_factor(re, pipe.roughness_m / pipe.diameter_m)

    def connection_losses(self, pipe) -> tuple[float, float]:
        """Local-loss resistances [s^2/m^5] of a pipe's connections to junctions with a
        loss coefficient, at its from and to end (0 elsewhere)."""
        if pipe.id not in self._losses:
            self._losses[pipe.id] = self._connection_losses(pipe)
        return self._losses[pipe.id]

    def _connection_losses(self, pipe) -> tuple[float, float]:
        ends = []
        for node_id in (pipe.from_node, pipe.to_node):
            node = self.network.node(node_id)
            ends.append(node.connection_resistance(pipe, self.g) if isinstance(node, Junction) else 0.0)
        return ends[0], ends[1]

    def head(self, point, x):
        return self.fixed[point] if point in self.fixed else x[len(self.links) + self.index[point]]


def _pump_head(node: PumpStation, chars, alpha: float, flow: float):
    """Station head [m] and its derivative by flow [m per m^3/s] at speed alpha."""
    unit = node.unit
    scale = node.units_running * unit.rated_flow_m3_s
    v = flow / scale
    h = float(chars.head_ratio(alpha, v)) * unit.rated_head_m
    dv = 1e-6
    slope = (float(chars.head_ratio(alpha, v + dv)) - float(chars.head_ratio(alpha, v - dv))) / (2 * dv)
    return h, slope * unit.rated_head_m / scale


def solve_steady_state(network: Network, friction_override: dict | None = None,
                       tolerance: float = 1e-10, max_iterations: int = 200) -> SteadyState:
    """Solve the steady flows and heads of a network (Newton's method, damped).

    Parameters
    ----------
    network : Network
    friction_override : dict, optional
        Darcy factor per pipe id, overriding the pipe's own factor and Colebrook–White.
    tolerance : float
        Convergence limit on the largest residual (m of head, m^3/s of flow).

    Raises
    ------
    ValueError
        When Newton's method does not converge (names the largest residual); usually a
        network without any fixed head, or a pump that cannot reach the system head.

    Notes
    -----
    Unknowns: the flow of every link and the head of every free point. Equations: per
    pipe H_a - H_b = f L Q|Q| / (2 g D A^2) (Darcy–Weisbach; f updated from the flow each
    iteration), plus K Q|Q| / (2 g A^2) per connection to a junction with a loss
    coefficient K (the pipe's end head then differs from the junction's by that loss), per valve H_a - H_b = Q|Q| / c^2, per pump H_b - H_a = H_R h(alpha, v) from
    its characteristics, per free point continuity. A pump whose check valve would pass
    reverse flow is shut (Q = 0) and the system solved again.
    """
    system = _System(network, friction_override)
    if not system.fixed:
        raise ValueError("the network has no reservoir, measured head or pump sump: "
                         "add a fixed-head boundary so the steady heads are defined")
    closed = {name for kind, name, a, b, data in system.links
              if kind == "pump" and system.settings[name] <= 0.0 and data.check_valve}
    for _ in range(len(system.links) + 1):
        x, iterations, residual = _newton(system, closed, tolerance, max_iterations)
        reversed_pumps = {name for j, (kind, name, a, b, data) in enumerate(system.links)
                          if kind == "pump" and data.check_valve and name not in closed
                          and x[j] < -_reverse_flow_floor(data)}
        if not reversed_pumps:
            break
        closed |= reversed_pumps
    return _steady_result(system, x, closed, iterations, residual)


def _reverse_flow_floor(station: PumpStation) -> float:
    """Flow [m^3/s] below which a pump's flow counts as reversed: a pump at shut-off
    against a dead end solves to a flow of rounding size and either sign, which must not
    close its check valve."""
    return 1e-9 * station.units_running * station.unit.rated_flow_m3_s


def _newton(system: _System, closed: set, tolerance: float, max_iterations: int):
    n_links, n_free = len(system.links), len(system.free)
    x = np.zeros(n_links + n_free)
    x[:n_links] = 1e-3
    x[n_links:] = np.mean(list(system.fixed.values()))
    chars = {name: data.unit.characteristics() for kind, name, a, b, data in system.links
             if kind == "pump"}
    residual = math.inf
    for iteration in range(1, max_iterations + 1):
        f, jac = _equations(system, x, closed, chars)
        residual = float(np.max(np.abs(f)))
        if residual < tolerance:
            return x, iteration, residual
        step = np.linalg.lstsq(jac, -f, rcond=None)[0]
        scale = 1.0
        for _ in range(30):
            trial = x + scale * step
            if float(np.max(np.abs(_equations(system, trial, closed, chars)[0]))) < residual:
                break
            scale *= 0.5
        x = x + scale * step
    raise ValueError(
        f"steady state did not converge after {max_iterations} iterations (largest residual "
        f"{residual:.3g}); check that every part of the network connects to a fixed head and "
        "that pumps can deliver against the static lift"
    )


def _equations(system: _System, x: np.ndarray, closed: set, chars: dict):
    n_links = len(system.links)
    n = n_links + len(system.free)
    f = np.zeros(n)
    jac = np.zeros((n, n))

    def add_head(row, point, sign):
        if point in system.fixed:
            return sign * system.fixed[point]
        jac[row, n_links + system.index[point]] += sign
        return sign * x[n_links + system.index[point]]

    for j, (kind, name, a, b, data) in enumerate(system.links):
        q = x[j]
        if (kind == "pump" and name in closed) or (kind == "valve" and data <= 0.0):
            f[j] = q
            jac[j, j] = 1.0
            continue
        if kind == "pipe":
            fr = system.friction_factor(data, q)
            r = fr * data.length_m / (2 * system.g * data.diameter_m * data.area_m2**2)
            r += sum(system.connection_losses(data))
            f[j] = add_head(j, a, 1.0) + add_head(j, b, -1.0) - r * q * abs(q)
            jac[j, j] = -max(2 * r * abs(q), 1e-9)
        elif kind == "valve":
            f[j] = add_head(j, a, 1.0) + add_head(j, b, -1.0) - q * abs(q) / data**2
            jac[j, j] = -max(2 * abs(q) / data**2, 1e-9)
        else:
            h, slope = _pump_head(data, chars[name], system.settings[name], q)
            f[j] = add_head(j, b, 1.0) + add_head(j, a, -1.0) - h
            jac[j, j] = -slope
        for point, sign in ((a, -1.0), (b, 1.0)):
            if point in system.index:
                row = n_links + system.index[point]
                f[row] += sign * q
                jac[row, j] += sign
    for point, i in system.index.items():
        row = n_links + i
        demand, c, z = system.outflow[point]
        f[row] -= demand
        if c > 0:
            depth = x[row] - z
            if depth > 0:
                f[row] -= c * math.sqrt(depth)
                jac[row, row] -= 0.5 * c / math.sqrt(max(depth, 1e-12))
    return f, jac


def _steady_result(system: _System, x, closed, iterations, residual) -> SteadyState:
    flows, head_from, head_to, friction, pump_flow, pump_speed = {}, {}, {}, {}, {}, {}
    for j, (kind, name, a, b, data) in enumerate(system.links):
        if kind == "pipe":
            q = float(x[j])
            k_from, k_to = system.connection_losses(data)
            flows[name] = q
            head_from[name] = float(system.head(a, x)) - k_from * q * abs(q)
            head_to[name] = float(system.head(b, x)) + k_to * q * abs(q)
            friction[name] = system.friction_factor(data, x[j])
        elif kind == "pump":
            pump_flow[name] = 0.0 if name in closed else float(x[j])
            pump_speed[name] = system.settings[name]
    return SteadyState(flows, head_from, head_to, friction, pump_flow, pump_speed,
                       frozenset(system.override), iterations, residual)
