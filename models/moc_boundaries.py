"""Compiled (numba) boundary conditions of the MOC engine.

Each function updates the pipe ends that meet at one network node for one time step; the
packed array layout (state rows, cavity rows, end and pipe tables) is described in
:mod:`models.moc_kernel`. Equations follow Wylie & Streeter, *Fluid Transients in Systems*,
1993, ch. 3 and 4 (from memory); vapour cavities at nodes follow the discrete vapour cavity
model (Bergant, Simpson & Tijsseling, J. Fluids and Structures 22, 2006).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

__all__ = ["ROW_H", "ROW_QU", "ROW_QD", "CAV_VOLUME", "CAV_RATE", "CAV_FIRST", "CAV_LAST",
           "CAV_LARGEST", "CAV_ROWS", "END_POINT", "END_NBR", "END_SIGN", "END_PIPE",
           "COEF_B", "COEF_R", "COEF_KB", "cavity_stats", "characteristic", "orifice_flow",
           "junction", "fixed_head", "gather_characteristics", "set_common_head",
           "node_cavity_step", "end_valve", "inline_valve", "pump", "pump_node",
           "table_lookup"]

# rows of a state buffer (3, points): head [m], flow on the upstream and downstream side [m^3/s]
ROW_H, ROW_QU, ROW_QD = 0, 1, 2
# rows of the cavity buffer (5, points): volume [m^3], rate of change [m^3/s], first opening
# and last collapse time [s] (-1: never), largest volume [m^3]
CAV_VOLUME, CAV_RATE, CAV_FIRST, CAV_LAST, CAV_LARGEST = 0, 1, 2, 3, 4
CAV_ROWS = 5
# columns of the end table (ends, 4) and of the pipe coefficient table (pipes, 3)
END_POINT, END_NBR, END_SIGN, END_PIPE = 0, 1, 2, 3
COEF_B, COEF_R, COEF_KB = 0, 1, 2


@njit(cache=True, _nrt=False)
def characteristic(e, old, older, ends, coef):
    """C of the characteristic reaching pipe end ``e`` and the pipe's impedance B.

    Notes
    -----
    At a pipe's downstream end C = C_P, at its upstream end C = C_M, so that in both
    cases the flow from the pipe into the node is q_into = (C - H)/B.
    """
    i = ends[e, END_POINT]
    j = ends[e, END_NBR]
    p = ends[e, END_PIPE]
    B = coef[p, COEF_B]
    R = coef[p, COEF_R]
    kb = coef[p, COEF_KB]
    if ends[e, END_SIGN] > 0:
        q = old[ROW_QD, j]
        c = old[ROW_H, j] + q * (B - R * abs(q))
        if kb != 0.0:
            c -= kb * ((q - older[ROW_QD, j]) + np.sign(q) * abs(old[ROW_QU, i] - q))
    else:
        q = old[ROW_QU, j]
        c = old[ROW_H, j] - q * (B - R * abs(q))
        if kb != 0.0:
            c += kb * ((q - older[ROW_QU, j]) + np.sign(q) * abs(q - old[ROW_QD, i]))
    return c, B


@njit(cache=True, _nrt=False)
def _set_end(e, h, q_into, ends, new):
    i = ends[e, END_POINT]
    q = q_into if ends[e, END_SIGN] > 0 else -q_into
    new[ROW_H, i] = h
    new[ROW_QU, i] = q
    new[ROW_QD, i] = q


@njit(cache=True, _nrt=False)
def gather_characteristics(e0, e1, old, older, ends, coef, scratch):
    """C and B of the pipe ends e0..e1-1 into ``scratch`` (2, ends); returns sum C/B and
    sum 1/B (a node's common head without outflow is their ratio)."""
    sum_c = 0.0
    sum_inv = 0.0
    for e in range(e0, e1):
        c, B = characteristic(e, old, older, ends, coef)
        scratch[0, e] = c
        scratch[1, e] = B
        sum_c += c / B
        sum_inv += 1.0 / B
    return sum_c, sum_inv


@njit(cache=True, _nrt=False)
def set_common_head(e0, e1, h, scratch, ends, new):
    """Give the pipe ends e0..e1-1 the head ``h`` and the flows their characteristics
    (gathered in ``scratch``) then carry."""
    for e in range(e0, e1):
        _set_end(e, h, (scratch[0, e] - h) / scratch[1, e], ends, new)


@njit(cache=True, _nrt=False)
def orifice_flow(head_difference, impedance, coefficient):
    """Signed flow through an orifice fed by characteristics [m^3/s].

    Notes
    -----
    Solves Q |Q| = c^2 (dC - B Q) for Q with c = Cd A sqrt(2 g):
    Q = (-c^2 B + sqrt(c^4 B^2 + 4 c^2 |dC|)) / 2, signed like dC.
    """
    c2 = coefficient * coefficient
    magnitude = abs(head_difference)
    b = c2 * impedance
    q = 2.0 * c2 * magnitude / (b + math.sqrt(b * b + 4.0 * c2 * magnitude))
    return q if head_difference >= 0.0 else -q


@njit(cache=True, _nrt=False)
def cavity_stats(i, v_old, v_new, t, cavity, openings):
    """Count cavity openings, first opening and last collapse time, largest volume."""
    if v_old <= 0.0 and v_new > 0.0:
        openings[i] += 1
        if cavity[CAV_FIRST, i] < 0.0:
            cavity[CAV_FIRST, i] = t
    if v_old > 0.0 and v_new <= 0.0:
        cavity[CAV_LAST, i] = t
    if v_new > cavity[CAV_LARGEST, i]:
        cavity[CAV_LARGEST, i] = v_new


@njit(cache=True, _nrt=False)
def node_cavity_step(ic, net_out, dt, t, cavity, openings):
    """Integrate the vapour cavity at node point ``ic`` over one step from its net outflow
    at vapour head (trapezoidal); True while it stays open, else it is closed (volume 0)."""
    v_old = cavity[CAV_VOLUME, ic]
    v_new = v_old + 0.5 * dt * (net_out + cavity[CAV_RATE, ic])
    is_open = v_new > 0.0
    if is_open:
        cavity[CAV_RATE, ic] = net_out
    else:
        v_new = 0.0
        cavity[CAV_RATE, ic] = 0.0
    cavity[CAV_VOLUME, ic] = v_new
    cavity_stats(ic, v_old, v_new, t, cavity, openings)
    return is_open


@njit(cache=True, _nrt=False)
def junction(e0, e1, demand, orifice_c, orifice_z, hv, dt, t, scratch, old, older, new,
             ends, coef, cavity, openings):
    """Common head of the pipe ends e0..e1-1 with continuity; returns the outflow [m^3/s].

    Notes
    -----
    H sum(1/B_i) = sum(C_i/B_i) - Q_ext; with an orifice to atmosphere
    Q_ext = c sqrt(H - z) this is a quadratic in y = sqrt(H - z). A dead end is a junction
    of one pipe. Below vapour head the head is held at Hv and the cavity volume integrated
    (trapezoidal) from the net outflow until it closes. ``scratch`` (2, ends) keeps C and B.
    """
    sum_c, sum_inv = gather_characteristics(e0, e1, old, older, ends, coef, scratch)
    s = sum_c - demand
    outflow = demand
    h = s / sum_inv
    if e1 - e0 == 1 and demand == 0.0:
        h = scratch[0, e0]  # a closed end: exactly no flow, whatever the rounding of s / sum_inv
    if orifice_c > 0.0:
        constant = sum_inv * orifice_z - s
        if constant < 0.0:
            y = 2.0 * (-constant) / (orifice_c + math.sqrt(orifice_c**2 - 4.0 * sum_inv * constant))
            h = y * y + orifice_z
            outflow += orifice_c * y
    ic = ends[e0, END_POINT]
    if cavity[CAV_VOLUME, ic] > 0.0 or h < hv[ic]:
        hc = hv[ic]
        net_out = demand
        for e in range(e0, e1):
            net_out -= (scratch[0, e] - hc) / scratch[1, e]
        if node_cavity_step(ic, net_out, dt, t, cavity, openings):
            h = hc
            outflow = demand
    set_common_head(e0, e1, h, scratch, ends, new)
    return outflow


@njit(cache=True, _nrt=False)
def fixed_head(e0, e1, h, old, older, new, ends, coef):
    """Reservoir or measured head: H given; returns the flow into the reservoir [m^3/s]."""
    total = 0.0
    for e in range(e0, e1):
        c, B = characteristic(e, old, older, ends, coef)
        q = (c - h) / B
        total += q
        _set_end(e, h, q, ends, new)
    return total


@njit(cache=True, _nrt=False)
def end_valve(e0, coefficient, outlet_head, reverse_allowed, hv, old, older, new, ends, coef,
              cavity):
    """Valve at a pipe end discharging to ``outlet_head``; returns its outflow, or NaN
    when the valve acts as a closed end this step (the caller then runs ``junction``)."""
    ic = ends[e0, END_POINT]
    c, B = characteristic(e0, old, older, ends, coef)
    difference = c - outlet_head
    if coefficient <= 0.0 or cavity[CAV_VOLUME, ic] > 0.0 or (
            difference < 0.0 and not reverse_allowed):
        return np.nan
    q = orifice_flow(difference, B, coefficient)
    h = c - B * q
    if h < hv[ic]:
        return np.nan
    _set_end(e0, h, q, ends, new)
    return q


@njit(cache=True, _nrt=False)
def inline_valve(e0, coefficient, hv, dt, t, old, older, new, ends, coef, cavity, openings):
    """Valve between the pipe ending at e0 and the pipe starting at e0 + 1.

    Returns the valve flow, or NaN when closed (the caller treats both sides as dead ends).
    A vapour cavity may open just downstream of the valve (the classic column separation
    after a fast closure); it is held at Hv while the valve feeds it.
    """
    if coefficient <= 0.0:
        return np.nan
    e1 = e0 + 1
    c0, b0 = characteristic(e0, old, older, ends, coef)
    c1, b1 = characteristic(e1, old, older, ends, coef)
    q = orifice_flow(c0 - c1, b0 + b1, coefficient)
    h0 = c0 - b0 * q
    h1 = c1 + b1 * q
    i1 = ends[e1, END_POINT]
    q_pipe = q
    if cavity[CAV_VOLUME, i1] > 0.0 or h1 < hv[i1]:
        hc = hv[i1]
        qc = orifice_flow(c0 - hc, b0, coefficient)
        q_down = (hc - c1) / b1
        if node_cavity_step(i1, q_down - qc, dt, t, cavity, openings):
            q, h1, q_pipe = qc, hc, q_down
            h0 = c0 - b0 * q
    _set_end(e0, h0, q, ends, new)
    _set_end(e1, h1, -q_pipe, ends, new)
    return q


@njit(cache=True, _nrt=False)
def table_lookup(table, x, inverse_step):
    """Linear interpolation in a uniform table over [0, 2 pi]: (value, slope per rad)."""
    u = x * inverse_step
    i = int(u)
    n = table.size
    if i > n - 2:
        i = n - 2
    if i < 0:
        i = 0
    f = u - i
    slope = table[i + 1] - table[i]
    return table[i] + f * slope, slope * inverse_step


@njit(cache=True, _nrt=False)
def _pump_equations(v, a, dc, bt, hr, wh_table, wb_table, inv_step):
    x = math.pi + math.atan2(v, a)
    r2 = a * a + v * v
    wh, whs = table_lookup(wh_table, x, inv_step)
    wb, wbs = table_lookup(wb_table, x, inv_step)
    f1 = dc + bt * v - hr * wh * r2
    f1v = bt - hr * (whs * a + 2.0 * v * wh)
    f1a = -hr * (-whs * v + 2.0 * a * wh)
    beta = wb * r2
    f2v = wbs * a + 2.0 * v * wb
    f2a = -wbs * v + 2.0 * a * wb
    return f1, f1v, f1a, beta, f2v, f2a


@njit(cache=True, _nrt=False)
def pump(dc, bt, hr, ct, command, a_old, beta_old, v_start, flow_fixed_zero, wh_table,
         wb_table, inv_step):
    """Per-unit flow v, speed alpha and torque beta of a pump set at the new time.

    Parameters
    ----------
    dc : C_discharge - C_suction [m]. bt : (B_s + B_d) n Q_R, head per unit flow [m].
    hr : rated head [m]. ct : T_R dt / (I omega_R) [-]. command : prescribed speed, < 0 for
    free run-down. flow_fixed_zero : check valve closed, v = 0.

    Notes
    -----
    Head balance dc + bt v = H_R WH(x)(alpha^2 + v^2) and, running down, the speed change
    I omega_R d(alpha)/dt = -T_R beta integrated by the trapezoidal rule; solved together
    by Newton's method (Wylie & Streeter 1993, sec. 4.4, from memory).
    """
    v = 0.0 if flow_fixed_zero else v_start
    a = a_old if command < 0.0 else command
    beta = 0.0
    for _ in range(60):
        f1, f1v, f1a, beta, f2v, f2a = _pump_equations(v, a, dc, bt, hr, wh_table, wb_table,
                                                       inv_step)
        dv = 0.0
        da = 0.0
        if command < 0.0:
            f2 = a - a_old + 0.5 * ct * (beta + beta_old)
            g2v = 0.5 * ct * f2v
            g2a = 1.0 + 0.5 * ct * f2a
            if flow_fixed_zero:
                da = f2 / g2a
            else:
                det = f1v * g2a - f1a * g2v
                if det == 0.0:
                    break
                dv = (f1 * g2a - f2 * f1a) / det
                da = (f2 * f1v - f1 * g2v) / det
        elif not flow_fixed_zero:
            if f1v == 0.0:
                break
            dv = f1 / f1v
        dv = min(max(dv, -0.25), 0.25)
        da = min(max(da, -0.1), 0.1)
        v -= dv
        a -= da
        if abs(dv) < 1e-12 and abs(da) < 1e-12:
            break
    f1, f1v, f1a, beta, f2v, f2a = _pump_equations(v, a, dc, bt, hr, wh_table, wb_table, inv_step)
    return v, a, beta




@njit(cache=True, _nrt=False)
def pump_node(e0, n_ends, units, qr, hr, ct, sump, check, command, wh_table, wb_table,
              inv_step, state, hv, dt, t, scratch, old, older, new, ends, coef, cavity,
              openings):
    """Pump station for one step; ``state`` = [alpha, beta, v, check valve open].

    One end: sump at ``sump`` head feeds the pipe starting at e0. Two ends: suction pipe
    ends at e0, discharge pipe starts at e0 + 1. Returns the flow taken from the sump
    (one end) as a negative outflow, else 0.
    """
    e_dis = e0 + n_ends - 1
    a_old, beta_old, v_old, is_open = state[0], state[1], state[2], state[3] > 0.0
    if is_open or not check:
        c_dis, b_dis = characteristic(e_dis, old, older, ends, coef)
        if n_ends == 2:
            c_suc, b_suc = characteristic(e0, old, older, ends, coef)
        else:
            c_suc, b_suc = sump, 0.0
        v, a, beta = pump(c_dis - c_suc, (b_suc + b_dis) * units * qr, hr, ct, command, a_old,
                          beta_old, v_old, False, wh_table, wb_table, inv_step)
        if v >= 0.0 or not check:
            q = units * qr * v
            _set_end(e_dis, c_dis + b_dis * q, -q, ends, new)
            if n_ends == 2:
                _set_end(e0, c_suc - b_suc * q, q, ends, new)
            state[0], state[1], state[2], state[3] = a, beta, v, 1.0
            return -q if n_ends == 1 else 0.0
    # check valve closed: both sides are closed ends, the set turns without flow
    junction(e_dis, e_dis + 1, 0.0, 0.0, 0.0, hv, dt, t, scratch, old, older, new, ends, coef,
             cavity, openings)
    h_suc = sump
    if n_ends == 2:
        junction(e0, e0 + 1, 0.0, 0.0, 0.0, hv, dt, t, scratch, old, older, new, ends, coef,
                 cavity, openings)
        h_suc = new[ROW_H, ends[e0, END_POINT]]
    v, a, beta = pump(0.0, 0.0, hr, ct, command, a_old, beta_old, 0.0, True, wh_table,
                      wb_table, inv_step)
    shutoff, _ = table_lookup(wh_table, math.pi + math.atan2(0.0, a), inv_step)
    reopen = h_suc + hr * shutoff * a * a > new[ROW_H, ends[e_dis, END_POINT]]
    state[0], state[1], state[2], state[3] = a, beta, 0.0, 1.0 if reopen else 0.0
    return 0.0
