"""The pre-event flow of an event replay: from a flow meter, a head gradient or the config.

:func:`flow_from_head_drop` inverts Darcy–Weisbach for the flow along a path;
:func:`match_inflow` shifts the downstream fixed heads of a cut network so that its steady
inflow at the cut is that flow; :class:`InitialFlow` says which source a replay uses. Used
by :mod:`models.replay`, which re-exports these names.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Mapping, Sequence

from scipy.optimize import brentq

from models.friction import darcy_friction_factor, reynolds_number
from models.network import Network, Reservoir, Valve
from models.replay_cut import ReplayCut
from models.steady import SteadyState, solve_steady_state

__all__ = ["InitialFlow", "balancing_nodes", "flow_from_head_drop", "match_inflow",
           "steady_inflow_m3_s"]


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


def balancing_nodes(cut: ReplayCut) -> tuple[str, ...]:
    """Ids of the fixed heads :func:`match_inflow` may shift (reservoirs, valve outlets)."""
    return tuple(n.id for n in cut.network.nodes if n.id != cut.boundary_id and (
        isinstance(n, Reservoir) or (isinstance(n, Valve) and n.outlet_head_m is not None)))


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
    if not balancing_nodes(cut):
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
