"""Where a pressure front came from: arrival-time location of a transient source on the pipes.

A front that leaves a point ``x`` of the network at time ``t0`` reaches sensor ``i`` at

.. math:: t_i = t_0 + k \\, \\tau_i(x), \\qquad \\tau_i(x) = \\sum_j L_{ij} / a_j

where :math:`\\tau_i(x)` is the travel time along the fastest path through the pipes with
each pipe's wave speed (the layout's prior), and :math:`k` a common slowness factor that
absorbs a prior that is off by the same fraction everywhere (limited to
``1 +- wave_speed_tolerance_fraction``). For every candidate point, :math:`t_0` and
:math:`k` are fitted by weighted least squares and the worst residual is compared with what
the onsets allow: ``source_tolerance_s`` plus two onset uncertainties plus the per-pipe
share of the wave-speed tolerance. Candidates are the pump stations and valves (the
assets a cause can be pinned on) and a grid of points along every pipe (to say where an
unknown source lies).

Points behind the first sensor of a dead-end stretch are indistinguishable from each
other by timing alone (every path to the other sensors passes the first sensor): the fit
then reports every asset in that stretch as feasible, and the nearest one is chosen.

This is the arrival-time (time-difference-of-arrival) location used for transient sources
in pipe networks; common practice, see e.g. Brunone, "Transient test-based technique for
leak detection in outfall pipes", J. Water Resour. Plann. Manage. 125(5), 1999 (from
memory), and for the travel-time model Wylie & Streeter, *Fluid Transients in Systems*,
1993, ch. 1 (from memory).

>>> from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
>>> layout = SystemLayout("demo",
...     (NodeSite("PS", "pump_station"), NodeSite("R", "reservoir")),
...     (PipeSite("P1", "PS", "R", 2000.0, 0.3, 1000.0),),
...     (SensorSite("A", "P1", 100.0), SensorSite("B", "P1", 1500.0)))
>>> fit = locate_source(layout, {"A": 0.1, "B": 1.5}, {"A": 0.002, "B": 0.002})
>>> fit.node_id, fit.feasible_nodes
('PS', ('PS',))
"""

from __future__ import annotations

import dataclasses
import heapq
import math
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from models.layout import SystemLayout

__all__ = ["SourceFit", "sensor_travel_times_s", "fit_emission", "locate_source", "fit_all_onsets",
           "ASSET_KINDS"]

#: Node kinds a cause can be pinned on.
ASSET_KINDS = ("pump_station", "valve")

#: Spacing of the candidate points along each pipe [m] (and at most this many per pipe).
GRID_STEP_M = 10.0
GRID_MAX_POINTS = 400


@dataclass(frozen=True)
class SourceFit:
    """Outcome of :func:`locate_source`.

    Attributes
    ----------
    node_id : str or None
        The asset the front is attributed to, None when no asset fits.
    feasible_nodes : tuple of str
        Every asset whose arrival pattern fits within the tolerances, best first.
    pipe_id, offset_m : str or None, float
        Best-fitting point on the pipes (chainage from the pipe's ``from_node``) [m].
    misfit : float
        Worst residual over its allowance at the best point [-]; at most 1 fits.
    node_misfit : float
        The same at ``node_id`` (``inf`` without one) [-].
    slowness_factor : float
        Fitted :math:`k` at the best point [-] (above 1: the wave is slower than the prior).
    n_sensors : int
        Timed sensors used.
    excluded_sensor : str or None
        With three or more sensors and no asset fitting them all, the one sensor whose
        onset was left out so that an asset fits the others (an outlier pick).
    """

    node_id: str | None
    feasible_nodes: tuple[str, ...]
    pipe_id: str | None
    offset_m: float
    misfit: float
    node_misfit: float
    slowness_factor: float
    n_sensors: int
    excluded_sensor: str | None = None

    def describe(self, layout: SystemLayout) -> str:
        """A short readable statement of where the source lies."""
        if self.node_id is not None:
            if self.excluded_sensor is not None:
                return (f"arrival times fit a source at {self.node_id} "
                        f"(onset at {self.excluded_sensor} disregarded as an outlier)")
            return f"arrival times fit a source at {self.node_id}"
        if self.pipe_id is None:
            return "source not located"
        pipe = layout.pipe(self.pipe_id)
        ends = ((self.offset_m, pipe.from_node), (pipe.length_m - self.offset_m, pipe.to_node))
        distance, node = min(ends)
        return (f"source on {self.pipe_id} about {distance:.0f} m from {node}, "
                f"not at a pump station or valve")


