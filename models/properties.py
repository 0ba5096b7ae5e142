"""Water properties and the theoretical wave speed of a water-filled pipe.

Pure functions of temperature and pipe data, SI units throughout. The water correlations are
published fits for liquid water at atmospheric pressure (0.101325 MPa); the test suite checks
them against IAPWS-95 as implemented by the ``iapws`` package. Pressure raises the speed of
sound by about 1.6 m/s per MPa at 20 C (IAPWS-95: 1482.35 m/s at 0.1 MPa, 1483.83 m/s at
1 MPa), about 0.1 % across the working range of a water main, which is ignored here.

The wave speed of a pipe follows the Korteweg form with the restraint factor ``c1`` of
Wylie & Streeter (1993, sec. 2.2)::

    a = sqrt( (K / rho) / (1 + c1 K D / (E e)) )

The water correlations are in :mod:`models.water`, the pipe materials and the wave-speed
formulas in :mod:`models.pipe_wave_speed`; every public name of both is importable from here.

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

from models.pipe_wave_speed import (
    PIPE_MATERIALS,
    RESTRAINTS,
    THICK_WALL_RATIO,
    WALL_MODELS,
    PipeMaterial,
    TheoreticalWaveSpeed,
    korteweg_wave_speed_m_s,
    pipe_material,
    restraint_factor,
    theoretical_wave_speed,
)
from models.water import (
    bulk_modulus_pa,
    speed_of_sound_m_s,
    vapour_pressure_pa,
    water_density_kg_m3,
)

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
