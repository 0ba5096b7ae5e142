"""Pipe materials and the theoretical wave speed of a water-filled elastic pipe.

Pure functions of pipe data and water temperature, SI units. The wave speed follows the
Korteweg form with the restraint factor ``c1`` of Wylie & Streeter (1993, sec. 2.2)::

    a = sqrt( (K / rho) / (1 + c1 K D / (E e)) )

Water bulk modulus and density come from :mod:`models.water`. Published through
:mod:`models.properties`.

References
----------
.. [1] Wylie, E. B. and Streeter, V. L. "Fluid Transients in Systems", Prentice Hall, 1993,
   sec. 2.2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from models.water import bulk_modulus_pa, speed_of_sound_m_s, water_density_kg_m3

__all__ = [
    "PipeMaterial",
    "PIPE_MATERIALS",
    "RESTRAINTS",
    "WALL_MODELS",
    "THICK_WALL_RATIO",
    "TheoreticalWaveSpeed",
    "pipe_material",
    "restraint_factor",
    "korteweg_wave_speed_m_s",
    "theoretical_wave_speed",
]

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
