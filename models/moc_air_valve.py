"""Compiled air valve (air inlet and release valve) boundary of the MOC engine.

While the head at the valve stays above its elevation (pressure above atmospheric) and no
air is inside, the valve is shut and the node is a plain junction. When the head falls
below it, air enters; the pocket stays at the node, is isothermal (p V = m R T), and leaves
again through the (usually smaller) outlet when the pressure rises; once its air is out,
the valve shuts and the node is a junction again (the collapse of the last air can give a
sharp rise: the slam of a closing air valve).

Per step, with S = sum C_i/B_i and W = sum 1/B_i over the pipe ends and H the node head:

    q(H) = H W - S                         liquid leaving the node: the pocket's growth
    V(H) = V_old + dt/2 (q_old + q(H))      pocket volume (trapezoidal)
    p(H) = rho g (H - z) + p_atm            absolute pressure
    m(p) = m_old + dt/2 (mdot_old + mdot(p))
    G(H) = p V - m R T = 0

G rises with H (V and p rise, the inflow mdot falls), so the root is unique; it is found
by the Illinois variant of regula falsi (Dowell & Jarratt, BIT 11, 1971). The air flow is
isentropic orifice flow of air (k = 1.4), subsonic or choked at the critical pressure ratio
(2/(k+1))^(k/(k-1)) = 0.528 (the air-valve model of Wylie & Streeter, Fluid Transients in
Systems, 1993, from memory; the orifice relations are standard compressible flow).

Limits: the pocket stays at the node (it does not travel along the pipe), holds air only
(with an inlet too small for the flow the pressure may fall below the vapour pressure, which
is not enforced here), and the liquid volume it held at the step where the last air leaves
is not carried into the pipes' balance.
"""

from __future__ import annotations

import math

from numba import njit

from models.moc_boundaries import gather_characteristics, set_common_head

__all__ = ["air_valve", "air_mass_flow", "CRITICAL_RATIO", "GAS_CONSTANT_AIR",
           "VALVE_Z", "VALVE_IN", "VALVE_OUT", "VALVE_PATM", "VALVE_RT", "VALVE_RHOG",
           "VALVE_COLUMNS", "AIR_VOLUME", "AIR_MASS", "AIR_GROWTH", "AIR_MASS_RATE", "AIR_ROWS"]

K_AIR = 1.4
#: Critical (choking) pressure ratio of air, (2/(k+1))^(k/(k-1)) [-].
CRITICAL_RATIO = (2.0 / (K_AIR + 1.0)) ** (K_AIR / (K_AIR - 1.0))
#: Specific gas constant of dry air [J/(kg K)] (from memory; 8.314462 / 0.0289647).
GAS_CONSTANT_AIR = 287.05
_CHOKED = math.sqrt(K_AIR * (2.0 / (K_AIR + 1.0)) ** ((K_AIR + 1.0) / (K_AIR - 1.0)))

# columns of the valve table (valves, 6) and of the valve state (valves, 4)
VALVE_Z, VALVE_IN, VALVE_OUT, VALVE_PATM, VALVE_RT, VALVE_RHOG = 0, 1, 2, 3, 4, 5
VALVE_COLUMNS = 6
AIR_VOLUME, AIR_MASS, AIR_GROWTH, AIR_MASS_RATE = 0, 1, 2, 3
AIR_ROWS = 4


@njit(cache=True, _nrt=False)
def _orifice_mass_flow(p_up, rt_up, p_down, area):
    """Isentropic mass flow [kg/s] of air through an orifice of effective area ``area`` from
    stagnation pressure ``p_up`` (R T = ``rt_up``) to ``p_down`` <= ``p_up``."""
    r = p_down / p_up
    if r <= CRITICAL_RATIO:
        return area * p_up * _CHOKED / math.sqrt(rt_up)
    term = r ** (2.0 / K_AIR) - r ** ((K_AIR + 1.0) / K_AIR)
    return area * p_up * math.sqrt(2.0 * K_AIR / (K_AIR - 1.0) * max(term, 0.0) / rt_up)


