"""Method-of-characteristics model of a pipe network.

Build a :class:`MocModel` once from a :class:`~models.network.Network` and a time step; run
it as often as needed (calibration re-runs it with changed wave speeds, friction factors or
a new measured head series). A run takes the steady state of the network, lays it out into
the kernel's arrays and marches the characteristics with the compiled kernel of
:mod:`models.moc_kernel`. What does not change between runs is kept: steady states (shared
with the copies :meth:`MocModel.with_parameters` makes, since wave speeds do not enter
them; solved again when friction factors or the initial measured heads change) and the
layout per number of steps (a new measured-head series only refills its head table).

>>> from models.network import Fluid, Network, Pipe, Reservoir, Valve, ValveMotion
>>> net = Network(Fluid(1000.0, 1e-6, -10.0),
...     (Pipe("P1", "R", "V", 1000.0, 0.5, 1000.0, friction_factor=0.0),),
...     (Reservoir("R", 100.0), Valve("V", 0.0, ValveMotion.constant(0.0))))
>>> model = MocModel(net, time_step_s=0.01)
>>> model.discretisation.reaches["P1"]
100

References
----------
.. [1] E. B. Wylie, V. L. Streeter, *Fluid Transients in Systems*, Prentice Hall, 1993,
   ch. 3 (from memory).
.. [2] M. S. Ghidaoui, B. W. Karney, "Equivalent differential equations in fixed-grid
   characteristics method", J. Hydraul. Eng. 120(10), 1994 (wave-speed adjustment).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from models import moc_kernel
from models.moc_boundaries import CAV_FIRST, CAV_LARGEST, CAV_LAST, CAV_ROWS, CAV_VOLUME
from models.friction import reynolds_number, vardy_brown_shear_decay_coefficient
from models.moc_layout import KernelLayout, air_valve_start, build_layout, head_table
from models.moc_results import (CavityEvent, Discretisation, PipeEnvelope, Probe,
                                SimulationResult)
from models.network import HeadSeries, Network
from models.steady import SteadyState, solve_steady_state

__all__ = ["MocModel", "discretise", "choose_time_step", "Probe"]


def discretise(network: Network, time_step_s: float, max_adjustment: float = 0.01) -> Discretisation:
    """Whole reaches per pipe for one time step, with the fitted wave speeds.

    Notes
    -----
    n_i = max(1, round(L_i / (a_i dt))), a_i' = L_i / (n_i dt), so that every reach has
    Courant number 1 (Ghidaoui & Karney 1994; Wylie & Streeter 1993, sec. 3.3).

    Raises
    ------
    ValueError
        When a wave speed would change by more than ``max_adjustment``.
    """
    if not time_step_s > 0:
        raise ValueError(f"time_step_s must be positive, got {time_step_s!r}")
    reaches, speeds = {}, {}
    worst, worst_pipe = 0.0, ""
    for pipe in network.pipes:
        n = max(1, int(round(pipe.length_m / (pipe.wave_speed_m_s * time_step_s))))
        adjusted = pipe.length_m / (n * time_step_s)
        change = abs(adjusted - pipe.wave_speed_m_s) / pipe.wave_speed_m_s
        reaches[pipe.id], speeds[pipe.id] = n, adjusted
        if change > worst:
            worst, worst_pipe = change, pipe.id
    if worst > max_adjustment:
        travel = network.pipe(worst_pipe).length_m / network.pipe(worst_pipe).wave_speed_m_s
        raise ValueError(
            f"pipe {worst_pipe!r} needs its wave speed changed by {100 * worst:.2f} % to fit "
            f"whole reaches at dt = {time_step_s:g} s (limit {100 * max_adjustment:.2f} %); "
            f"shorten the time step (its travel time is {travel:.4g} s) or use "
            "choose_time_step()"
        )
    return Discretisation(time_step_s, reaches, speeds, worst, worst_pipe)


def choose_time_step(network: Network, max_time_step_s: float, max_adjustment: float = 0.01,
                     min_reaches: int = 1) -> float:
    """Largest time step <= ``max_time_step_s`` whose wave-speed adjustments stay in limit.

    Tries dt = T_min / m for growing whole m, where T_min is the shortest pipe travel time,
    then any dt at which every pipe fits within ``max_adjustment``.
    """
    travel = [p.length_m / p.wave_speed_m_s for p in network.pipes]
    shortest = min(travel)
    m = max(min_reaches, math.ceil(shortest / max_time_step_s))
    for _ in range(100000):
        dt = shortest / m
        try:
            discretise(network, dt, max_adjustment)
            return dt
        except ValueError:
            m += 1
    raise ValueError("no time step fits every pipe within the adjustment limit")


class MocModel:
    """A network discretised for one time step, ready to run.

    Parameters
    ----------
    network : Network
    time_step_s : float
        Global time step [s].
    max_wave_speed_adjustment : float
        Largest relative wave-speed change allowed to fit whole reaches [-].
    cavitation : bool
        Discrete vapour cavity model on (pressure held at vapour pressure).
    unsteady_friction : None, "vardy" or float
        None: quasi-steady friction only. "vardy": Brunone coefficient k per pipe from
        Vardy's shear-decay coefficient at the initial Reynolds number. A float: that k
        on every pipe [-].
    friction_override : dict, optional
        Darcy factor per pipe id (calibration), overriding Colebrook–White.
    """

    def __init__(self, network: Network, time_step_s: float, *,
                 max_wave_speed_adjustment: float = 0.01, cavitation: bool = True,
                 unsteady_friction: None | str | float = None,
                 friction_override: dict | None = None):
        if isinstance(unsteady_friction, str) and unsteady_friction != "vardy":
            raise ValueError(f"unsteady_friction must be None, 'vardy' or a number, got "
                             f"{unsteady_friction!r}")
        self.network = network
        self.max_wave_speed_adjustment = max_wave_speed_adjustment
        self.cavitation = cavitation
        self.unsteady_friction = unsteady_friction
        self.friction_override = dict(friction_override or {})
        self.discretisation = discretise(network, time_step_s, max_wave_speed_adjustment)
        # Steady states do not depend on wave speeds or the unsteady coefficient, so the
        # copies made by with_parameters share this cache (keyed by friction factors and
        # initial measured heads). Layouts are this model's own (keyed by steps and steady).
        self._steady_cache: dict = {}
        self._layout_cache: dict = {}

    @property
    def time_step_s(self) -> float:
        """Time step [s]."""
        return self.discretisation.time_step_s

    def with_parameters(self, *, wave_speed_m_s: dict | None = None,
                        wave_speed_factor: float | None = None,
                        friction_factor: dict | None = None,
                        unsteady_coefficient: float | None = None,
                        time_step_s: float | None = None) -> "MocModel":
        """A copy with changed wave speeds, friction factors or unsteady coefficient.

        With one ``wave_speed_factor`` on all pipes and no explicit step, the time step is
        divided by the factor so that the reaches (and the wave-speed adjustment) stay
        exactly as they were.
        """
        pipes = []
        for pipe in self.network.pipes:
            speed = pipe.wave_speed_m_s
            if wave_speed_m_s and pipe.id in wave_speed_m_s:
                speed = wave_speed_m_s[pipe.id]
            if wave_speed_factor is not None:
                speed *= wave_speed_factor
            pipes.append(replace(pipe, wave_speed_m_s=speed))
        dt = time_step_s
        if dt is None:
            dt = self.time_step_s / (wave_speed_factor or 1.0)
        override = {**self.friction_override, **(friction_factor or {})}
        unsteady = self.unsteady_friction if unsteady_coefficient is None else unsteady_coefficient
        model = MocModel(self.network.replace(pipes=pipes), dt,
                         max_wave_speed_adjustment=self.max_wave_speed_adjustment,
                         cavitation=self.cavitation, unsteady_friction=unsteady,
                         friction_override=override)
        model._steady_cache = self._steady_cache
        return model

    def steady_state(self, network: Network | None = None) -> SteadyState:
        """Steady state of the network (cached by the initial measured heads)."""
        network = network or self.network
        key = self._steady_key(network)
        if key not in self._steady_cache:
            self._steady_cache[key] = solve_steady_state(network, self.friction_override)
        return self._steady_cache[key]

    def _steady_key(self, network: Network) -> tuple:
        heads = tuple((n.id, float(np.interp(0.0, n.times_s, n.heads_m)))
                      for n in network.nodes if isinstance(n, HeadSeries))
        return heads, tuple(sorted(self.friction_override.items()))

    def _unsteady_coefficients(self, steady: SteadyState) -> dict:
        if self.unsteady_friction is None:
            return {p.id: 0.0 for p in self.network.pipes}
        if not isinstance(self.unsteady_friction, str):
            return {p.id: float(self.unsteady_friction) for p in self.network.pipes}
        nu = self.network.fluid.kinematic_viscosity_m2_s
        return {p.id: vardy_brown_shear_decay_coefficient(
            reynolds_number(steady.pipe_flow_m3_s[p.id] / p.area_m2, p.diameter_m, nu))
            for p in self.network.pipes}

    def run(self, duration_s: float, probes: tuple[Probe, ...] | list = (), *,
            head_series: dict | None = None, record_every: int = 0) -> SimulationResult:
        """Steady state, then ``duration_s`` of transient.

        Parameters
        ----------
        duration_s : float
            Simulated time [s]; scenario events are placed by their own times.
        probes : sequence of Probe
            Where to record the head every step.
        head_series : dict, optional
            node id -> (times_s, heads_m) replacing the data of HeadSeries nodes for this
            run (event replay without rebuilding).
        record_every : int
            If > 0, keep heads and flows at every computing point every so many steps.
        """
        if not duration_s > 0:
            raise ValueError(f"duration_s must be positive, got {duration_s!r}")
        network = self._network_for_run(head_series or {})
        steady = self.steady_state(network)
        n_steps = int(round(duration_s / self.time_step_s))
        layout = self._layout(network, steady, n_steps, bool(head_series))
        return _execute(layout, network, steady, self.discretisation, tuple(probes), n_steps,
                        record_every)

    def _layout(self, network: Network, steady: SteadyState, n_steps: int,
                new_heads: bool) -> KernelLayout:
        """The run's kernel layout: built once per (steps, steady state), then reused; a
        new measured-head series only refills the head table."""
        key = (n_steps, self._steady_key(network))
        layout = self._layout_cache.get(key)
        if layout is None:
            layout = build_layout(network, self.discretisation, steady,
                                  self._unsteady_coefficients(steady), n_steps,
                                  self.cavitation)
            if len(self._layout_cache) >= 8:
                self._layout_cache.pop(next(iter(self._layout_cache)))
            self._layout_cache[key] = layout
            return layout
        if new_heads:
            layout = replace(layout, head_table=head_table(network, n_steps, self.time_step_s))
        return layout

    def _network_for_run(self, head_series: dict) -> Network:
        if not head_series:
            return self.network
        nodes = []
        for node in self.network.nodes:
            if node.id in head_series:
                if not isinstance(node, HeadSeries):
                    raise ValueError(f"node {node.id!r} is not a HeadSeries boundary")
                times, heads = head_series[node.id]
                node = HeadSeries(node.id, times, heads, node.elevation_m)
            nodes.append(node)
        unknown = set(head_series) - {n.id for n in nodes}
        if unknown:
            raise ValueError(f"head_series names unknown nodes {sorted(unknown)}")
        return self.network.replace(nodes=nodes)


def _execute(layout: KernelLayout, network, steady, disc, probes, n_steps, record_every):
    probe_a, probe_b, probe_w = layout.locate_probes(network, probes)
    n_points = layout.H0.size
    n_pumps = layout.pump_units.size
    n_records = n_steps // record_every + 1 if record_every > 0 else 1
    probe_out = np.zeros((n_steps + 1, len(probes)))
    ext_out = np.zeros((n_steps + 1, layout.node_kind.size))
    pump_out = np.zeros((n_steps + 1, n_pumps, 2))
    env = np.vstack([layout.H0, layout.H0])
    cavity = np.zeros((CAV_ROWS, n_points))
    cavity[CAV_FIRST] = -1.0
    cavity[CAV_LAST] = -1.0
    openings = np.zeros(n_points, dtype=np.int64)
    rec_h = np.zeros((n_records, n_points if record_every > 0 else 0))
    rec_q = np.zeros_like(rec_h)
    pump_state = layout.pump_state.copy()
    air_out = np.zeros((n_steps + 1, len(layout.air_valve_ids)))
    ext_out[0] = layout.initial_outflow
    moc_kernel.run_transient(
        n_steps, disc.time_step_s, record_every, layout.pipe_first, layout.pipe_reaches,
        layout.coef, layout.hv, layout.H0, layout.Q0, layout.node_kind, layout.node_ptr,
        layout.node_param, layout.node_demand, layout.node_orifice, layout.ends,
        layout.head_table, layout.orifice_table, layout.orifice_z, layout.valve_table,
        layout.valve_outlet, layout.valve_reverse, layout.pump_units, layout.pump_qr,
        layout.pump_hr, layout.pump_ct, layout.pump_sump, layout.pump_check, layout.pump_cmd,
        layout.pump_wh, layout.pump_wb, layout.pump_inv_step, pump_state, probe_a, probe_b,
        probe_w, probe_out, ext_out, pump_out, env, cavity, openings, rec_h, rec_q,
        layout.end_loss, layout.vessel_table, layout.vessel_state.copy(), layout.air_table,
        air_valve_start(layout), air_out)
    hmax, hmin = env[0], env[1]
    vol = cavity[CAV_VOLUME]
    cav_count, cav_first, cav_last = openings, cavity[CAV_FIRST], cavity[CAV_LAST]
    cav_max = cavity[CAV_LARGEST]
    times = np.arange(n_steps + 1) * disc.time_step_s
    envelopes = _envelopes(layout, network, hmax, hmin)
    cavities = _cavities(layout, cav_count, cav_first, cav_last, cav_max, vol)
    recorded = record_every > 0
    return SimulationResult(
        times_s=times, probe_names=tuple(p.name for p in probes), probe_heads_m=probe_out,
        node_ids=tuple(n.id for n in network.nodes), node_outflow_m3_s=ext_out,
        pump_ids=layout.pump_ids, pump_speed_ratio=pump_out[:, :, 0],
        pump_flow_m3_s=pump_out[:, :, 1], envelopes=envelopes, cavities=cavities,
        steady=steady, discretisation=disc, point_pipe_ids=layout.point_pipe_ids,
        point_offsets_m=layout.point_offsets_m, open_cavity_volume_m3=float(vol.sum()),
        recorded_times_s=times[::record_every] if recorded else None,
        recorded_heads_m=rec_h if recorded else None,
        recorded_flows_m3_s=rec_q if recorded else None,
        vessel_gas_volume_m3=_vessel_gas_volumes(layout, network, ext_out, disc.time_step_s),
        vessel_capacity_m3={v: network.node(v).vessel_volume_m3 for v in layout.vessel_ids},
        air_volume_m3={v: air_out[:, k].copy() for k, v in enumerate(layout.air_valve_ids)})


def _vessel_gas_volumes(layout: KernelLayout, network, ext_out, dt: float) -> dict:
    """Gas volume of each surge vessel per step [m^3]: its start volume less its inflow (its
    node outflow) integrated by the trapezoidal rule the kernel uses."""
    columns = {node.id: n for n, node in enumerate(network.nodes)}
    out = {}
    for vessel_id, v0 in zip(layout.vessel_ids, layout.vessel_state[:, 0]):
        q = ext_out[:, columns[vessel_id]]
        out[vessel_id] = v0 - np.concatenate(([0.0], np.cumsum(0.5 * dt * (q[1:] + q[:-1]))))
    return out


def _envelopes(layout: KernelLayout, network: Network, hmax, hmin) -> tuple:
    fluid = network.fluid
    rho_g = fluid.density_kg_m3 * fluid.gravity_m_s2
    result = []
    for p, pipe in enumerate(network.pipes):
        first, n = layout.pipe_first[p], layout.pipe_reaches[p]
        sl = slice(first, first + n + 1)
        z = layout.elevation[sl]
        result.append(PipeEnvelope(pipe.id, layout.point_offsets_m[sl].copy(), z.copy(),
                                   hmax[sl].copy(), hmin[sl].copy(), rho_g * (hmax[sl] - z),
                                   rho_g * (hmin[sl] - z)))
    return tuple(result)


def _cavities(layout: KernelLayout, count, first, last, largest, vol) -> tuple:
    events = []
    for i in np.flatnonzero(count > 0):
        still_open = vol[i] > 0 or last[i] < first[i]
        events.append(CavityEvent(str(layout.point_pipe_ids[i]), float(layout.point_offsets_m[i]),
                                  float(first[i]), math.nan if still_open else float(last[i]),
                                  float(largest[i]), int(count[i])))
    return tuple(events)