def sensor_travel_times_s(
    layout: SystemLayout, sensor_id: str, default_wave_speed_m_s: float
) -> dict[str, float]:
    """Fastest travel time from every node to a sensor along the pipes [s].

    Dijkstra's shortest paths with each pipe's ``length / wave speed`` as the edge weight
    (the layout's wave speed, the default where a pipe has none).
    """
    site = layout.sensor(sensor_id)
    pipe = layout.pipe(site.pipe_id)
    speed = pipe.wave_speed_m_s or default_wave_speed_m_s
    starts = {pipe.from_node: site.offset_m / speed, pipe.to_node: (pipe.length_m - site.offset_m) / speed}
    adjacency: dict[str, list[tuple[str, float]]] = {}
    for p in layout.pipes:
        w = p.length_m / (p.wave_speed_m_s or default_wave_speed_m_s)
        adjacency.setdefault(p.from_node, []).append((p.to_node, w))
        adjacency.setdefault(p.to_node, []).append((p.from_node, w))
    best = dict(starts)
    done: dict[str, float] = {}
    heap = [(t, n) for n, t in starts.items()]
    heapq.heapify(heap)
    while heap:
        t, node = heapq.heappop(heap)
        if node in done:
            continue
        done[node] = t
        for neighbour, w in adjacency.get(node, []):
            if neighbour not in done and t + w < best.get(neighbour, math.inf):
                best[neighbour] = t + w
                heapq.heappush(heap, (t + w, neighbour))
    return done


