"""Compiled junction with a local loss on each pipe connection (MOC boundary).

At a junction with loss coefficient K, each pipe's end head differs from the junction's
common head H by the connection's loss: H_end = H + k q|q| with q the flow from the pipe into
the junction and k = K / (2 g A^2) for that pipe's area A (the minor loss K v^2/2g of a
fitting, charged on the velocity of the pipe it connects; common practice). With the
characteristic q = (C - H_end)/B each end's flow is the root of k q|q| + B q = C - H:

    q(H) = 2 d / (B + sqrt(B^2 + 4 k |d|)),   d = C - H

(the stable form of the quadratic root; k = 0 gives d / B). Continuity, sum q_i(H) = demand,
is monotone in H and solved by Newton's method kept inside a bisection bracket. A vapour
cavity at the junction holds H at the vapour head as at a plain junction (discrete vapour
cavity model; Bergant, Simpson & Tijsseling, J. Fluids and Structures 22, 2006).
"""

from __future__ import annotations

import math

from numba import njit

from models.moc_boundaries import (CAV_VOLUME, END_POINT, END_SIGN, ROW_H, ROW_QD, ROW_QU,
                                   gather_characteristics, node_cavity_step)

__all__ = ["lossy_junction", "connection_flow"]


@njit(cache=True, _nrt=False)
def connection_flow(c, B, k, h):
    """Flow from a pipe end into the junction at junction head ``h``, and its derivative by
    ``h`` [m^3/s, m^2/s]."""
    d = c - h
    root = math.sqrt(B * B + 4.0 * k * abs(d))
    return 2.0 * d / (B + root), -1.0 / root


@njit(cache=True, _nrt=False)
def _balance(h, e0, e1, demand, scratch, end_loss):
    total = -demand
    slope = 0.0
    for e in range(e0, e1):
        q, dq = connection_flow(scratch[0, e], scratch[1, e], end_loss[e], h)
        total += q
        slope += dq
    return total, slope


@njit(cache=True, _nrt=False)
def _junction_head(e0, e1, demand, scratch, end_loss, sum_c, sum_inv):
    """Head at which the connections' flows balance the demand (monotone; Newton in a
    bisection bracket)."""
    h = (sum_c - demand) / sum_inv  # the lossless head: a close start
    lo = -math.inf
    hi = math.inf
    for _ in range(100):
        f, df = _balance(h, e0, e1, demand, scratch, end_loss)
        if f > 0.0:
            lo = h  # too much inflow: the head must rise
        else:
            hi = h
        step = -f / df
        trial = h + step
        if not lo < trial < hi:
            if math.isinf(lo) or math.isinf(hi):
                trial = h + 2.0 * step
            else:
                trial = 0.5 * (lo + hi)
        if abs(trial - h) <= 1e-12 * (1.0 + abs(h)):
            return trial
        h = trial
    return h


@njit(cache=True, _nrt=False)
def lossy_junction(e0, e1, demand, end_loss, hv, dt, t, scratch, old, older, new, ends, coef,
                   cavity, openings):
    """Junction of the pipe ends e0..e1-1 with a loss on each connection (``end_loss``: k
    per end, s^2/m^5); returns the outflow [m^3/s]. ``scratch`` (2, ends) keeps C and B."""
    sum_c, sum_inv = gather_characteristics(e0, e1, old, older, ends, coef, scratch)
    h = _junction_head(e0, e1, demand, scratch, end_loss, sum_c, sum_inv)
    outflow = demand
    ic = ends[e0, END_POINT]
    if cavity[CAV_VOLUME, ic] > 0.0 or h < hv[ic]:
        hc = hv[ic]
        net_out, _ = _balance(hc, e0, e1, demand, scratch, end_loss)
        if node_cavity_step(ic, -net_out, dt, t, cavity, openings):
            h = hc
    for e in range(e0, e1):
        q_into, _ = connection_flow(scratch[0, e], scratch[1, e], end_loss[e], h)
        i = ends[e, END_POINT]
        q = q_into if ends[e, END_SIGN] > 0 else -q_into
        new[ROW_H, i] = h + end_loss[e] * q_into * abs(q_into)
        new[ROW_QU, i] = q
        new[ROW_QD, i] = q
    return outflow
