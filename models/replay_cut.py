"""Cutting a network at a logger's chainage for an event replay.

:func:`cut_network_at` splits a network at a chainage on one pipe, drops the side of a
bridge that holds none of the sensors to keep, and puts a :class:`~models.network.HeadSeries`
boundary at the cut (:class:`ReplayCut`). Used by :mod:`models.replay`, which re-exports
these names.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Iterable

import numpy as np

from models.moc_results import Probe
from models.network import HeadSeries, Network, Pipe

__all__ = ["ReplayCut", "cut_network_at", "BOUNDARY_ID", "NODE_SNAP_M"]

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