def fit_emission(
    onsets_s: np.ndarray, travel_s: np.ndarray, weights: np.ndarray, slowness_band: tuple[float, float]
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Weighted least-squares fit of :math:`t_i = t_0 + k \\tau_i` for many candidates at once.

    Parameters
    ----------
    onsets_s : numpy.ndarray
        ``(n,)`` onset times [s] (any common origin).
    travel_s : numpy.ndarray
        ``(m, n)`` travel times from ``m`` candidate points to the ``n`` sensors [s].
    weights : numpy.ndarray
        ``(n,)`` least-squares weights [1/s^2].
    slowness_band : (float, float)
        Limits of :math:`k` [-]; with fewer than three sensors :math:`k` is held at 1.

    Returns
    -------
    t0, k, residual : numpy.ndarray
        ``(m,)``, ``(m,)`` and ``(m, n)`` [s], [-], [s].
    """
    t = np.asarray(onsets_s, dtype=np.float64)
    tau = np.atleast_2d(np.asarray(travel_s, dtype=np.float64))
    w = np.asarray(weights, dtype=np.float64) / np.sum(weights)
    if t.size >= 3:
        tau_mean = tau @ w
        t_mean = float(t @ w)
        dtau = tau - tau_mean[:, None]
        sxx = (dtau**2) @ w
        sxy = dtau @ (w * (t - t_mean))
        with np.errstate(invalid="ignore", divide="ignore"):
            k = np.where(sxx > 0, sxy / np.where(sxx > 0, sxx, 1.0), 1.0)
        k = np.clip(k, *slowness_band)
    else:
        k = np.ones(tau.shape[0])
    t0 = (t[None, :] - k[:, None] * tau) @ w
    residual = t[None, :] - t0[:, None] - k[:, None] * tau
    return t0, k, residual


def _point_travel_times(layout, node_times, sensors, pipe, offsets, default_speed) -> np.ndarray:
    """``(len(offsets), len(sensors))`` travel times from points on ``pipe`` [s]."""
    speed = pipe.wave_speed_m_s or default_speed
    out = np.empty((offsets.size, len(sensors)))
    for j, sid in enumerate(sensors):
        via_from = offsets / speed + node_times[sid].get(pipe.from_node, math.inf)
        via_to = (pipe.length_m - offsets) / speed + node_times[sid].get(pipe.to_node, math.inf)
        times = np.minimum(via_from, via_to)
        site = layout.sensor(sid)
        if site.pipe_id == pipe.id:
            times = np.minimum(times, np.abs(offsets - site.offset_m) / speed)
        out[:, j] = times
    return out


def locate_source(
    layout: SystemLayout,
    onsets_s: Mapping[str, float],
    uncertainties_s: Mapping[str, float],
    *,
    source_tolerance_s: float = 0.05,
    wave_speed_tolerance_fraction: float = 0.10,
    default_wave_speed_m_s: float = 1000.0,
    late_allowance_s: Mapping[str, float] | None = None,
) -> SourceFit:
    """Fit the onsets of two or more timed sensors to a source on the pipes.

    As :func:`fit_all_onsets`; in addition, with three or more sensors and no asset that
    fits them all, each sensor in turn is left out and an asset that fits all the others
    is accepted (one outlier pick is tolerated; ``excluded_sensor`` names it). A point
    off the assets is only reported when no asset fits with or without one sensor.
    """
    options = dict(source_tolerance_s=source_tolerance_s,
                   wave_speed_tolerance_fraction=wave_speed_tolerance_fraction,
                   default_wave_speed_m_s=default_wave_speed_m_s,
                   late_allowance_s=late_allowance_s)
    fit = fit_all_onsets(layout, onsets_s, uncertainties_s, **options)
    if fit.node_id is not None or len(onsets_s) < 3:
        return fit
    best = None
    for left_out in sorted(onsets_s):
        rest = {s: t for s, t in onsets_s.items() if s != left_out}
        trial = fit_all_onsets(layout, rest, uncertainties_s, **options)
        if trial.node_id is not None and (best is None or trial.node_misfit < best.node_misfit):
            best = dataclasses.replace(trial, excluded_sensor=left_out, n_sensors=len(onsets_s))
    return best if best is not None else fit


def fit_all_onsets(
    layout: SystemLayout,
    onsets_s: Mapping[str, float],
    uncertainties_s: Mapping[str, float],
    *,
    source_tolerance_s: float = 0.05,
    wave_speed_tolerance_fraction: float = 0.10,
    default_wave_speed_m_s: float = 1000.0,
    late_allowance_s: Mapping[str, float] | None = None,
) -> SourceFit:
    """Fit the onsets of all given timed sensors to a source on the pipes.

    Parameters
    ----------
    layout : SystemLayout
    onsets_s : mapping of sensor id to onset [s]
        Clock-synchronised sensors only, any common time origin.
    uncertainties_s : mapping of sensor id to one standard uncertainty of the onset [s]
    source_tolerance_s : float
        Timing allowance on top of the onsets' uncertainties [s].
    wave_speed_tolerance_fraction : float
        Relative uncertainty of the layout's wave speeds [-]: bounds the common slowness
        factor and, at half of it, allows per-pipe differences.
    default_wave_speed_m_s : float
        For pipes without a wave speed [m/s].
    late_allowance_s : mapping of sensor id to seconds, optional
        Extra allowance for a pick that is late against the fit [s]: on a gradual front a
        picker sees the departure only once it stands out of the noise, so its error is
        one-sided (late, never early by more than the noise allows).

    Returns
    -------
    SourceFit

    Raises
    ------
    ValueError
        Fewer than two sensors, or a sensor the layout does not know.

    Notes
    -----
    Allowance of sensor ``i``: :math:`e_i = s + 2 u_i + (f/2)\\,\\tau_i` (plus its late
    allowance where the residual is positive), with ``s`` the
    source tolerance, ``u_i`` the onset uncertainty and ``f`` the wave-speed tolerance;
    the misfit is :math:`\\max_i |r_i| / e_i`. A candidate fits when the misfit is at
    most 1.
    """
    sensors = sorted(onsets_s)
    if len(sensors) < 2:
        raise ValueError(f"locate_source needs at least 2 timed sensors, got {len(sensors)}; "
                         "with one, the source cannot be located by timing")
    t = np.array([onsets_s[s] for s in sensors], dtype=np.float64)
    t = t - t.min()
    unc = np.array([max(float(uncertainties_s.get(s, 0.0)), 0.0) for s in sensors])
    late = np.array([max(float((late_allowance_s or {}).get(s, 0.0)), 0.0) for s in sensors])
    weights = 1.0 / (unc**2 + (0.5 * source_tolerance_s) ** 2 + late**2 + 1e-12)
    band = (1.0 / (1.0 + wave_speed_tolerance_fraction), 1.0 / max(1.0 - wave_speed_tolerance_fraction, 1e-6))
    node_times = {s: sensor_travel_times_s(layout, s, default_wave_speed_m_s) for s in sensors}

    def misfit(tau: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        _, k, residual = fit_emission(t, tau, weights, band)
        allowed = source_tolerance_s + 2.0 * unc[None, :] + 0.5 * wave_speed_tolerance_fraction * tau
        allowed = allowed + np.where(residual > 0, late[None, :], 0.0)
        with np.errstate(invalid="ignore"):
            worst = np.max(np.abs(residual) / allowed, axis=1)
        return np.where(np.isfinite(worst), worst, np.inf), k

    assets = [n.id for n in layout.nodes if n.kind in ASSET_KINDS]
    feasible: list[tuple[float, str]] = []
    for node_id in assets:
        tau = np.array([[node_times[s].get(node_id, math.inf) for s in sensors]])
        if np.all(np.isfinite(tau)):
            m = float(misfit(tau)[0][0])
            if m <= 1.0:
                feasible.append((m, node_id))
    feasible.sort()
    best = (math.inf, None, 0.0, 1.0)
    for pipe in layout.pipes:
        n_points = int(min(GRID_MAX_POINTS, max(3, math.ceil(pipe.length_m / GRID_STEP_M) + 1)))
        offsets = np.linspace(0.0, pipe.length_m, n_points)
        tau = _point_travel_times(layout, node_times, sensors, pipe, offsets, default_wave_speed_m_s)
        worst, k = misfit(tau)
        i = int(np.argmin(worst))
        if worst[i] < best[0]:
            best = (float(worst[i]), pipe.id, float(offsets[i]), float(k[i]))
    node_id = _nearest_feasible(layout, feasible, onsets_s) if feasible else None
    node_misfit = next((m for m, n in feasible if n == node_id), math.inf)
    return SourceFit(node_id, tuple(n for _, n in feasible), best[1], best[2], best[0], node_misfit,
                     best[3], len(sensors))


def _nearest_feasible(layout, feasible, onsets_s) -> str:
    """Among fitting assets, the one nearest (along the pipes) to the earliest sensor."""
    first = min(onsets_s, key=onsets_s.get)
    return min(feasible, key=lambda mn: (layout.distance_from_node_m(first, mn[1]), mn[0]))[1]
