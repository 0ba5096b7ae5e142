"""Compiled surge vessel (air chamber) boundary of the MOC engine.

The pipe ends at the vessel's node share one head H_P. With S = sum C_i/B_i and
W = sum 1/B_i over the ends, the flow into the vessel is Q = S - H_P W (continuity). The gas
obeys the polytropic law H_g V^m = C, with H_g its absolute pressure head; the liquid surface
sits at a constant elevation z_s below the gas, and the connection loses R Q|Q| (R for
inflow or outflow), so H_g = H_P - R Q|Q| - z_s + p_atm/(rho g). The gas volume follows the
flow by the trapezoidal rule, V = V_old - dt/2 (Q_old + Q). Together:

    F(Q) = [(S - Q)/W + offset - R Q|Q|] [V_old - dt/2 (Q_old + Q)]^m - C = 0

with both factors falling as Q rises, so F has one root; it is found by Newton's method kept
inside a bracket (Press et al., Numerical Recipes, 3rd ed., 2007, sec. 9.4, "rtsafe"). The
equations follow the air-chamber boundary of Wylie & Streeter, Fluid Transients in Systems,
1993 (from memory).
"""

from __future__ import annotations

from numba import njit

from models.moc_boundaries import gather_characteristics, set_common_head

__all__ = ["air_vessel", "VESSEL_C", "VESSEL_M", "VESSEL_R_IN", "VESSEL_R_OUT", "VESSEL_OFFSET",
           "VESSEL_COLUMNS", "STATE_GAS", "STATE_FLOW", "vessel_constants"]

# columns of the vessel table (vessels, 5) and of the vessel state (vessels, 2)
VESSEL_C, VESSEL_M, VESSEL_R_IN, VESSEL_R_OUT, VESSEL_OFFSET = 0, 1, 2, 3, 4
VESSEL_COLUMNS = 5
STATE_GAS, STATE_FLOW = 0, 1


@njit(cache=True, _nrt=False)
def _residual(q, s, w, offset, r_in, r_out, v_old, q_old, half_dt, m, c):
    """F(Q) and dF/dQ; beyond the physical range (no gas or no absolute pressure left) F is
    -C, below every root."""
    r = r_in if q > 0.0 else r_out
    hg = (s - q) / w + offset - r * q * abs(q)
    v = v_old - half_dt * (q_old + q)
    if hg <= 0.0 or v <= 0.0:
        return -c, -1.0
    vm = v**m
    f = hg * vm - c
    df = (-1.0 / w - 2.0 * r * abs(q)) * vm - hg * m * vm / v * half_dt
    return f, df


@njit(cache=True, _nrt=False)
def _vessel_flow(s, w, offset, r_in, r_out, v_old, q_old, half_dt, m, c):
    """The root Q of F: bracket it from the last step's flow, then Newton within it."""
    scale = max(abs(q_old), 1e-6 * (1.0 + v_old / half_dt))
    lo = q_old
    hi = q_old
    f, _ = _residual(q_old, s, w, offset, r_in, r_out, v_old, q_old, half_dt, m, c)
    if f > 0.0:
        while f > 0.0:
            hi += scale
            scale *= 2.0
            f, _ = _residual(hi, s, w, offset, r_in, r_out, v_old, q_old, half_dt, m, c)
    else:
        while f <= 0.0:
            lo -= scale
            scale *= 2.0
            f, _ = _residual(lo, s, w, offset, r_in, r_out, v_old, q_old, half_dt, m, c)
    q = 0.5 * (lo + hi)
    for _ in range(200):
        f, df = _residual(q, s, w, offset, r_in, r_out, v_old, q_old, half_dt, m, c)
        if f > 0.0:
            lo = q
        else:
            hi = q
        trial = q - f / df if df < 0.0 else 0.5 * (lo + hi)
        if not lo < trial < hi:
            trial = 0.5 * (lo + hi)
        if abs(trial - q) <= 1e-13 * (1.0 + abs(q)) or hi - lo <= 1e-15 * (1.0 + abs(q)):
            return trial
        q = trial
    return q


@njit(cache=True, _nrt=False)
def air_vessel(e0, e1, table, state, dt, old, older, new, ends, coef, scratch):
    """Surge vessel at the node of pipe ends e0..e1-1 for one step; ``table`` (5,) its
    constants [C, m, R_in, R_out, offset], ``state`` (2,) [gas volume, last flow], updated.
    Returns the flow into the vessel [m^3/s]."""
    s, w = gather_characteristics(e0, e1, old, older, ends, coef, scratch)
    half_dt = 0.5 * dt
    v_old = state[STATE_GAS]
    q_old = state[STATE_FLOW]
    q = _vessel_flow(s, w, table[VESSEL_OFFSET], table[VESSEL_R_IN], table[VESSEL_R_OUT], v_old,
                     q_old, half_dt, table[VESSEL_M], table[VESSEL_C])
    h = (s - q) / w
    set_common_head(e0, e1, h, scratch, ends, new)
    state[STATE_GAS] = v_old - half_dt * (q_old + q)
    state[STATE_FLOW] = q
    return q


def vessel_constants(vessel, head_m: float, fluid) -> list:
    """The table row of a vessel whose node starts at ``head_m`` [m] with no flow."""
    offset = vessel.gas_head_offset_m(fluid)
    gas_head = head_m + offset
    if not gas_head > 0:
        raise ValueError(f"air vessel {vessel.id!r}: the steady head {head_m:.2f} m gives no "
                         "absolute gas pressure; check its elevation and liquid level")
    c = gas_head * vessel.gas_volume_m3 ** vessel.polytropic_exponent
    return [c, vessel.polytropic_exponent, vessel.inflow_loss_s2_m5, vessel.outflow_loss_s2_m5, offset]