@njit(cache=True, _nrt=False)
def air_mass_flow(p, table):
    """Air mass flow into the pocket at absolute pressure ``p`` [kg/s]; negative out."""
    p_atm = table[VALVE_PATM]
    rt = table[VALVE_RT]
    if p < p_atm:
        return _orifice_mass_flow(p_atm, rt, max(p, 0.0), table[VALVE_IN])
    return -_orifice_mass_flow(p, rt, p_atm, table[VALVE_OUT])


@njit(cache=True, _nrt=False)
def _gas_balance(h, s, w, table, state, half_dt):
    """G(H) = p V - m R T, and the pocket's volume and mass at H."""
    q = h * w - s
    v = state[AIR_VOLUME] + half_dt * (state[AIR_GROWTH] + q)
    p = table[VALVE_RHOG] * (h - table[VALVE_Z]) + table[VALVE_PATM]
    m = state[AIR_MASS] + half_dt * (state[AIR_MASS_RATE] + air_mass_flow(p, table))
    if v <= 0.0 or p <= 0.0:
        return -max(m, 0.0) * table[VALVE_RT] - 1e-12, v, m
    return p * v - m * table[VALVE_RT], v, m


@njit(cache=True, _nrt=False)
def _pocket_head(s, w, table, state, half_dt):
    """The head at which the pocket's gas law holds (Illinois regula falsi)."""
    h_volume = (s - state[AIR_GROWTH] - state[AIR_VOLUME] / half_dt) / w  # V(H) = 0
    h_vacuum = table[VALVE_Z] - table[VALVE_PATM] / table[VALVE_RHOG]
    lo = max(h_volume, h_vacuum)
    g_lo, _, _ = _gas_balance(lo, s, w, table, state, half_dt)
    step = max(1.0, abs(lo) * 1e-3)
    hi = lo + step
    g_hi, _, _ = _gas_balance(hi, s, w, table, state, half_dt)
    while g_hi <= 0.0:
        lo, g_lo = hi, g_hi
        step *= 2.0
        hi = lo + step
        g_hi, _, _ = _gas_balance(hi, s, w, table, state, half_dt)
    side = 0
    h = hi
    for _ in range(200):
        h = (lo * g_hi - hi * g_lo) / (g_hi - g_lo)
        g, _, _ = _gas_balance(h, s, w, table, state, half_dt)
        if abs(hi - lo) <= 1e-11 * (1.0 + abs(h)) or g == 0.0:
            return h
        if g > 0.0:
            hi, g_hi = h, g
            if side == 1:
                g_lo *= 0.5
            side = 1
        else:
            lo, g_lo = h, g
            if side == -1:
                g_hi *= 0.5
            side = -1
    return h


@njit(cache=True, _nrt=False)
def air_valve(e0, e1, table, state, dt, old, older, new, ends, coef, scratch):
    """Air valve at the node of pipe ends e0..e1-1 for one step; ``table`` (6,) its
    constants [z, inlet CdA, outlet CdA, p_atm, R T, rho g], ``state`` (4,) [air volume,
    air mass, pocket growth rate, air mass rate], updated. Returns the pocket's growth rate
    (the liquid it displaces from the node) [m^3/s]."""
    s, w = gather_characteristics(e0, e1, old, older, ends, coef, scratch)
    half_dt = 0.5 * dt
    h = s / w  # the shut valve: a plain junction
    if state[AIR_VOLUME] > 0.0 or h < table[VALVE_Z]:
        h = _pocket_head(s, w, table, state, half_dt)
        _, v, m = _gas_balance(h, s, w, table, state, half_dt)
        p = table[VALVE_RHOG] * (h - table[VALVE_Z]) + table[VALVE_PATM]
        if v > 1e-12 and m > 0.0:
            state[AIR_GROWTH] = h * w - s
            state[AIR_MASS_RATE] = air_mass_flow(p, table)
            state[AIR_VOLUME] = v
            state[AIR_MASS] = m
        else:  # the last air is out: the valve shuts on the liquid
            h = s / w
            state[AIR_VOLUME] = 0.0
            state[AIR_MASS] = 0.0
            state[AIR_GROWTH] = 0.0
            state[AIR_MASS_RATE] = 0.0
    set_common_head(e0, e1, h, scratch, ends, new)
    return state[AIR_GROWTH]
