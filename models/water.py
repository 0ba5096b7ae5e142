"""Properties of liquid water at atmospheric pressure as functions of temperature.

Pure functions, SI units. The correlations are published fits for liquid water at
atmospheric pressure (0.101325 MPa); the test suite checks them against IAPWS-95 as
implemented by the ``iapws`` package. Pressure raises the speed of sound by about 1.6 m/s per
MPa at 20 C (IAPWS-95: 1482.35 m/s at 0.1 MPa, 1483.83 m/s at 1 MPa), about 0.1 % across the
working range of a water main, which is ignored here. Published through
:mod:`models.properties`.

References
----------
.. [1] Kell, G. S. "Density, thermal expansivity, and compressibility of liquid water from
   0 to 150 C", J. Chem. Eng. Data 20(1), 97-105, 1975.
.. [2] Marczak, W. "Water as a standard in the measurements of speed of sound in liquids",
   J. Acoust. Soc. Am. 102(5), 2776-2779, 1997.
.. [3] Wagner, W. and Pruss, A. "International equations for the saturation properties of
   ordinary water substance", J. Phys. Chem. Ref. Data 22(3), 783-787, 1993.
"""

from __future__ import annotations

import math

__all__ = ["water_density_kg_m3", "speed_of_sound_m_s", "bulk_modulus_pa", "vapour_pressure_pa"]

#: Temperature range of the water correlations [C] (the narrowest of [1]-[3]).
_TEMPERATURE_RANGE_C = (0.0, 95.0)


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
