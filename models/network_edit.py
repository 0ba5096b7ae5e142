"""Edits of a network that event replay and scenarios need: split a pipe, cut at a point.

>>> from models.network import Fluid, Network, Pipe, Reservoir, Junction
>>> net = Network(Fluid(1000.0, 1e-6, -10.0), (Pipe("P", "A", "B", 1000.0, 0.3, 1000.0),),
...               (Reservoir("A", 50.0), Reservoir("B", 40.0)))
>>> split = split_pipe(net, "P", 400.0, Junction("X"))
>>> [(p.id, p.from_node, p.to_node, p.length_m) for p in split.pipes]
[('P/a', 'A', 'X', 400.0), ('P/b', 'X', 'B', 600.0)]
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from models.network import Network, Node

__all__ = ["split_pipe", "cut_at_point", "point_after_split"]


def split_pipe(network: Network, pipe_id: str, offset_m: float, node: Node) -> Network:
    """Split a pipe at ``offset_m`` from its from_node and put ``node`` there.

    The two parts are named ``<pipe>/a`` (from_node to the new node) and ``<pipe>/b``; they
    keep the pipe's properties, and its elevation profile is split at the offset. The new
    node's elevation is set from the profile.

    Raises
    ------
    ValueError
        When the offset is not strictly inside the pipe or the node id is taken.
    """
    pipe = network.pipe(pipe_id)
    if not 0.0 < offset_m < pipe.length_m:
        raise ValueError(f"split offset {offset_m} m must lie strictly inside pipe {pipe_id!r} "
                         f"(0 to {pipe.length_m} m); at an end, connect to the node instead")
    if any(n.id == node.id for n in network.nodes):
        raise ValueError(f"node id {node.id!r} already exists; choose another for the split")
    z = float(network.pipe_elevations(pipe_id, np.array([offset_m]))[0])
    node = replace(node, elevation_m=z)
    xs, zs = pipe.profile_offsets_m, pipe.profile_elevations_m
    first_profile = [(x, e) for x, e in zip(xs, zs) if x < offset_m]
    second_profile = [(x - offset_m, e) for x, e in zip(xs, zs) if x > offset_m]
    first = replace(pipe, id=f"{pipe_id}/a", to_node=node.id, length_m=offset_m,
                    profile_offsets_m=tuple(x for x, _ in first_profile),
                    profile_elevations_m=tuple(e for _, e in first_profile))
    second = replace(pipe, id=f"{pipe_id}/b", from_node=node.id,
                     length_m=pipe.length_m - offset_m,
                     profile_offsets_m=tuple(x for x, _ in second_profile),
                     profile_elevations_m=tuple(e for _, e in second_profile))
    pipes = []
    for p in network.pipes:
        pipes.extend((first, second) if p.id == pipe_id else (p,))
    return network.replace(pipes=pipes, nodes=(*network.nodes, node))


def point_after_split(pipe_id: str, offset_m: float, split_pipe_id: str,
                      split_offset_m: float) -> tuple[str, float]:
    """Where a (pipe, offset) point sits after :func:`split_pipe` of ``split_pipe_id``."""
    if pipe_id != split_pipe_id:
        return pipe_id, offset_m
    if offset_m <= split_offset_m:
        return f"{pipe_id}/a", offset_m
    return f"{pipe_id}/b", offset_m - split_offset_m


def cut_at_point(network: Network, pipe_id: str, offset_m: float, boundary: Node,
                 keep: str = "both") -> Network:
    """Put a boundary (e.g. a measured :class:`~models.network.HeadSeries`) at a point.

    Parameters
    ----------
    keep : {"both", "upstream", "downstream"}
        Keep the whole network ("both": the boundary drives both sides), or only the part
        on the pipe's from_node side ("upstream") or to_node side ("downstream"); nodes and
        pipes reachable only through the other side are dropped.
    """
    if keep not in ("both", "upstream", "downstream"):
        raise ValueError(f"keep must be 'both', 'upstream' or 'downstream', got {keep!r}")
    split = split_pipe(network, pipe_id, offset_m, boundary)
    if keep == "both":
        return split
    drop = f"{pipe_id}/b" if keep == "upstream" else f"{pipe_id}/a"
    start = f"{pipe_id}/a" if keep == "upstream" else f"{pipe_id}/b"
    pipes = [p for p in split.pipes if p.id != drop]
    reached_pipes, reached_nodes = {start}, {boundary.id}
    frontier = [boundary.id]
    while frontier:
        node_id = frontier.pop()
        for p in pipes:
            if node_id in (p.from_node, p.to_node):
                reached_pipes.add(p.id)
                for other in (p.from_node, p.to_node):
                    if other not in reached_nodes and other != boundary.id:
                        reached_nodes.add(other)
                        frontier.append(other)
    kept_nodes = [n for n in split.nodes if n.id in reached_nodes]
    kept_pipes = [p for p in pipes if p.id in reached_pipes]
    return split.replace(pipes=kept_pipes, nodes=kept_nodes)
