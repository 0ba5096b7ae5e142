"""Compiled (numba) kernels of the MOC engine: interior update, boundaries, the time loop.

Pure array code with no Python objects; :mod:`models.moc_layout` lays the network out into
the flat arrays described below and :mod:`models.moc_reference` is the plain numpy twin of
the interior update that the tests compare with.

Layout. All pipes' computing points sit in one axis (pipe p owns points
``pipe_first[p] .. pipe_first[p] + pipe_reaches[p]``). A *state buffer* of shape
(3, points) holds per point the head ``H`` and two flows: ``Qu`` on its upstream side (from
the C+ characteristic) and ``Qd`` on its downstream side (from C-); they differ only where a
vapour cavity sits (rows ``ROW_H, ROW_QU, ROW_QD``). Three such buffers take turns (ping-pong,
no copies): ``old`` (time k-1), ``new`` (k) and ``older`` (k-2, for unsteady friction). Each
network node lists the pipe *ends* that meet there (``node_ptr`` into the end table
``ends``); an end knows its point, the neighbouring point its characteristic comes from, its
sign (+1: the pipe ends at the node, C+ arrives; -1: the pipe starts there, C- arrives) and
its pipe. ``coef`` holds per pipe the impedance B, the reach resistance R and the unsteady
friction term k B / 2.

Speed. The interior of every pipe is marched by one function of branch-free loops that the
compiler vectorises; packing the state into a few two-dimensional buffers lets it prove
cheaply that writes and reads do not overlap. The envelope of heads is folded from the three
state buffers every third step, not point by point within the march. Vapour cavities are
handled afterwards, point by point, only in the pipes and at the points that need them. The
functions that only read and write arrays given to them are compiled without numba's
reference counting (``_nrt=False``, a numba compile option): the atomic counter updates on
every array argument cost more than a short pipe's whole interior update.

References
----------
.. [1] E. B. Wylie, V. L. Streeter, *Fluid Transients in Systems*, 1993, ch. 3 (from memory).
.. [2] A. Bergant, A. R. Simpson, A. S. Tijsseling, "Water hammer with column separation: a
   historical review", J. Fluids and Structures 22, 2006 (discrete vapour cavity model).
.. [3] J. P. Vitkovsky, M. F. Lambert, A. R. Simpson, A. Bergant, "Advances in unsteady
   friction modelling in transient pipe flow", BHR Group, 2000 (from memory).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from models.moc_boundaries import (CAV_FIRST, CAV_LAST, CAV_RATE, CAV_ROWS, CAV_VOLUME, COEF_B,
                                   COEF_KB, COEF_R, ROW_H, ROW_QD, ROW_QU,
                                   cavity_stats, end_valve, fixed_head, inline_valve,
                                   junction, pump_node)
from models.moc_air_valve import air_valve
from models.moc_air_vessel import air_vessel
from models.moc_lossy_junction import lossy_junction

__all__ = [
    "KIND_JUNCTION",
    "KIND_FIXED_HEAD",
    "KIND_END_VALVE",
    "KIND_INLINE_VALVE",
    "KIND_PUMP",
    "KIND_LOSSY_JUNCTION",
    "KIND_AIR_VESSEL",
    "KIND_AIR_VALVE",
    "interior_step",
    "advance_interior",
    "advance_interior_state",
    "run_transient",
]

KIND_JUNCTION = 0
KIND_FIXED_HEAD = 1
KIND_END_VALVE = 2
KIND_INLINE_VALVE = 3
KIND_PUMP = 4
KIND_LOSSY_JUNCTION = 5
KIND_AIR_VESSEL = 6
KIND_AIR_VALVE = 7

# Floating-point licences for the interior loops only: reassociation (a vectorised running
# minimum), fused multiply-add and no signed zeros. NaN and infinity keep their meaning
# (the boundaries signal a closed valve by NaN).
_INTERIOR_MATH = {"reassoc", "contract", "nsz"}


# --------------------------------------------------------------------------------------
# interior points: the fast, branch-free march
# --------------------------------------------------------------------------------------
@njit(cache=True, fastmath=_INTERIOR_MATH, error_model="numpy", _nrt=False, inline="always")
def _march_pipes(pipe_first, pipe_reaches, coef, hv_top, old, older, new, below):
    """Interior points of every pipe, no cavities; ``below[p]``: points of pipe p whose head
    fell below ``hv_top[p]``, the highest vapour head of its interior points (a cheap,
    conservative test: the cavity pass then checks each point against its own vapour head).
    Returns their total.

    Notes
    -----
    C_P = H_A + Q_A (B - R |Q_A|), C_M = H_B - Q_B (B - R |Q_B|), H_P = (C_P + C_M)/2,
    Q_P = (C_P - C_M)/(2B) (Wylie & Streeter 1993, ch. 3). With unsteady friction
    (k B / 2 = kb != 0), C_P -= kb [(Q_A^n - Q_A^(n-1)) + sign(Q_A) |Q_P^n - Q_A^n|] and
    C_M += kb [(Q_B^n - Q_B^(n-1)) + sign(Q_B) |Q_B^n - Q_P^n|] (Brunone form with the
    sign term of Vitkovsky et al. 2000, explicit); sign(0) = 0.

    All pipes in one function and no envelope here: a call per pipe and the envelope's
    read-modify-write per point each cost more than the update itself (the envelope is
    folded every three steps by :func:`envelope_after_step`), and so would a vapour head
    read per point. Unsigned indices spare every access the negative-index check, so the
    loops vectorise.
    """
    one = np.uint64(1)
    total = 0
    for p in range(pipe_first.size):
        first = np.uint64(pipe_first[p])
        last = first + np.uint64(pipe_reaches[p])
        B = coef[p, COEF_B]
        R = coef[p, COEF_R]
        kb = coef[p, COEF_KB]
        low = hv_top[p]
        inv2b = 0.5 / B
        count = 0
        for i in range(first + one, last):
            qa = old[ROW_QD, i - one]
            qb = old[ROW_QU, i + one]
            cp = old[ROW_H, i - one] + qa * (B - R * abs(qa))
            cm = old[ROW_H, i + one] - qb * (B - R * abs(qb))
            if kb != 0.0:  # loop-invariant: the compiler hoists it out of the loop
                sa = (1.0 if qa > 0.0 else 0.0) - (1.0 if qa < 0.0 else 0.0)
                sb = (1.0 if qb > 0.0 else 0.0) - (1.0 if qb < 0.0 else 0.0)
                cp -= kb * ((qa - older[ROW_QD, i - one]) + sa * abs(old[ROW_QU, i] - qa))
                cm += kb * ((qb - older[ROW_QU, i + one]) + sb * abs(qb - old[ROW_QD, i]))
            hp = 0.5 * (cp + cm)
            q = (cp - cm) * inv2b
            new[ROW_H, i] = hp
            new[ROW_QU, i] = q
            new[ROW_QD, i] = q
            count += 1 if hp < low else 0
        below[p] = count
        total += count
    return total


@njit(cache=True, fastmath=_INTERIOR_MATH, error_model="numpy", _nrt=False)
def fold_envelope(env, a, b, c):
    """Fold the heads of the states a, b, c into the envelope ``env`` (2, points: max, min),
    at every point, interior and ends (pass a state twice to fold fewer than three).

    Written as explicit selects (heads are never NaN): they vectorise better than nested
    ``max``/``min`` (a third faster at 100 points)."""
    for i in range(env.shape[1]):
        h0 = a[ROW_H, i]
        h1 = b[ROW_H, i]
        h2 = c[ROW_H, i]
        high = h0 if h0 > h1 else h1
        high = high if high > h2 else h2
        low = h0 if h0 < h1 else h1
        low = low if low < h2 else h2
        top = env[0, i]
        bottom = env[1, i]
        env[0, i] = top if top > high else high
        env[1, i] = bottom if bottom < low else low


@njit(cache=True, _nrt=False)
def envelope_after_step(env, old, older, new, pending, last_step):
    """Count a step whose state is ``old`` (``older`` the one before, ``new`` the one
    before that, after the buffers turned) and fold the envelope when three steps are
    pending or the run ends; returns the steps still pending."""
    pending += 1
    if pending == 3:
        fold_envelope(env, old, older, new)
        return 0
    if last_step:
        fold_envelope(env, old, older if pending == 2 else old, old)
        return 0
    return pending


# --------------------------------------------------------------------------------------
# interior points: the cavity pass
# --------------------------------------------------------------------------------------
@njit(cache=True, _nrt=False)
def _foot_values(i, old, older, B, R, kb):
    qa = old[ROW_QD, i - 1]
    qb = old[ROW_QU, i + 1]
    cp = old[ROW_H, i - 1] + qa * (B - R * abs(qa))
    cm = old[ROW_H, i + 1] - qb * (B - R * abs(qb))
    if kb != 0.0:
        cp -= kb * ((qa - older[ROW_QD, i - 1]) + np.sign(qa) * abs(old[ROW_QU, i] - qa))
        cm += kb * ((qb - older[ROW_QU, i + 1]) + np.sign(qb) * abs(qb - old[ROW_QD, i]))
    return cp, cm


@njit(cache=True, _nrt=False)
def _interior_cavity_point(i, cp, cm, B, hv, dt, t, new, cavity, openings):
    """DVCM at an interior point: hold H = Hv, flows from C+ and C- separately.

    Notes
    -----
    Q_u = (C_P - H_v)/B, Q_d = (H_v - C_M)/B, cavity volume
    V^n = V^(n-1) + dt/2 [(Q_d - Q_u)^n + (Q_d - Q_u)^(n-1)]; at V <= 0 the cavity
    collapses and the point takes the ordinary interior solution (Bergant, Simpson &
    Tijsseling 2006). Returns 1 while the cavity stays open, else 0.
    """
    hp = hv[i]
    qu = (cp - hp) / B
    qd = (hp - cm) / B
    new_rate = qd - qu
    v_old = cavity[CAV_VOLUME, i]
    v_new = v_old + 0.5 * dt * (new_rate + cavity[CAV_RATE, i])
    if v_new <= 0.0:
        v_new = 0.0
        new_rate = 0.0
        hp = 0.5 * (cp + cm)
        qu = (cp - cm) / (2.0 * B)
        qd = qu
    cavity_stats(i, v_old, v_new, t, cavity, openings)
    cavity[CAV_VOLUME, i] = v_new
    cavity[CAV_RATE, i] = new_rate
    new[ROW_H, i] = hp
    new[ROW_QU, i] = qu
    new[ROW_QD, i] = qd
    return 1 if v_new > 0.0 else 0


@njit(cache=True, _nrt=False)
def _settle_cavities(first, last, B, R, kb, hv, dt, t, old, older, new, cavity, openings):
    """Cavity model at the interior points of one pipe that need it (the march left H_P
    below vapour head, or a cavity is open); returns the cavities left open."""
    count = 0
    for i in range(first + 1, last):
        if cavity[CAV_VOLUME, i] > 0.0 or new[ROW_H, i] < hv[i]:
            cp, cm = _foot_values(i, old, older, B, R, kb)
            count += _interior_cavity_point(i, cp, cm, B, hv, dt, t, new, cavity, openings)
    return count


@njit(cache=True, fastmath=_INTERIOR_MATH, error_model="numpy", _nrt=False)
def interior_step(pipe_first, pipe_reaches, coef, hv, hv_top, old, older, new, cavity,
                  openings, active, below, dt, t):
    """One time step of every interior point of every pipe (envelope not included).

    The march takes every pipe; the cavity pass revisits only the pipes with a point below
    their highest vapour head (``hv_top``, from :func:`highest_vapour_heads`) or a cavity
    still open (``active[p] > 0``). ``active`` is updated.
    """
    _march_pipes(pipe_first, pipe_reaches, coef, hv_top, old, older, new, below)
    for p in range(pipe_first.size):
        if active[p] > 0 or below[p] > 0:
            first = pipe_first[p]
            active[p] = _settle_cavities(first, first + pipe_reaches[p], coef[p, COEF_B],
                                         coef[p, COEF_R], coef[p, COEF_KB], hv, dt, t, old,
                                         older, new, cavity, openings)


@njit(cache=True)
def highest_vapour_heads(pipe_first, pipe_reaches, hv):
    """Per pipe, the highest vapour head [m] of its interior points (-inf without any)."""
    top = np.full(pipe_first.size, -np.inf)
    for p in range(pipe_first.size):
        for i in range(pipe_first[p] + 1, pipe_first[p] + pipe_reaches[p]):
            top[p] = max(top[p], hv[i])
    return top


@njit(cache=True)
def _initial_buffers(H, Qu, Qd):
    """Three state buffers (3, points), each holding the same initial state."""
    old = np.empty((3, H.size))
    old[ROW_H] = H
    old[ROW_QU] = Qu
    old[ROW_QD] = Qd
    return old, old.copy(), old.copy()


@njit(cache=True)
def advance_interior(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                     H, Qu, Qd, dt):
    """Run only the interior update for ``n_steps`` (ends held); returns the final H.

    The benchmark times this against the numpy twin; it is the same ``interior_step`` the
    full engine uses. The inputs are not modified.
    """
    return advance_interior_state(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb,
                                  hv, H, Qu, Qd, dt)[0]


# --------------------------------------------------------------------------------------
# the whole network, step by step
# --------------------------------------------------------------------------------------
@njit(cache=True, nogil=True)  # runs of different events can march side by side in threads
def run_transient(n_steps, dt, record_every, pipe_first, pipe_reaches, coef, hv, H0, Q0,
                  node_kind, node_ptr, node_param, node_demand, node_orifice, ends,
                  head_table, orifice_table, orifice_z, valve_table, valve_outlet,
                  valve_reverse, pump_units, pump_qr, pump_hr, pump_ct, pump_sump,
                  pump_check, pump_cmd, pump_wh, pump_wb, pump_inv_step, pump_state,
                  probe_a, probe_b, probe_w, probe_out, ext_out, pump_out, env, cavity,
                  openings, rec_H, rec_Q, end_loss, vessel_table, vessel_state, air_table,
                  air_state, air_out):
    """March the whole network ``n_steps`` steps of ``dt`` from the state (H0, Q0).

    Writes probe heads, node outflows, pump speed and flow per step, the head envelope
    ``env`` (2, points: max, min; start it at H0), the cavity buffer (start volume and
    rate at 0, first and last times at -1) and opening counts, and (every
    ``record_every`` steps, if > 0) all heads and flows. ``pump_state`` rows are
    [alpha, beta, v, check valve open]; ``vessel_state`` rows [gas volume, flow in];
    ``air_state`` rows [air volume, air mass, growth rate, mass rate], the air volume also
    per step in ``air_out``. The state buffers live only inside this loop.
    """
    old, new, older = _initial_buffers(H0, Q0, Q0)
    active = np.zeros(pipe_first.size, dtype=np.int64)
    below = np.zeros(pipe_first.size, dtype=np.int64)
    hv_top = highest_vapour_heads(pipe_first, pipe_reaches, hv)
    scratch = np.zeros((2, ends.shape[0]))
    pending = 0
    _record(0, old, probe_a, probe_b, probe_w, probe_out, record_every, rec_H, rec_Q)
    for m in range(pump_units.size):
        pump_out[0, m, 0] = pump_state[m, 0]
        pump_out[0, m, 1] = pump_units[m] * pump_qr[m] * pump_state[m, 2]
    for k in range(1, n_steps + 1):
        t = k * dt
        interior_step(pipe_first, pipe_reaches, coef, hv, hv_top, old, older, new, cavity,
                      openings, active, below, dt, t)
        for n in range(node_kind.size):
            e0 = node_ptr[n]
            e1 = node_ptr[n + 1]
            kind = node_kind[n]
            j = node_param[n]
            out = 0.0
            if kind == KIND_FIXED_HEAD:
                out = fixed_head(e0, e1, head_table[j, k], old, older, new, ends, coef)
            elif kind == KIND_END_VALVE:
                out = end_valve(e0, valve_table[j, k], valve_outlet[j], valve_reverse[j] > 0,
                                hv, old, older, new, ends, coef, cavity)
            elif kind == KIND_INLINE_VALVE:
                out = inline_valve(e0, valve_table[j, k], hv, dt, t, old, older, new, ends,
                                   coef, cavity, openings)
                if np.isnan(out):
                    for e in range(e0, e1):
                        junction(e, e + 1, 0.0, 0.0, 0.0, hv, dt, t, scratch, old, older, new,
                                 ends, coef, cavity, openings)
                out = 0.0
            elif kind == KIND_AIR_VESSEL:
                out = air_vessel(e0, e1, vessel_table[j], vessel_state[j], dt, old, older, new,
                                 ends, coef, scratch)
            elif kind == KIND_AIR_VALVE:
                out = air_valve(e0, e1, air_table[j], air_state[j], dt, old, older, new, ends,
                                coef, scratch)
                air_out[k, j] = air_state[j, 0]
            elif kind == KIND_LOSSY_JUNCTION:
                out = lossy_junction(e0, e1, node_demand[n], end_loss, hv, dt, t, scratch, old,
                                     older, new, ends, coef, cavity, openings)
            elif kind == KIND_PUMP:
                out = pump_node(e0, e1 - e0, pump_units[j], pump_qr[j], pump_hr[j], pump_ct[j],
                                pump_sump[j], pump_check[j] > 0, pump_cmd[j, k], pump_wh[j],
                                pump_wb[j], pump_inv_step, pump_state[j], hv, dt, t, scratch,
                                old, older, new, ends, coef, cavity, openings)
                pump_out[k, j, 0] = pump_state[j, 0]
                pump_out[k, j, 1] = pump_units[j] * pump_qr[j] * pump_state[j, 2]
            if kind == KIND_JUNCTION or (kind == KIND_END_VALVE and np.isnan(out)):
                orifice_c = 0.0
                orifice_elevation = 0.0
                if node_orifice[n] >= 0:
                    orifice_c = orifice_table[node_orifice[n], k]
                    orifice_elevation = orifice_z[node_orifice[n]]
                out = junction(e0, e1, node_demand[n], orifice_c, orifice_elevation, hv, dt, t,
                               scratch, old, older, new, ends, coef, cavity, openings)
            ext_out[k, n] = out
        _record(k, new, probe_a, probe_b, probe_w, probe_out, record_every, rec_H, rec_Q)
        older, old, new = old, new, older
        pending = envelope_after_step(env, old, older, new, pending, k == n_steps)


@njit(cache=True, _nrt=False)
def _record(k, state, probe_a, probe_b, probe_w, probe_out, record_every, rec_H, rec_Q):
    for j in range(probe_a.size):
        w = probe_w[j]
        probe_out[k, j] = (1.0 - w) * state[ROW_H, probe_a[j]] + w * state[ROW_H, probe_b[j]]
    if record_every > 0 and k % record_every == 0:
        r = k // record_every
        for i in range(state.shape[1]):
            rec_H[r, i] = state[ROW_H, i]
            rec_Q[r, i] = state[ROW_QD, i]


@njit(cache=True)
def advance_interior_state(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                           H, Qu, Qd, dt):
    """As :func:`advance_interior`; returns (H, Qu, Qd, max H, min H, cavity volume)."""
    n = H.size
    old, new, older = _initial_buffers(H, Qu, Qd)
    coef = np.empty((pipe_first.size, 3))
    coef[:, COEF_B] = pipe_B
    coef[:, COEF_R] = pipe_R
    coef[:, COEF_KB] = pipe_kb
    env = np.empty((2, n))
    env[0] = H
    env[1] = H
    cavity = np.zeros((CAV_ROWS, n))
    cavity[CAV_FIRST] = -1.0
    cavity[CAV_LAST] = -1.0
    openings = np.zeros(n, dtype=np.int64)
    active = np.zeros(pipe_first.size, dtype=np.int64)
    below = np.zeros(pipe_first.size, dtype=np.int64)
    hv_top = highest_vapour_heads(pipe_first, pipe_reaches, hv)
    pending = 0
    for k in range(n_steps):
        interior_step(pipe_first, pipe_reaches, coef, hv, hv_top, old, older, new, cavity,
                      openings, active, below, dt, k * dt)
        older, old, new = old, new, older
        pending = envelope_after_step(env, old, older, new, pending, k == n_steps - 1)
    return (old[ROW_H].copy(), old[ROW_QU].copy(), old[ROW_QD].copy(), env[0].copy(),
            env[1].copy(), cavity[CAV_VOLUME].copy())
