"""Pipe friction: steady Darcy factors and the unsteady-friction coefficient.

Functions compute; nothing here reads files. The MOC engine calls
:func:`darcy_friction_factor` once per pipe at the initial flow (quasi-steady friction) and
:func:`vardy_brown_shear_decay_coefficient` for the unsteady-friction option.

>>> round(colebrook_white_factor(1e5, 1e-4), 6)
0.018514
"""

from __future__ import annotations

import math

__all__ = [
    "reynolds_number",
    "colebrook_white_factor",
    "swamee_jain_factor",
    "darcy_friction_factor",
    "FRICTION_MODELS",
    "vardy_brown_shear_decay_coefficient",
    "reach_resistance",
]

FRICTION_MODELS = ("colebrook1939", "swameejain1976")
LAMINAR_LIMIT_RE = 2000.0
TURBULENT_LIMIT_RE = 4000.0


def _check_positive(name: str, value: float) -> None:
    if not (value > 0.0 and math.isfinite(value)):
        raise ValueError(f"{name} must be a positive finite number, got {value!r}")


def reynolds_number(velocity_m_s: float, diameter_m: float, kinematic_viscosity_m2_s: float) -> float:
    """Reynolds number of pipe flow [-].

    Notes
    -----
    Re = |V| D / nu (common practice).
    """
    _check_positive("diameter_m", diameter_m)
    _check_positive("kinematic_viscosity_m2_s", kinematic_viscosity_m2_s)
    return abs(velocity_m_s) * diameter_m / kinematic_viscosity_m2_s


def colebrook_white_factor(reynolds: float, relative_roughness: float) -> float:
    """Darcy friction factor from the Colebrook–White equation [-].

    Parameters
    ----------
    reynolds : float
        Reynolds number [-], turbulent (> 2000).
    relative_roughness : float
        Roughness over diameter, eps/D [-].

    Notes
    -----
    1/sqrt(f) = -2 log10( (eps/D)/3.7 + 2.51/(Re sqrt(f)) ), solved by Newton iteration
    on x = 1/sqrt(f) from the Swamee–Jain value (converges in a few steps).

    References
    ----------
    .. [1] C. F. Colebrook, "Turbulent flow in pipes, with particular reference to the
       transition region between the smooth and rough pipe laws", J. ICE 11(4), 1939.
    """
    _check_positive("reynolds", reynolds)
    if relative_roughness < 0.0:
        raise ValueError(f"relative_roughness must be >= 0, got {relative_roughness!r}")
    x = 1.0 / math.sqrt(swamee_jain_factor(reynolds, relative_roughness))
    a = relative_roughness / 3.7
    b = 2.51 / reynolds
    k = 2.0 / math.log(10.0)
    for _ in range(50):
        inner = a + b * x
        g = x + 2.0 * math.log10(inner)
        dg = 1.0 + k * b / inner
        step = g / dg
        x -= step
        if abs(step) < 1e-13 * x:
            break
    return 1.0 / (x * x)


def swamee_jain_factor(reynolds: float, relative_roughness: float) -> float:
    """Darcy friction factor from the explicit Swamee–Jain approximation [-].

    Notes
    -----
    f = 0.25 / log10( (eps/D)/3.7 + 5.74/Re^0.9 )^2.

    References
    ----------
    .. [1] P. K. Swamee, A. K. Jain, "Explicit equations for pipe-flow problems",
       J. Hydraul. Div. ASCE 102(HY5), 1976.
    """
    _check_positive("reynolds", reynolds)
    return 0.25 / math.log10(relative_roughness / 3.7 + 5.74 / reynolds**0.9) ** 2


def darcy_friction_factor(
    reynolds: float, relative_roughness: float, model: str = "colebrook1939"
) -> float:
    """Darcy friction factor for any flow regime [-].

    Laminar (Re <= 2000): 64/Re. Turbulent (Re >= 4000): the chosen ``model``. In between,
    a linear blend of the two on Re (common practice; the transition itself is not
    predictable). Re = 0 returns the laminar limit at Re = 1 (a finite factor for a pipe
    without flow; its resistance then multiplies Q = 0).

    Parameters
    ----------
    reynolds : float
        Reynolds number [-].
    relative_roughness : float
        eps/D [-].
    model : str
        One of :data:`FRICTION_MODELS`.
    """
    if model not in FRICTION_MODELS:
        raise ValueError(f"unknown friction model {model!r}; choose one of {FRICTION_MODELS}")
    turbulent = colebrook_white_factor if model == "colebrook1939" else swamee_jain_factor
    re = max(reynolds, 1.0)
    if re <= LAMINAR_LIMIT_RE:
        return 64.0 / re
    if re >= TURBULENT_LIMIT_RE:
        return turbulent(re, relative_roughness)
    weight = (re - LAMINAR_LIMIT_RE) / (TURBULENT_LIMIT_RE - LAMINAR_LIMIT_RE)
    laminar = 64.0 / LAMINAR_LIMIT_RE
    return (1.0 - weight) * laminar + weight * turbulent(TURBULENT_LIMIT_RE, relative_roughness)


def vardy_brown_shear_decay_coefficient(reynolds: float) -> float:
    """Brunone friction coefficient k from Vardy's shear-decay coefficient C* [-].

    Notes
    -----
    k = sqrt(C*) / 2 with C* = 0.00476 for laminar flow (Re <= 2000) and
    C* = 7.41 / Re^(log10(14.3 / Re^0.05)) for turbulent flow.

    References
    ----------
    .. [1] A. E. Vardy, J. M. B. Brown, "Transient, turbulent, smooth pipe friction",
       J. Hydraul. Res. 33(4), 1995; and J. Hydraul. Res. 34(3), 1996 (from memory).
    .. [2] B. Brunone, U. M. Golia, M. Greco, "Some remarks on the momentum equation for
       fast transients", Proc. Int. Meeting on Hydraulic Transients with Column
       Separation, IAHR, Valencia, 1991 (from memory).
    """
    if reynolds < 0.0 or not math.isfinite(reynolds):
        raise ValueError(f"reynolds must be a finite number >= 0, got {reynolds!r}")
    if reynolds <= LAMINAR_LIMIT_RE:
        c_star = 0.00476
    else:
        c_star = 7.41 / reynolds ** math.log10(14.3 / reynolds**0.05)
    return math.sqrt(c_star) / 2.0


def reach_resistance(
    friction_factor: float, reach_length_m: float, diameter_m: float, area_m2: float, gravity_m_s2: float
) -> float:
    """Friction resistance of one MOC reach [s^2/m^5].

    Notes
    -----
    R = f dx / (2 g D A^2); the head loss over the reach is R Q |Q|.

    References
    ----------
    .. [1] E. B. Wylie, V. L. Streeter, *Fluid Transients in Systems*, Prentice Hall, 1993,
       ch. 3 (from memory).
    """
    return friction_factor * reach_length_m / (2.0 * gravity_m_s2 * diameter_m * area_m2**2)
