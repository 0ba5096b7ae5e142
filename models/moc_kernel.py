"""Compiled (numba) kernels of the MOC engine: interior update, boundaries, the time loop.

Pure array code with no Python objects; :mod:`models.moc` lays the network out into the flat
arrays described below and :mod:`models.moc_reference` is the plain numpy twin of the
interior update that the tests compare with.

Layout. All pipes' computing points sit in one array (pipe p owns points
``pipe_first[p] .. pipe_first[p] + pipe_reaches[p]``). Each point carries a head ``H`` and
two flows: ``Qu`` on its upstream side (from the C+ characteristic) and ``Qd`` on its
downstream side (from C-); they differ only where a vapour cavity sits. Each network node
lists the pipe *ends* that meet there (``node_ptr`` into the end arrays); an end knows its
point, the neighbouring point its characteristic comes from, and its sign (+1: the pipe ends
at the node, C+ arrives; -1: the pipe starts there, C- arrives). ``q_into`` is the flow from
the pipe end into the node.

References
----------
.. [1] E. B. Wylie, V. L. Streeter, *Fluid Transients in Systems*, 1993, ch. 3 (from memory).
.. [2] A. Bergant, A. R. Simpson, A. S. Tijsseling, "Water hammer with column separation: a
   historical review", J. Fluids and Structures 22, 2006 (discrete vapour cavity model).
.. [3] J. P. Vitkovsky, M. F. Lambert, A. R. Simpson, A. Bergant, "Advances in unsteady
   friction modelling in transient pipe flow", BHR Group, 2000 (from memory).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from models.moc_boundaries import (
    cavity_stats,
    end_valve,
    fixed_head,
    inline_valve,
    junction,
    characteristic,
    pump_node,
)

__all__ = [
    "KIND_JUNCTION",
    "KIND_FIXED_HEAD",
    "KIND_END_VALVE",
    "KIND_INLINE_VALVE",
    "KIND_PUMP",
    "interior_step",
    "advance_interior",
    "run_transient",

]

KIND_JUNCTION = 0
KIND_FIXED_HEAD = 1
KIND_END_VALVE = 2
KIND_INLINE_VALVE = 3
KIND_PUMP = 4

_TWO_PI = 2.0 * math.pi


# --------------------------------------------------------------------------------------
# interior points
# --------------------------------------------------------------------------------------
@njit(cache=True)
def _interior_cavity_point(i, cp, cm, B, hv, dt, t, Hn, Qun, Qdn, vol, rate,
                           cav_count, cav_first, cav_last, cav_max):
    """DVCM at an interior point: hold H = Hv, flows from C+ and C- separately."""
    hp = hv[i]
    qu = (cp - hp) / B
    qd = (hp - cm) / B
    new_rate = qd - qu
    v_old = vol[i]
    v_new = v_old + 0.5 * dt * (new_rate + rate[i])
    if v_new <= 0.0:
        v_new = 0.0
        new_rate = 0.0
        hp = 0.5 * (cp + cm)
        qu = (cp - cm) / (2.0 * B)
        qd = qu
    cavity_stats(i, v_old, v_new, t, cav_count, cav_first, cav_last, cav_max)
    vol[i] = v_new
    rate[i] = new_rate
    Hn[i] = hp
    Qun[i] = qu
    Qdn[i] = qd
    return 1 if v_new > 0.0 else 0


@njit(cache=True)
def _foot_values(i, H, Qu, Qd, Qu_prev, Qd_prev, B, R, kb):
    qa = Qd[i - 1]
    qb = Qu[i + 1]
    cp = H[i - 1] + qa * (B - R * abs(qa))
    cm = H[i + 1] - qb * (B - R * abs(qb))
    if kb != 0.0:
        cp -= kb * ((qa - Qd_prev[i - 1]) + np.sign(qa) * abs(Qu[i] - qa))
        cm += kb * ((qb - Qu_prev[i + 1]) + np.sign(qb) * abs(qb - Qd[i]))
    return cp, cm


@njit(cache=True, fastmath=True, error_model="numpy")
def interior_step(pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                  H, Qu, Qd, Qu_prev, Qd_prev, Hn, Qun, Qdn, hmax, hmin,
                  vol, rate, active, dt, t, cav_count, cav_first, cav_last, cav_max):
    """One time step of every interior point of every pipe.

    Notes
    -----
    C+: C_P = H_A + B Q_A - R Q_A |Q_A|; C-: C_M = H_B - B Q_B + R Q_B |Q_B|;
    H_P = (C_P + C_M)/2, Q_P = (C_P - C_M)/(2B) (Wylie & Streeter 1993, ch. 3). With
    unsteady friction each characteristic also carries
    (k B / 2) [(Q_A^n - Q_A^(n-1)) + sign(Q_A) |Q_P^n - Q_A^n|] (Brunone form with the sign
    term of Vitkovsky et al. 2000, explicit). Where H_P would fall below the vapour head
    ``hv``, or a cavity is open, the discrete vapour cavity model takes over.
    """
    for p in range(pipe_first.size):
        first = pipe_first[p]
        last = first + pipe_reaches[p]
        B = pipe_B[p]
        R = pipe_R[p]
        kb = pipe_kb[p]
        inv2b = 0.5 / B
        if active[p] > 0:
            count = 0
            for i in range(first + 1, last):
                cp, cm = _foot_values(i, H, Qu, Qd, Qu_prev, Qd_prev, B, R, kb)
                hp = 0.5 * (cp + cm)
                if vol[i] > 0.0 or hp < hv[i]:
                    count += _interior_cavity_point(i, cp, cm, B, hv, dt, t, Hn, Qun, Qdn, vol,
                                                    rate, cav_count, cav_first, cav_last, cav_max)
                else:
                    q = (cp - cm) * inv2b
                    Hn[i] = hp
                    Qun[i] = q
                    Qdn[i] = q
                hmax[i] = max(hmax[i], Hn[i])
                hmin[i] = min(hmin[i], Hn[i])
            active[p] = count
            continue
        lowest = 1e300
        if kb == 0.0:
            for i in range(first + 1, last):
                qa = Qd[i - 1]
                qb = Qu[i + 1]
                cp = H[i - 1] + qa * (B - R * abs(qa))
                cm = H[i + 1] - qb * (B - R * abs(qb))
                hp = 0.5 * (cp + cm)
                q = (cp - cm) * inv2b
                Hn[i] = hp
                Qun[i] = q
                Qdn[i] = q
                m = hmax[i]
                hmax[i] = hp if hp > m else m
                m = hmin[i]
                hmin[i] = hp if hp < m else m
                d = hp - hv[i]
                lowest = d if d < lowest else lowest
        else:
            for i in range(first + 1, last):
                cp, cm = _foot_values(i, H, Qu, Qd, Qu_prev, Qd_prev, B, R, kb)
                hp = 0.5 * (cp + cm)
                q = (cp - cm) * inv2b
                Hn[i] = hp
                Qun[i] = q
                Qdn[i] = q
                m = hmax[i]
                hmax[i] = hp if hp > m else m
                m = hmin[i]
                hmin[i] = hp if hp < m else m
                d = hp - hv[i]
                lowest = d if d < lowest else lowest
        if lowest < 0.0:
            count = 0
            for i in range(first + 1, last):
                if Hn[i] < hv[i]:
                    cp, cm = _foot_values(i, H, Qu, Qd, Qu_prev, Qd_prev, B, R, kb)
                    count += _interior_cavity_point(i, cp, cm, B, hv, dt, t, Hn, Qun, Qdn, vol,
                                                    rate, cav_count, cav_first, cav_last, cav_max)
                    hmin[i] = min(max(hmin[i], hv[i]), Hn[i])
                    hmax[i] = max(hmax[i], Hn[i])
            active[p] = count


@njit(cache=True)
def advance_interior(n_steps, pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv,
                     H, Qu, Qd, dt):
    """Run only the interior update for ``n_steps`` (ends held); returns the final H.

    The benchmark times this against the numpy twin; it is the same ``interior_step`` the
    full engine uses.
    """
    n = H.size
    Hn = H.copy()
    Qun = Qu.copy()
    Qdn = Qd.copy()
    Qu_prev = Qu.copy()
    Qd_prev = Qd.copy()
    hmax = H.copy()
    hmin = H.copy()
    vol = np.zeros(n)
    rate = np.zeros(n)
    active = np.zeros(pipe_first.size, dtype=np.int64)
    cav_count = np.zeros(n, dtype=np.int64)
    cav_first = -np.ones(n)
    cav_last = -np.ones(n)
    cav_max = np.zeros(n)
    for k in range(n_steps):
        interior_step(pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv, H, Qu, Qd,
                      Qu_prev, Qd_prev, Hn, Qun, Qdn, hmax, hmin, vol, rate, active, dt,
                      k * dt, cav_count, cav_first, cav_last, cav_max)
        H, Hn = Hn, H
        Qu_prev, Qu, Qun = Qu, Qun, Qu_prev
        Qd_prev, Qd, Qdn = Qd, Qdn, Qd_prev
    return H


@njit(cache=True)
def run_transient(n_steps, dt, record_every,
                  pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv, H0, Q0,
                  node_kind, node_ptr, node_param, node_demand, node_orifice,
                  end_point, end_nbr, end_sign, end_pipe,
                  head_table, orifice_table, orifice_z, valve_table, valve_outlet,
                  valve_reverse, pump_units, pump_qr, pump_hr, pump_ct, pump_sump,
                  pump_check, pump_cmd, pump_wh, pump_wb, pump_inv_step, pump_state,
                  probe_a, probe_b, probe_w,
                  probe_out, ext_out, pump_out, hmax, hmin, vol,
                  cav_count, cav_first, cav_last, cav_max, rec_H, rec_Q):
    """March the whole network ``n_steps`` steps of ``dt`` from the state (H0, Q0).

    Writes probe heads, node outflows, pump speed and flow per step, the head envelope,
    cavity statistics and (every ``record_every`` steps, if > 0) all heads and flows into
    the output arrays. ``pump_state`` rows are [alpha, beta, v, check valve open].
    """
    n_points = H0.size
    H = H0.copy()
    Qu = Q0.copy()
    Qd = Q0.copy()
    Hn = H0.copy()
    Qun = Q0.copy()
    Qdn = Q0.copy()
    Qu_prev = Q0.copy()
    Qd_prev = Q0.copy()
    rate = np.zeros(n_points)
    active = np.zeros(pipe_first.size, dtype=np.int64)
    scratch_c = np.zeros(end_point.size)
    scratch_b = np.zeros(end_point.size)
    n_nodes = node_kind.size
    _record(0, H, Qd, probe_a, probe_b, probe_w, probe_out, record_every, rec_H, rec_Q)
    for m in range(pump_units.size):
        pump_out[0, m, 0] = pump_state[m, 0]
        pump_out[0, m, 1] = pump_units[m] * pump_qr[m] * pump_state[m, 2]
    for k in range(1, n_steps + 1):
        t = k * dt
        interior_step(pipe_first, pipe_reaches, pipe_B, pipe_R, pipe_kb, hv, H, Qu, Qd,
                      Qu_prev, Qd_prev, Hn, Qun, Qdn, hmax, hmin, vol, rate, active, dt, t,
                      cav_count, cav_first, cav_last, cav_max)
        for n in range(n_nodes):
            e0 = node_ptr[n]
            e1 = node_ptr[n + 1]
            kind = node_kind[n]
            j = node_param[n]
            out = 0.0
            if kind == KIND_FIXED_HEAD:
                out = fixed_head(e0, e1, head_table[j, k], H, Qu, Qd, Qu_prev, Qd_prev, Hn,
                                 Qun, Qdn, end_point, end_nbr, end_sign, end_pipe, pipe_B,
                                 pipe_R, pipe_kb)
            elif kind == KIND_END_VALVE:
                out = end_valve(e0, valve_table[j, k], valve_outlet[j], valve_reverse[j] > 0,
                                H, Qu, Qd, Qu_prev, Qd_prev, Hn, Qun, Qdn, end_point, end_nbr,
                                end_sign, end_pipe, pipe_B, pipe_R, pipe_kb, vol, hv)
            elif kind == KIND_INLINE_VALVE:
                out = inline_valve(e0, valve_table[j, k], hv, dt, t, H, Qu, Qd, Qu_prev,
                                   Qd_prev, Hn, Qun, Qdn, end_point, end_nbr, end_sign,
                                   end_pipe, pipe_B, pipe_R, pipe_kb, vol, rate, cav_count,
                                   cav_first, cav_last, cav_max)
                if np.isnan(out):
                    for e in range(e0, e1):
                        junction(e, e + 1, 0.0, 0.0, 0.0, hv, dt, t, scratch_c, scratch_b,
                                 H, Qu, Qd, Qu_prev, Qd_prev, Hn, Qun, Qdn, end_point,
                                 end_nbr, end_sign, end_pipe, pipe_B, pipe_R, pipe_kb, vol,
                                 rate, cav_count, cav_first, cav_last, cav_max)
                out = 0.0
            elif kind == KIND_PUMP:
                out = pump_node(e0, e1 - e0, k, pump_units[j], pump_qr[j], pump_hr[j],
                                pump_ct[j], pump_sump[j], pump_check[j] > 0, pump_cmd[j, k],
                                pump_wh[j], pump_wb[j], pump_inv_step, pump_state[j], hv, dt,
                                t, scratch_c, scratch_b, H, Qu, Qd, Qu_prev, Qd_prev, Hn, Qun,
                                Qdn, end_point, end_nbr, end_sign, end_pipe, pipe_B, pipe_R,
                                pipe_kb, vol, rate, cav_count, cav_first, cav_last, cav_max)
                pump_out[k, j, 0] = pump_state[j, 0]
                pump_out[k, j, 1] = pump_units[j] * pump_qr[j] * pump_state[j, 2]
            if kind == KIND_JUNCTION or (kind == KIND_END_VALVE and np.isnan(out)):
                orifice_c = 0.0
                orifice_elevation = 0.0
                if node_orifice[n] >= 0:
                    orifice_c = orifice_table[node_orifice[n], k]
                    orifice_elevation = orifice_z[node_orifice[n]]
                out = junction(e0, e1, node_demand[n], orifice_c, orifice_elevation, hv, dt, t,
                               scratch_c, scratch_b, H, Qu, Qd, Qu_prev, Qd_prev, Hn, Qun, Qdn,
                               end_point, end_nbr, end_sign, end_pipe, pipe_B, pipe_R, pipe_kb,
                               vol, rate, cav_count, cav_first, cav_last, cav_max)
            ext_out[k, n] = out
        for e in range(end_point.size):
            i = end_point[e]
            hmax[i] = max(hmax[i], Hn[i])
            hmin[i] = min(hmin[i], Hn[i])
        _record(k, Hn, Qdn, probe_a, probe_b, probe_w, probe_out, record_every, rec_H, rec_Q)
        H, Hn = Hn, H
        Qu_prev, Qu, Qun = Qu, Qun, Qu_prev
        Qd_prev, Qd, Qdn = Qd, Qdn, Qd_prev


@njit(cache=True)
def _record(k, H, Q, probe_a, probe_b, probe_w, probe_out, record_every, rec_H, rec_Q):
    for j in range(probe_a.size):
        w = probe_w[j]
        probe_out[k, j] = (1.0 - w) * H[probe_a[j]] + w * H[probe_b[j]]
    if record_every > 0 and k % record_every == 0:
        r = k // record_every
        for i in range(H.size):
            rec_H[r, i] = H[i]
            rec_Q[r, i] = Q[i]
