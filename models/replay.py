"""Event replay: drive the MOC model with a measured head and predict the other sensors.

A logger near a boundary (a pump station, a valve, a reservoir end) records what that
boundary did to the main. Cutting the network at that logger's chainage and imposing its
measured head there as a head-time-series boundary removes everything one does not know
about the boundary (pump inertia, check-valve behaviour, valve stroke): the rest of the
network is then a model with only pipe parameters left, which the other loggers test.

Pieces of this module:

* :func:`cut_network_at` splits a network at a chainage and puts a
  :class:`~models.network.HeadSeries` boundary there (:class:`ReplayCut`);
* :func:`flow_from_head_drop` inverts Darcy–Weisbach for the initial flow when the logs
  carry no flow meter;
* :func:`match_inflow` shifts the downstream fixed heads so that the steady inflow at the
  cut equals a measured or derived flow (the pre-event pressures then follow from friction);
* :func:`block_mean` is the decimation used to calibrate on a coarser step;
* :class:`ReplayModel` runs the cut network for given wave speeds, friction factors and
  unsteady coefficient and returns the heads at the target probes.

Pipe ids in the public API are always those of the original network; a cut pipe keeps its
id for the piece that is kept (the piece beyond the cut, when both are kept, is named
``<id>#beyond``).

>>> from models.network import Fluid, Network, Pipe, PumpStation, Reservoir
>>> net = Network(Fluid(1000.0, 1e-6, -10.0),
...     (Pipe("P1", "A", "B", 1000.0, 0.3, 1000.0, friction_factor=0.02),),
...     (Reservoir("A", 60.0), Reservoir("B", 50.0)))
>>> cut = cut_network_at(net, "P1", 100.0, 59.0, keep_points=[("P1", 500.0)])
>>> [(p.id, p.from_node, p.to_node, p.length_m) for p in cut.network.pipes]
[('P1', 'replay_boundary', 'B', 900.0)]
>>> cut.probe("S2", "P1", 500.0).offset_m
400.0
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Iterable, Mapping, Sequence

import numpy as np
from scipy.optimize import brentq

from models.friction import darcy_friction_factor, reynolds_number
from models.moc import MocModel
from models.moc_results import Probe, SimulationResult
from models.network import HeadSeries, Network, Pipe, Reservoir, Valve
from models.steady import SteadyState, solve_steady_state

__all__ = [
    "ReplayCut",
    "cut_network_at",
    "flow_from_head_drop",
    "match_inflow",
    "steady_inflow_m3_s",
    "block_mean",
    "InitialFlow",
    "ReplayModel",
    "BOUNDARY_ID",
]

BOUNDARY_ID = "replay_boundary"
#: A cut closer than this to a pipe end is taken at the node itself [m].
NODE_SNAP_M = 1e-3


@dataclass(frozen=True, eq=False)
class ReplayCut:
    """A network cut at one chainage with a head-series boundary there.

    Attributes
    ----------
    network : Network
        The kept part, with the boundary ``boundary_id`` at the cut.
    boundary_id : str
    pipe_id : str
        The original pipe that was cut.
    offset_m : float
        Cut chainage on that pipe, from its from_node [m].
    pieces : tuple of (piece id, start offset, end offset)
        Kept pieces of the cut pipe in original offsets [m].
    dropped_nodes, dropped_pipes : tuple of str
        What lies on the far side of the cut and is no longer modelled.
    """

    network: Network
    boundary_id: str
    pipe_id: str
    offset_m: float
    pieces: tuple
    dropped_nodes: tuple
    dropped_pipes: tuple

    def sub_pipe_ids(self, pipe_id: str) -> tuple[str, ...]:
        """Ids in the cut network of an original pipe (empty when it was dropped)."""
        if pipe_id == self.pipe_id:
            return tuple(piece for piece, _, _ in self.pieces)
        return () if pipe_id in self.dropped_pipes else (pipe_id,)

    def probe(self, name: str, pipe_id: str, offset_m: float) -> Probe:
        """Probe in the cut network at an original (pipe, offset).

        Raises
        ------
        ValueError
            When the point lies on the part that was cut away.
        """
        if pipe_id != self.pipe_id:
            if pipe_id in self.dropped_pipes:
                raise ValueError(f"{name!r} on pipe {pipe_id!r} lies beyond the replay cut "
                                 f"at {self.pipe_id!r} {self.offset_m:.1f} m")
            return Probe(name, pipe_id, float(offset_m))
        for piece, start, end in self.pieces:
            if start - 1e-9 <= offset_m <= end + 1e-9:
                return Probe(name, piece, float(min(max(offset_m - start, 0.0), end - start)))
        raise ValueError(f"{name!r} at {offset_m:.1f} m on pipe {pipe_id!r} lies on the side of "
                         f"the replay cut ({self.offset_m:.1f} m) that is not modelled")

    def inflow_terms(self) -> tuple[tuple[str, float], ...]:
        """(pipe id, sign): flow into the kept network at the boundary = sum sign Q."""
        terms = [(p.id, 1.0) for p in self.network.pipes_starting_at(self.boundary_id)]
        terms += [(p.id, -1.0) for p in self.network.pipes_ending_at(self.boundary_id)]
        return tuple(terms)


def _components_without(network: Network, pipe_id: str, start: str) -> set[str]:
    adjacency: dict[str, list[str]] = {}
    for p in network.pipes:
        if p.id != pipe_id:
            adjacency.setdefault(p.from_node, []).append(p.to_node)
            adjacency.setdefault(p.to_node, []).append(p.from_node)
    seen, stack = {start}, [start]
    while stack:
        for nxt in adjacency.get(stack.pop(), []):
            if nxt not in seen:
                seen.add(nxt)
                stack.append(nxt)
    return seen


def _piece(pipe: Pipe, piece_id: str, start: float, end: float, from_node: str,
           to_node: str) -> Pipe:
    offsets = [o - start for o in pipe.profile_offsets_m if start < o < end]
    elevations = [z for o, z in zip(pipe.profile_offsets_m, pipe.profile_elevations_m)
                  if start < o < end]
    return replace(pipe, id=piece_id, from_node=from_node, to_node=to_node,
                   length_m=end - start, profile_offsets_m=tuple(offsets),
                   profile_elevations_m=tuple(elevations))


def cut_network_at(network: Network, pipe_id: str, offset_m: float, initial_head_m: float,
                   keep_points: Iterable[tuple[str, float]] = (),
                   boundary_id: str = BOUNDARY_ID) -> ReplayCut:
    """Cut a network at a chainage and impose a head-time-series boundary there.

    Parameters
    ----------
    network : Network
    pipe_id : str
        Pipe of the driving sensor.
    offset_m : float
        Its chainage from the pipe's from_node [m].
    initial_head_m : float
        Head of the boundary before the event [m] (its series is given per run).
    keep_points : iterable of (pipe id, offset)
        Points that must stay in the model (the other sensors). When the cut pipe is a
        bridge of the pipe graph, the side that holds none of them is dropped; otherwise
        both sides stay attached to the boundary.

    Raises
    ------
    ValueError
        Offset outside the pipe, or a cut at a node whose far side must be kept.
    """
    pipe = network.pipe(pipe_id)
    if not 0.0 <= offset_m <= pipe.length_m:
        raise ValueError(f"cut offset {offset_m!r} m is outside pipe {pipe_id!r} "
                         f"(0 to {pipe.length_m} m)")
    side_from = _components_without(network, pipe_id, pipe.from_node)
    bridge = pipe.to_node not in side_from
    side_to = _components_without(network, pipe_id, pipe.to_node) if bridge else side_from
    keep_from = keep_to = True
    if bridge:
        points = list(keep_points)

        def on_side(side: set[str], near_from: bool) -> bool:
            for pid, off in points:
                if pid == pipe_id:
                    if (off < offset_m) == near_from:
                        return True
                else:
                    q = network.pipe(pid)
                    if q.from_node in side:
                        return True
            return False

        keep_from, keep_to = on_side(side_from, True), on_side(side_to, False)
        if not (keep_from or keep_to):
            keep_from = keep_to = True
    z_cut = float(network.pipe_elevations(pipe_id, np.array([offset_m]))[0])
    at_from, at_to = offset_m <= NODE_SNAP_M, offset_m >= pipe.length_m - NODE_SNAP_M
    if (at_from and keep_from and bridge and len(side_from) > 1) or (
            at_to and keep_to and bridge and len(side_to) > 1):
        raise ValueError(f"the driving sensor sits at a node of pipe {pipe_id!r} whose far side "
                         "must stay in the model; drive at a sensor inside a pipe")
    pieces, new_pipes = [], []
    if keep_from and not at_from:
        pieces.append((pipe_id, 0.0, float(offset_m)))
        new_pipes.append(_piece(pipe, pipe_id, 0.0, offset_m, pipe.from_node, boundary_id))
    if keep_to and not at_to:
        piece_id = pipe_id if not pieces else pipe_id + "#beyond"
        pieces.append((piece_id, float(offset_m), pipe.length_m))
        new_pipes.append(_piece(pipe, piece_id, offset_m, pipe.length_m, boundary_id,
                                pipe.to_node))
    dropped_nodes: set[str] = set()
    if bridge and not keep_from:
        dropped_nodes |= side_from
    if bridge and not keep_to:
        dropped_nodes |= side_to
    if at_from and not keep_from:
        dropped_nodes.add(pipe.from_node)
    if at_to and not keep_to:
        dropped_nodes.add(pipe.to_node)
    pipes = [p for p in network.pipes if p.id != pipe_id
             and p.from_node not in dropped_nodes and p.to_node not in dropped_nodes]
    dropped_pipes = tuple(sorted(p.id for p in network.pipes
                                 if p.id != pipe_id and p not in pipes))
    nodes = [n for n in network.nodes if n.id not in dropped_nodes]
    boundary = HeadSeries(boundary_id, np.array([0.0]), np.array([float(initial_head_m)]), z_cut)
    sub = Network(network.fluid, tuple(new_pipes + pipes), tuple(nodes + [boundary]))
    return ReplayCut(sub, boundary_id, pipe_id, float(offset_m), tuple(pieces),
                     tuple(sorted(dropped_nodes)), dropped_pipes)


def flow_from_head_drop(head_drop_m: float, legs: Sequence[tuple[float, float, float]],
                        gravity_m_s2: float = 9.80665, roughness_m: Sequence[float] | None = None,
                        kinematic_viscosity_m2_s: float | None = None) -> float:
    """Steady flow that loses ``head_drop_m`` to friction along pipes in series [m^3/s].

    Parameters
    ----------
    head_drop_m : float
        Piezometric head drop in the direction of travel [m]; negative gives reverse flow.
    legs : sequence of (length [m], diameter [m], Darcy factor [-])
        The pipes of the path. A factor of ``None``/NaN with ``roughness_m`` and
        ``kinematic_viscosity_m2_s`` given is found from Colebrook–White at the flow.

    Notes
    -----
    Darcy–Weisbach, h_f = sum_i f_i L_i Q|Q| / (2 g D_i A_i^2), solved for Q; with factors
    from Colebrook–White the pair (Q, f) is iterated to a fixed point.

    References
    ----------
    .. [1] C. F. Colebrook, J. ICE 11(4), 1939 (friction factor).
    """
    if not legs:
        raise ValueError("flow_from_head_drop needs at least one pipe leg")
    factors = [f for _, _, f in legs]
    q = 0.0
    for _ in range(50):
        total = 0.0
        for i, (length, diameter, _) in enumerate(legs):
            area = math.pi * diameter**2 / 4.0
            f = factors[i]
            if f is None or not math.isfinite(f):
                if roughness_m is None or kinematic_viscosity_m2_s is None:
                    raise ValueError(f"leg {i}: give a Darcy factor or roughness and viscosity")
                velocity = max(abs(q), 1e-6) / area
                re = reynolds_number(velocity, diameter, kinematic_viscosity_m2_s)
                f = darcy_friction_factor(max(re, 1.0), roughness_m[i] / diameter)
            total += f * length / (2.0 * gravity_m_s2 * diameter * area**2)
        q_new = math.copysign(math.sqrt(abs(head_drop_m) / total), head_drop_m)
        if abs(q_new - q) <= 1e-10 * max(abs(q_new), 1e-12) or all(
                f is not None and math.isfinite(f) for f in factors):
            return q_new
        q = q_new
    return q


def steady_inflow_m3_s(cut: ReplayCut, steady: SteadyState) -> float:
    """Flow into the kept network at the cut in a steady state [m^3/s]."""
    return sum(sign * steady.pipe_flow_m3_s[pid] for pid, sign in cut.inflow_terms())


def _shift_heads(network: Network, boundary_id: str, shift_m: float) -> Network:
    nodes = []
    for node in network.nodes:
        if isinstance(node, Reservoir) and node.id != boundary_id:
            node = replace(node, head_m=node.head_m + shift_m)
        elif isinstance(node, Valve) and node.outlet_head_m is not None:
            node = replace(node, outlet_head_m=node.outlet_head_m + shift_m)
        nodes.append(node)
    return network.replace(nodes=nodes)


def match_inflow(cut: ReplayCut, inflow_m3_s: float, friction_factor: Mapping[str, float],
                 tolerance_m3_s: float = 1e-7, start_shift_m: float | None = None
                 ) -> tuple[Network, SteadyState, float]:
    """Shift every downstream fixed head by one amount so the steady inflow is the target.

    Parameters
    ----------
    cut : ReplayCut
    inflow_m3_s : float
        Flow into the kept network at the cut before the event [m^3/s].
    friction_factor : mapping
        Darcy factor per pipe id of the cut network [-].
    start_shift_m : float, optional
        A nearby solution (the previous trial's shift) [m]: the root is bracketed within
        +-0.5 m of it first, which saves most steady solves during a calibration.

    Returns
    -------
    network, steady state, shift [m]

    Raises
    ------
    ValueError
        When the kept network has no reservoir or valve outlet head to shift, or no shift
        within +-1000 m gives the flow.

    Notes
    -----
    Reservoir levels are the least certain boundary data of a main (they move every hour),
    so they absorb the difference; the heads along the pipes then follow from the measured
    head at the cut, the flow and friction (Darcy–Weisbach), as in the field.
    """
    shiftable = [n for n in cut.network.nodes if n.id != cut.boundary_id and (
        isinstance(n, Reservoir) or (isinstance(n, Valve) and n.outlet_head_m is not None))]
    if not shiftable:
        raise ValueError("the replayed network has no reservoir or valve outlet head to balance "
                         "the measured initial flow; give the flow from the config instead")

    def solve(shift: float):
        net = _shift_heads(cut.network, cut.boundary_id, shift)
        return net, solve_steady_state(net, dict(friction_factor))

    def mismatch(shift: float) -> float:
        return steady_inflow_m3_s(cut, solve(shift)[1]) - inflow_m3_s

    if start_shift_m is not None and math.isfinite(start_shift_m):
        found = _secant_root(mismatch, float(start_shift_m), tolerance_m3_s)
        if found is not None:
            net, steady = solve(found)
            return net, steady, found
    centre = 0.0 if start_shift_m is None or not math.isfinite(start_shift_m) else start_shift_m
    span = 0.5 if start_shift_m is not None else 1.0
    low, high = centre - span, centre + span
    f_low, f_high = mismatch(low), mismatch(high)
    while f_low * f_high > 0 and span < 1000.0:
        span *= 4.0
        low, high = centre - span, centre + span
        f_low, f_high = mismatch(low), mismatch(high)
    if f_low * f_high > 0:
        raise ValueError(f"no shift of the downstream heads within +-{span:.0f} m gives an "
                         f"inflow of {inflow_m3_s:.4g} m^3/s at the cut; check the flow column")
    shift = brentq(mismatch, low, high, xtol=1e-7, rtol=1e-12)
    net, steady = solve(shift)
    return net, steady, shift


def _secant_root(function, start: float, tolerance: float, step: float = 0.05,
                 max_iterations: int = 8) -> float | None:
    """Secant iteration from a nearby start; None when it does not settle (then bracket)."""
    x0, x1 = start, start + step
    f0, f1 = function(x0), function(x1)
    for _ in range(max_iterations):
        if abs(f1) <= tolerance:
            return x1
        if f1 == f0:
            return None
        x0, x1, f0 = x1, x1 - f1 * (x1 - x0) / (f1 - f0), f1
        f1 = function(x1)
    return x1 if abs(f1) <= tolerance else None


def block_mean(times_s: np.ndarray, values: np.ndarray, factor: int) -> tuple[np.ndarray, np.ndarray]:
    """Decimate by averaging blocks of ``factor`` samples (NaN-aware).

    Returns the block-centre times and block means; a trailing partial block is dropped.
    Used on the driving head and on the target traces alike, so the model (nearly linear)
    sees the same smoothing on its input as the comparison applies to its output.
    """
    if factor < 1:
        raise ValueError(f"decimation factor must be >= 1, got {factor!r}")
    times_s, values = np.asarray(times_s, float), np.asarray(values, float)
    if factor == 1:
        return times_s, values
    n = (times_s.size // factor) * factor
    t = times_s[:n].reshape(-1, factor).mean(axis=1)
    shaped = values[:n].reshape((-1, factor) + values.shape[1:])
    with np.errstate(invalid="ignore"):
        counts = np.sum(np.isfinite(shaped), axis=1)
        sums = np.nansum(shaped, axis=1)
        means = np.where(counts > 0, sums / np.maximum(counts, 1), np.nan)
    return t, means


@dataclass(frozen=True)
class InitialFlow:
    """Where the pre-event flow into the replayed network comes from.

    ``kind`` is ``"measured"`` (a flow column: ``inflow_m3_s``), ``"gradient"`` (the head
    drop ``head_drop_m`` along ``legs`` = ((pipe id, length [m]), ...) with the current
    friction) or ``"config"`` (the steady state of the configured boundaries as they are).
    """

    kind: str
    inflow_m3_s: float | None = None
    head_drop_m: float | None = None
    legs: tuple = ()

    def __post_init__(self) -> None:
        if self.kind not in ("measured", "gradient", "config"):
            raise ValueError(f"InitialFlow.kind must be measured, gradient or config, got "
                             f"{self.kind!r}")
        if self.kind == "measured" and self.inflow_m3_s is None:
            raise ValueError("a measured initial flow needs inflow_m3_s")
        if self.kind == "gradient" and (self.head_drop_m is None or not self.legs):
            raise ValueError("a gradient initial flow needs head_drop_m and legs")


@dataclass(eq=False)
class ReplayModel:
    """The cut network ready to be run for trial parameters (what calibration varies).

    Parameters
    ----------
    cut : ReplayCut
    boundary_times_s, boundary_heads_m : numpy.ndarray
        Driving head series, times from the start of the window [s], [m].
    probes : tuple of Probe
        Target sensors in the cut network.
    target_times_s : numpy.ndarray
        Times at which the model is compared [s].
    base_wave_speed_m_s, base_friction_factor : dict
        Starting values per original pipe id [m/s], [-].
    initial_flow : InitialFlow
    time_step_s : float
        Step at the base wave speeds [s]; scaled by the mean wave-speed factor per run so
        the reaches stay as they are (see :meth:`time_step_for`).
    cavitation : bool
    """

    cut: ReplayCut
    boundary_times_s: np.ndarray
    boundary_heads_m: np.ndarray
    probes: tuple
    target_times_s: np.ndarray
    base_wave_speed_m_s: dict
    base_friction_factor: dict
    initial_flow: InitialFlow
    time_step_s: float
    cavitation: bool = True
    max_wave_speed_adjustment: float = 0.01
    runs: int = field(default=0)
    _shifts: dict = field(default_factory=dict, init=False, repr=False)

    @property
    def pipe_ids(self) -> tuple[str, ...]:
        """Original ids of the pipes in the replayed network."""
        return tuple(self.base_wave_speed_m_s)

    @property
    def duration_s(self) -> float:
        """Simulated time: up to the last target time [s]."""
        return float(self.target_times_s[-1])

    def time_step_for(self, wave_speed_m_s: Mapping[str, float]) -> float:
        """Step for trial speeds: the base step over the travel-time-weighted mean factor.

        Notes
        -----
        One factor on every speed with dt / factor keeps every pipe's reaches, so the
        model is continuous in that factor; per-pipe departures from it move whole reaches
        (resolution a / n per pipe of n reaches).
        """
        weights, logs = [], []
        for pid, base in self.base_wave_speed_m_s.items():
            length = sum(e - s for _, s, e in self.cut.pieces) if pid == self.cut.pipe_id else \
                self.cut.network.pipe(pid).length_m
            weights.append(length / base)
            logs.append(math.log(wave_speed_m_s[pid] / base))
        factor = math.exp(float(np.average(logs, weights=weights)))
        return self.time_step_s / factor

    def network_for(self, wave_speed_m_s: Mapping[str, float],
                    friction_factor: Mapping[str, float]) -> tuple[Network, dict]:
        """Cut network with trial speeds and its friction override keyed by piece ids.

        ``wave_speed_m_s`` may name original pipes or pieces (a piece id wins).
        """
        pipes, override = [], {}
        for pipe in self.cut.network.pipes:
            original = pipe.id.split("#beyond")[0]
            speed = wave_speed_m_s.get(pipe.id, wave_speed_m_s.get(original))
            pipes.append(replace(pipe, wave_speed_m_s=float(speed)))
            override[pipe.id] = float(friction_factor[original])
        network = self.cut.network.replace(pipes=pipes)
        flow = self.initial_flow
        if flow.kind == "config":
            return network, override
        if flow.kind == "measured":
            inflow = float(flow.inflow_m3_s)
        else:
            g = network.fluid.gravity_m_s2
            legs = [(length, network.pipe(self.cut.sub_pipe_ids(pid)[0]).diameter_m,
                     friction_factor[pid]) for pid, length in flow.legs]
            inflow = flow_from_head_drop(flow.head_drop_m, legs, g)
        # The steady state does not depend on the wave speeds: one shift per friction set.
        key = (round(inflow, 12),) + tuple(round(override[p], 12) for p in sorted(override))
        shift = self._shifts.get(key)
        if shift is None:
            last = next(reversed(self._shifts.values()), None) if self._shifts else None
            _, _, shift = match_inflow(self.cut, inflow, override, start_shift_m=last)
            self._shifts[key] = shift
        return _shift_heads(network, self.cut.boundary_id, shift), override

    def reach_vertices(self, wave_speed_m_s: Mapping[str, float], time_step_s: float) -> list:
        """Whole-reach neighbours of trial speeds and their interpolation weights.

        Returns ``[(weight, {piece id: speed})]``: each piece of n_i = L_i / (a_i dt) reaches
        (real) is run at floor(n_i) or floor(n_i) + 1 whole reaches, on the vertices of the
        Kuhn simplex that contains the fractional parts; the weighted sum of the runs is
        continuous and piecewise linear in every a_i (k pieces with fractions: k + 1 runs).

        Notes
        -----
        Kuhn (Freudenthal) triangulation of the unit cube: with fractions sorted
        w_(1) >= ... >= w_(k), vertex j adds one reach to the pieces (1)..(j) and has weight
        w_(j) - w_(j+1) (w_(0) = 1, w_(k+1) = 0) (H. W. Kuhn, "Some combinatorial lemmas in
        topology", IBM J. Res. Dev. 4(5), 1960; from memory).
        """
        base, frac, length = {}, {}, {}
        for pipe in self.cut.network.pipes:
            original = pipe.id.split("#beyond")[0]
            nu = pipe.length_m / (wave_speed_m_s[original] * time_step_s)
            n = max(1, int(math.floor(nu)))
            base[pipe.id], frac[pipe.id] = n, max(0.0, nu - n) if nu >= 1 else 0.0
            length[pipe.id] = pipe.length_m
        order = sorted((p for p in frac if frac[p] > 1e-9), key=lambda p: -frac[p])
        fractions = [1.0] + [frac[p] for p in order] + [0.0]
        vertices = []
        for j in range(len(order) + 1):
            weight = fractions[j] - fractions[j + 1]
            if weight <= 1e-12:
                continue
            counts = {p: base[p] + (1 if p in order[:j] else 0) for p in base}
            vertices.append((weight, {p: length[p] / (counts[p] * time_step_s) for p in base}))
        return vertices

    def simulate(self, wave_speed_m_s: Mapping[str, float], friction_factor: Mapping[str, float],
                 unsteady_coefficient: float, time_step_s: float | None = None,
                 probes: Sequence[Probe] | None = None) -> SimulationResult:
        """One run of the replay with trial parameters (counts into ``runs``).

        The speeds are fitted to whole reaches by the engine (within
        ``max_wave_speed_adjustment``); :meth:`predict` with ``interpolate=True`` avoids that.
        """
        network, override = self.network_for(wave_speed_m_s, friction_factor)
        dt = time_step_s or self.time_step_for(wave_speed_m_s)
        model = MocModel(network, dt, max_wave_speed_adjustment=self.max_wave_speed_adjustment,
                         cavitation=self.cavitation,
                         unsteady_friction=float(unsteady_coefficient) or None,
                         friction_override=override)
        self.runs += 1
        duration = self.duration_s + 2.0 * dt
        return model.run(duration, tuple(self.probes if probes is None else probes),
                         head_series={self.cut.boundary_id: (self.boundary_times_s,
                                                             self.boundary_heads_m)})

    def predict(self, wave_speed_m_s: Mapping[str, float], friction_factor: Mapping[str, float],
                unsteady_coefficient: float, interpolate: bool = False) -> np.ndarray:
        """Model heads at the target times, (times, probes) [m].

        ``interpolate``: realise each pipe's speed exactly by blending runs on whole-reach
        neighbours (:meth:`reach_vertices`); else one run with the engine's rounding.
        """
        if not interpolate:
            result = self.simulate(wave_speed_m_s, friction_factor, unsteady_coefficient)
            return result.probe_heads_at(self.target_times_s)
        dt = self.time_step_for(wave_speed_m_s)
        total = np.zeros((self.target_times_s.size, len(self.probes)))
        for weight, speeds in self.reach_vertices(wave_speed_m_s, dt):
            result = self.simulate(speeds, friction_factor, unsteady_coefficient, time_step_s=dt)
            total += weight * result.probe_heads_at(self.target_times_s)
        return total
