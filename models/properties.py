"""Water properties and the theoretical wave speed of a water-filled pipe.

Pure functions of temperature and pipe data, SI units throughout. The water correlations are
published fits for liquid water at atmospheric pressure (0.101325 MPa); the test suite checks
them against IAPWS-95 as implemented by the ``iapws`` package. Pressure raises the speed of
sound by about 1.6 m/s per MPa at 20 C (IAPWS-95: 1482.35 m/s at 0.1 MPa, 1483.83 m/s at
1 MPa), about 0.1 % across the working range of a water main, which is ignored here.

The wave speed of a pipe follows the Korteweg form with the restraint factor ``c1`` of
Wylie & Streeter (1993, sec. 2.2)::

    a = sqrt( (K / rho) / (1 + c1 K D / (E e)) )

>>> round(speed_of_sound_m_s(20.0))
1482
>>> pipe = korteweg_wave_speed_m_s(
...     bulk_modulus_pa=2.19e9, density_kg_m3=998.2, diameter_m=0.5, wall_thickness_m=0.01,
...     youngs_modulus_pa=207e9, poisson_ratio=0.3, restraint="fully_anchored")
>>> 1200.0 < pipe < 1300.0
True

References
----------
.. [1] Kell, G. S. "Density, thermal expansivity, and compressibility of liquid water from
   0 to 150 C", J. Chem. Eng. Data 20(1), 97-105, 1975.
.. [2] Marczak, W. "Water as a standard in the measurements of speed of sound in liquids",
   J. Acoust. Soc. Am. 102(5), 2776-2779, 1997.
.. [3] Wagner, W. and Pruss, A. "International equations for the saturation properties of
   ordinary water substance", J. Phys. Chem. Ref. Data 22(3), 783-787, 1993.
.. [4] Wylie, E. B. and Streeter, V. L. "Fluid Transients in Systems", Prentice Hall, 1993,
   sec. 2.2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = [
    "PipeMaterial",
    "PIPE_MATERIALS",
    "RESTRAINTS",
    "WALL_MODELS",
    "THICK_WALL_RATIO",
    "TheoreticalWaveSpeed",
    "water_density_kg_m3",
    "speed_of_sound_m_s",
    "bulk_modulus_pa",
    "vapour_pressure_pa",
    "pipe_material",
    "restraint_factor",
    "korteweg_wave_speed_m_s",
    "theoretical_wave_speed",
]

#: Temperature range of the water correlations [C] (the narrowest of [1]-[3]).
_TEMPERATURE_RANGE_C = (0.0, 95.0)

#: Restraint cases of Wylie & Streeter (1993, sec. 2.2).
RESTRAINTS = ("upstream_anchored", "fully_anchored", "expansion_joints")
#: Wall models: ``thin``, ``thick``, or ``auto`` (thick below :data:`THICK_WALL_RATIO`).
WALL_MODELS = ("thin", "thick", "auto")
#: D/e below which ``wall="auto"`` uses the thick-wall factor (Wylie & Streeter 1993, from
#: memory: thin-wall relations hold for D/e > 40).
THICK_WALL_RATIO = 40.0


@dataclass(frozen=True)
class PipeMaterial:
    """Elastic data of a pipe material.

    Parameters
    ----------
    name : str
    youngs_modulus_pa : float
        Typical Young's modulus [Pa] (hoop direction for composites).
    youngs_modulus_range_pa : tuple of float
        Range met in practice [Pa]; spreads the theoretical wave speed.
    poisson_ratio : float
        [-]
    note : str
        Where the value comes from.
    """

    name: str
    youngs_modulus_pa: float
    youngs_modulus_range_pa: tuple[float, float]
    poisson_ratio: float
    note: str


_MEMORY = "from memory (handbook range); confirm against the manufacturer's data"

#: Known pipe materials. All values are typical handbook values recalled from memory
#: (Wylie & Streeter 1993, table 2.1; Chaudhry 2014, table 2.1); a real pipe's modulus comes
#: from its manufacturer and can differ, plastics by +-20 % (viscoelastic, temperature and
#: load-duration dependent).
PIPE_MATERIALS: dict[str, PipeMaterial] = {
    m.name: m
    for m in (
        PipeMaterial("steel", 207e9, (200e9, 212e9), 0.30, _MEMORY),
        PipeMaterial("stainless_steel", 193e9, (190e9, 200e9), 0.30, _MEMORY),
        PipeMaterial("ductile_iron", 169e9, (166e9, 172e9), 0.28, _MEMORY),
        PipeMaterial("cast_iron", 100e9, (80e9, 170e9), 0.25, _MEMORY),
        PipeMaterial("pvc", 3.0e9, (2.4e9, 3.3e9), 0.45, _MEMORY),
        PipeMaterial("hdpe", 0.9e9, (0.7e9, 1.1e9), 0.46, _MEMORY + "; short-term modulus"),
        PipeMaterial("concrete", 25e9, (14e9, 30e9), 0.15, _MEMORY),
        PipeMaterial("asbestos_cement", 24e9, (20e9, 28e9), 0.20, _MEMORY),
        PipeMaterial("copper", 117e9, (107e9, 130e9), 0.34, _MEMORY),
        PipeMaterial("grp", 20e9, (10e9, 30e9), 0.30, _MEMORY + "; hoop modulus, anisotropic"),
    )
}


def _check_temperature(temperature_c: float, low: float, high: float) -> float:
    t = float(temperature_c)
    if not (low <= t <= high):
        raise ValueError(
            f"water temperature {temperature_c!r} C is outside {low:g} to {high:g} C, the range "
            "of the correlation; pass the water temperature in degrees Celsius"
        )
    return t


def water_density_kg_m3(temperature_c: float) -> float:
    """Density of liquid water at atmospheric pressure.

    Parameters
    ----------
    temperature_c : float
        Water temperature [C], 0 to 95.

    Returns
    -------
    float
        Density [kg/m^3].

    Raises
    ------
    ValueError
        Temperature outside the range of the correlation.

    Notes
    -----
    The correlation of [1]_ (IPTS-68 temperatures, coefficients from memory)::

        rho = (999.83952 + 16.945176 t - 7.9870401e-3 t^2 - 46.170461e-6 t^3
               + 105.56302e-9 t^4 - 280.54253e-12 t^5) / (1 + 16.879850e-3 t)

    Agrees with IAPWS-95 within 0.013 kg/m^3 from 0 to 95 C.

    References
    ----------
    .. [1] Kell, G. S., J. Chem. Eng. Data 20(1), 97-105, 1975.
    """
    t = _check_temperature(temperature_c, *_TEMPERATURE_RANGE_C)
    numerator = (
        999.83952
        + 16.945176 * t
        - 7.9870401e-3 * t**2
        - 46.170461e-6 * t**3
        + 105.56302e-9 * t**4
        - 280.54253e-12 * t**5
    )
    return numerator / (1.0 + 16.879850e-3 * t)


def speed_of_sound_m_s(temperature_c: float) -> float:
    """Speed of sound in pure water at atmospheric pressure.

    No liquid-filled pipe carries a pressure wave faster than this: it is the rigid-pipe limit
    of the Korteweg form and the upper plausibility bound of a field estimate.

    Parameters
    ----------
    temperature_c : float
        Water temperature [C], 0 to 95.

    Returns
    -------
    float
        Speed of sound [m/s].

    Notes
    -----
    Fifth-order polynomial of [1]_ (coefficients from memory)::

        c = 1402.385 + 5.038813 t - 5.799136e-2 t^2 + 3.287156e-4 t^3
            - 1.398845e-6 t^4 + 2.787860e-9 t^5

    References
    ----------
    .. [1] Marczak, W., J. Acoust. Soc. Am. 102(5), 2776-2779, 1997.
    """
    t = _check_temperature(temperature_c, *_TEMPERATURE_RANGE_C)
    return (
        1.402385e3
        + 5.038813 * t
        - 5.799136e-2 * t**2
        + 3.287156e-4 * t**3
        - 1.398845e-6 * t**4
        + 2.787860e-9 * t**5
    )


def bulk_modulus_pa(temperature_c: float) -> float:
    """Isentropic bulk modulus of water, the modulus that governs a pressure wave.

    Parameters
    ----------
    temperature_c : float
        Water temperature [C], 0 to 95.

    Returns
    -------
    float
        Bulk modulus [Pa].

    Notes
    -----
    ``K = rho c^2`` with the density of Kell (1975) and the speed of sound of Marczak (1997),
    so that the rigid-pipe limit ``sqrt(K/rho)`` of the Korteweg form is exactly the speed of
    sound (Wylie & Streeter 1993, eq. 2.1 with a rigid wall).
    """
    return water_density_kg_m3(temperature_c) * speed_of_sound_m_s(temperature_c) ** 2


def vapour_pressure_pa(temperature_c: float) -> float:
    """Saturation (vapour) pressure of water, absolute.

    Parameters
    ----------
    temperature_c : float
        Water temperature [C], 0 to 370.

    Returns
    -------
    float
        Vapour pressure, absolute [Pa].

    Notes
    -----
    Eq. 1 of [1]_ with T_c = 647.096 K, p_c = 22.064 MPa, theta = 1 - T/T_c::

        ln(p/p_c) = (T_c/T)(a1 theta + a2 theta^1.5 + a3 theta^3 + a4 theta^3.5
                            + a5 theta^4 + a6 theta^7.5)

    References
    ----------
    .. [1] Wagner, W. and Pruss, A., J. Phys. Chem. Ref. Data 22(3), 783-787, 1993.
    """
    t = _check_temperature(temperature_c, 0.0, 370.0)
    critical_temperature_k, critical_pressure_pa = 647.096, 22.064e6
    temperature_k = t + 273.15
    theta = 1.0 - temperature_k / critical_temperature_k
    series = (
        -7.85951783 * theta
        + 1.84408259 * theta**1.5
        - 11.7866497 * theta**3
        + 22.6807411 * theta**3.5
        - 15.9618719 * theta**4
        + 1.80122502 * theta**7.5
    )
    return critical_pressure_pa * math.exp(critical_temperature_k / temperature_k * series)


def pipe_material(name: str) -> PipeMaterial:
    """The named entry of :data:`PIPE_MATERIALS`; ``ValueError`` listing the known names."""
    try:
        return PIPE_MATERIALS[name]
    except KeyError:
        raise ValueError(
            f"unknown pipe material {name!r}; known: {sorted(PIPE_MATERIALS)}; or give "
            "youngs_modulus_pa and poisson_ratio for the pipe"
        ) from None


def _check_pipe(diameter_m: float, wall_thickness_m: float, youngs_modulus_pa: float,
                poisson_ratio: float) -> None:
    if not diameter_m > 0:
        raise ValueError(f"diameter_m={diameter_m!r} must be > 0 (internal diameter in metres)")
    if not 0 < wall_thickness_m < diameter_m / 2:
        raise ValueError(
            f"wall_thickness_m={wall_thickness_m!r} must be > 0 and below half the diameter "
            f"({diameter_m / 2:g} m); give the wall thickness in metres"
        )
    if not youngs_modulus_pa > 0:
        raise ValueError(f"youngs_modulus_pa={youngs_modulus_pa!r} must be > 0 (in Pa, not GPa)")
    if not -1.0 < poisson_ratio <= 0.5:
        raise ValueError(f"poisson_ratio={poisson_ratio!r} must lie in (-1, 0.5]")


def restraint_factor(
    poisson_ratio: float,
    restraint: str = "fully_anchored",
    *,
    diameter_m: float | None = None,
    wall_thickness_m: float | None = None,
    wall: str = "thin",
) -> float:
    """Restraint factor ``c1`` of the Korteweg wave-speed formula.

    Parameters
    ----------
    poisson_ratio : float
        Poisson's ratio of the wall [-].
    restraint : str
        ``upstream_anchored`` (anchored at the upstream end only), ``fully_anchored``
        (anchored throughout against axial movement; usual for buried pipes, common practice)
        or ``expansion_joints`` (expansion joints throughout).
    diameter_m, wall_thickness_m : float, optional
        Internal diameter and wall thickness [m]; needed for the thick-wall factor.
    wall : str
        ``thin`` or ``thick``.

    Returns
    -------
    float
        c1 [-].

    Notes
    -----
    Thin wall, with X = 1 - nu/2, 1 - nu^2 and 1 for the three cases::

        c1 = X

    Thick wall (Wylie & Streeter 1993, sec. 2.2, from memory)::

        c1 = (2 e / D)(1 + nu) + D X / (D + e)

    The thick-wall factor tends to the thin one as e/D -> 0.
    """
    cases = {
        "upstream_anchored": 1.0 - poisson_ratio / 2.0,
        "fully_anchored": 1.0 - poisson_ratio**2,
        "expansion_joints": 1.0,
    }
    if restraint not in cases:
        raise ValueError(f"unknown restraint {restraint!r}; use one of {RESTRAINTS}")
    factor = cases[restraint]
    if wall == "thin":
        return factor
    if wall != "thick":
        raise ValueError(f"unknown wall model {wall!r}; use 'thin' or 'thick'")
    if diameter_m is None or wall_thickness_m is None:
        raise ValueError("the thick-wall factor needs diameter_m and wall_thickness_m")
    e_over_d = wall_thickness_m / diameter_m
    return 2.0 * e_over_d * (1.0 + poisson_ratio) + factor / (1.0 + e_over_d)


def korteweg_wave_speed_m_s(
    *,
    bulk_modulus_pa: float,
    density_kg_m3: float,
    diameter_m: float,
    wall_thickness_m: float,
    youngs_modulus_pa: float,
    poisson_ratio: float,
    restraint: str = "fully_anchored",
    wall: str = "auto",
) -> float:
    """Wave speed in a liquid-filled elastic pipe (Korteweg form with restraint factor).

    Parameters
    ----------
    bulk_modulus_pa : float
        Bulk modulus of the liquid [Pa].
    density_kg_m3 : float
        Density of the liquid [kg/m^3].
    diameter_m : float
        Internal diameter [m].
    wall_thickness_m : float
        Wall thickness [m].
    youngs_modulus_pa : float
        Young's modulus of the wall [Pa].
    poisson_ratio : float
        Poisson's ratio of the wall [-].
    restraint : str
        One of :data:`RESTRAINTS` (see :func:`restraint_factor`).
    wall : str
        ``thin``, ``thick`` or ``auto`` (thick when D/e < :data:`THICK_WALL_RATIO`).

    Returns
    -------
    float
        Wave speed [m/s].

    Raises
    ------
    ValueError
        Non-positive dimensions or moduli, a wall thicker than the radius, an unknown
        restraint or wall model.

    Notes
    -----
    Sec. 2.2 of [1]_ (from memory)::

        a = sqrt( (K / rho) / (1 + c1 K D / (E e)) )

    References
    ----------
    .. [1] Wylie, E. B. and Streeter, V. L. "Fluid Transients in Systems", 1993, sec. 2.2.
    """
    _check_pipe(diameter_m, wall_thickness_m, youngs_modulus_pa, poisson_ratio)
    if not (bulk_modulus_pa > 0 and density_kg_m3 > 0):
        raise ValueError(
            f"bulk_modulus_pa={bulk_modulus_pa!r} and density_kg_m3={density_kg_m3!r} must be > 0"
        )
    if wall not in WALL_MODELS:
        raise ValueError(f"unknown wall model {wall!r}; use one of {WALL_MODELS}")
    if wall == "auto":
        wall = "thick" if diameter_m / wall_thickness_m < THICK_WALL_RATIO else "thin"
    c1 = restraint_factor(poisson_ratio, restraint, diameter_m=diameter_m,
                          wall_thickness_m=wall_thickness_m, wall=wall)
    stiffness_ratio = c1 * bulk_modulus_pa * diameter_m / (youngs_modulus_pa * wall_thickness_m)
    return math.sqrt(bulk_modulus_pa / density_kg_m3 / (1.0 + stiffness_ratio))


@dataclass(frozen=True)
class TheoreticalWaveSpeed:
    """Theoretical wave speed of a pipe with the spread from its material's modulus range.

    Attributes
    ----------
    wave_speed_m_s : float
        With the typical modulus [m/s].
    low_m_s, high_m_s : float
        With the low and high end of the modulus range [m/s].
    speed_of_sound_m_s : float
        Rigid-pipe limit at the water temperature [m/s].
    material : str
    wall : str
        Wall model used (``thin`` or ``thick``).
    """

    wave_speed_m_s: float
    low_m_s: float
    high_m_s: float
    speed_of_sound_m_s: float
    material: str
    wall: str


def theoretical_wave_speed(
    *,
    diameter_m: float,
    wall_thickness_m: float,
    temperature_c: float,
    material: str | None = None,
    youngs_modulus_pa: float | None = None,
    poisson_ratio: float | None = None,
    restraint: str = "fully_anchored",
    wall: str = "auto",
) -> TheoreticalWaveSpeed:
    """Theoretical wave speed of a water-filled pipe at a water temperature.

    Give either ``material`` (a key of :data:`PIPE_MATERIALS`) or both ``youngs_modulus_pa``
    and ``poisson_ratio``; explicit moduli override the table. Water bulk modulus and density
    come from :func:`bulk_modulus_pa` and :func:`water_density_kg_m3`.

    Returns
    -------
    TheoreticalWaveSpeed
        Typical value and the range from the material's modulus range; for explicit moduli
        the range is the single value.
    """
    if youngs_modulus_pa is not None and poisson_ratio is not None:
        moduli = (youngs_modulus_pa, youngs_modulus_pa, youngs_modulus_pa)
        nu, name = poisson_ratio, material or "custom"
    elif material is not None:
        entry = pipe_material(material)
        moduli = (entry.youngs_modulus_pa, *entry.youngs_modulus_range_pa)
        nu = entry.poisson_ratio if poisson_ratio is None else poisson_ratio
        name = material
    else:
        raise ValueError("give material, or both youngs_modulus_pa and poisson_ratio")
    if wall == "auto":
        wall = "thick" if diameter_m / max(wall_thickness_m, 1e-300) < THICK_WALL_RATIO else "thin"
    water = {
        "bulk_modulus_pa": bulk_modulus_pa(temperature_c),
        "density_kg_m3": water_density_kg_m3(temperature_c),
    }
    typical, low, high = (
        korteweg_wave_speed_m_s(**water, diameter_m=diameter_m, wall_thickness_m=wall_thickness_m,
                                youngs_modulus_pa=e, poisson_ratio=nu, restraint=restraint,
                                wall=wall)
        for e in moduli
    )
    return TheoreticalWaveSpeed(typical, low, high, speed_of_sound_m_s(temperature_c), name, wall)
