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

The cut lives in :mod:`models.replay_cut` and the initial flow in :mod:`models.replay_flow`;
their names are importable from here as well.

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
from typing import Mapping, Sequence

import numpy as np

from models.moc import MocModel
from models.moc_results import Probe, SimulationResult
from models.network import Network
from models.replay_cut import NODE_SNAP_M  # noqa: F401 (re-exported)
from models.replay_cut import BOUNDARY_ID, ReplayCut, cut_network_at
from models.replay_flow import (InitialFlow, _shift_heads, balancing_nodes, flow_from_head_drop,
                                match_inflow, steady_inflow_m3_s)

__all__ = [
    "ReplayCut",
    "cut_network_at",
    "flow_from_head_drop",
    "match_inflow",
    "balancing_nodes",
    "steady_inflow_m3_s",
    "block_mean",
    "InitialFlow",
    "ReplayModel",
    "BOUNDARY_ID",
]


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
    runs, cavity_pipes
        Counted over the model's runs: how many, and the original pipes where a vapour
        cavity formed (column separation) in any of them.
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
    cavity_pipes: set = field(default_factory=set)
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
        result = model.run(duration, tuple(self.probes if probes is None else probes),
                           head_series={self.cut.boundary_id: (self.boundary_times_s,
                                                               self.boundary_heads_m)})
        self.cavity_pipes.update(c.pipe_id.split("#beyond")[0] for c in result.cavities)
        return result

    def _weighted_runs(self, wave_speed_m_s: Mapping[str, float],
                       friction_factor: Mapping[str, float], unsteady_coefficient: float,
                       interpolate: bool):
        """``(weight, SimulationResult)`` of the runs whose weighted sum is the prediction."""
        if not interpolate:
            yield 1.0, self.simulate(wave_speed_m_s, friction_factor, unsteady_coefficient)
            return
        dt = self.time_step_for(wave_speed_m_s)
        for weight, speeds in self.reach_vertices(wave_speed_m_s, dt):
            yield weight, self.simulate(speeds, friction_factor, unsteady_coefficient,
                                        time_step_s=dt)

    def predict(self, wave_speed_m_s: Mapping[str, float], friction_factor: Mapping[str, float],
                unsteady_coefficient: float, interpolate: bool = False) -> np.ndarray:
        """Model heads at the target times, (times, probes) [m].

        ``interpolate``: realise each pipe's speed exactly by blending runs on whole-reach
        neighbours (:meth:`reach_vertices`); else one run with the engine's rounding.
        """
        total = np.zeros((self.target_times_s.size, len(self.probes)))
        for weight, result in self._weighted_runs(wave_speed_m_s, friction_factor,
                                                  unsteady_coefficient, interpolate):
            total += weight * result.probe_heads_at(self.target_times_s)
        return total

    def predict_at(self, probe_times_s: Sequence[np.ndarray],
                   wave_speed_m_s: Mapping[str, float], friction_factor: Mapping[str, float],
                   unsteady_coefficient: float, interpolate: bool = False) -> list[np.ndarray]:
        """Model heads of each probe at that probe's own times [m] (one array per probe).

        A logger is compared at the instants it sampled: the model, run at a finer step,
        is interpolated onto them (never the logger onto another's clock, which would
        smooth its peaks). Times beyond the simulated span give NaN.
        """
        if len(probe_times_s) != len(self.probes):
            raise ValueError(f"{len(probe_times_s)} time arrays for {len(self.probes)} probes; "
                             "give one array of times per probe")
        totals = [np.zeros(np.size(t)) for t in probe_times_s]
        for weight, result in self._weighted_runs(wave_speed_m_s, friction_factor,
                                                  unsteady_coefficient, interpolate):
            for j, times in enumerate(probe_times_s):
                totals[j] += weight * np.interp(times, result.times_s,
                                                result.probe_heads_m[:, j],
                                                left=np.nan, right=np.nan)
        return totals
