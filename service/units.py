"""Unit spellings of logger channels and their conversion to SI.

Every value that enters surgesift is converted here, once, at the edge: gauge pressure to
pascal, flow to cubic metres per second, pump status and valve position to a fraction 0..1.
Inside the project only SI is used; units are named in identifiers (``max_kpa``) where a
database column or a report needs another unit.

Recognised spellings (case-insensitive, blanks ignored; the canonical spelling first)

=================  ============================================================  ===========
quantity           spellings                                                     SI factor
=================  ============================================================  ===========
pressure           ``Pa``                                                        1 Pa
pressure           ``kPa``, ``kPag``, ``kPa(g)``                                 1e3 Pa
pressure           ``MPa``, ``MPag``                                             1e6 Pa
pressure           ``bar``, ``barg``, ``bar(g)``                                 1e5 Pa
pressure           ``mbar``, ``mbarg``, ``hPa``                                  1e2 Pa
pressure           ``psi``, ``psig``, ``lbf/in2``                                6894.757... Pa
pressure           ``m`` (metres of water), ``mH2O``, ``mwc``, ``mwg``, ``mhd``  9806.65 Pa
pressure           ``ftH2O``, ``ftwc``                                           2989.067 Pa
flow               ``m3/s``, ``m^3/s``                                           1 m^3/s
flow               ``l/s``                                                       1e-3 m^3/s
flow               ``m3/h``                                                      1/3600
flow               ``l/min``                                                     1/60000
flow               ``m3/d``, ``ML/d``                                            1/86400, 1/86.4
pump_status        ``on/off``, ``0/1``, ``-``, ``1``; ``%``                      1; 0.01
valve_position     ``fraction``, ``0..1``, ``-``, ``1``; ``%``                   1; 0.01
=================  ============================================================  ===========

All pressures are gauge. Absolute spellings (``bara``, ``psia``, ``kPa(a)``, ``kPa abs``) are
refused with a message: an absolute reading needs the local atmospheric pressure subtracted,
which the logger or its export should do. ``mPa`` (millipascal) is refused as almost surely
meant to be ``MPa``.

A pressure in metres of water is a pressure expressed as the height of a column of water of
conventional density 1000 kg/m^3 under standard gravity, p = rho_n g_n h, so 1 m = 9.80665 kPa.
It is *not* the piezometric head of the tapping (that adds the tapping's elevation).

References
----------
.. [1] A. Thompson and B. N. Taylor, "Guide for the Use of the International System of Units
   (SI)", NIST Special Publication 811, 2008: 1 bar = 100 kPa (exact), 1 psi = 6.894757 kPa,
   standard acceleration of gravity g_n = 9.80665 m/s^2 (exact), conventional metre of water.
.. [2] International Yard and Pound agreement, 1959: 1 lb = 0.45359237 kg, 1 in = 0.0254 m,
   1 ft = 0.3048 m (exact); hence 1 lbf/in^2 = 0.45359237 * 9.80665 / 0.0254^2 Pa.
"""

from __future__ import annotations

import re
from typing import Mapping

import numpy as np

__all__ = [
    "STANDARD_GRAVITY_M_S2",
    "CONVENTIONAL_WATER_DENSITY_KG_M3",
    "PA_PER_PSI",
    "PA_PER_METRE_OF_WATER",
    "QUANTITIES",
    "UNIT_FACTORS",
    "canonical_unit",
    "recognise_unit",
    "si_factor",
    "si_unit",
    "to_si",
    "from_si",
    "same_unit",
    "valid_si_range",
]

STANDARD_GRAVITY_M_S2 = 9.80665
"""Standard acceleration of gravity g_n [m/s^2], exact by definition (NIST SP 811, 2008)."""

CONVENTIONAL_WATER_DENSITY_KG_M3 = 1000.0
"""Conventional density of water used for 'metres of water' [kg/m^3]."""

PA_PER_PSI = 0.45359237 * STANDARD_GRAVITY_M_S2 / 0.0254**2
"""One pound-force per square inch [Pa] = 6894.757293168... Pa (from the exact definitions)."""

PA_PER_METRE_OF_WATER = CONVENTIONAL_WATER_DENSITY_KG_M3 * STANDARD_GRAVITY_M_S2
"""One conventional metre of water [Pa] = rho_n g_n (1 m) = 9806.65 Pa."""

QUANTITIES = ("pressure", "flow", "pump_status", "valve_position")

UNIT_FACTORS: Mapping[str, Mapping[str, float]] = {
    "pressure": {
        "Pa": 1.0,
        "kPa": 1e3,
        "MPa": 1e6,
        "bar": 1e5,
        "mbar": 1e2,
        "psi": PA_PER_PSI,
        "m": PA_PER_METRE_OF_WATER,
        "ftH2O": 0.3048 * PA_PER_METRE_OF_WATER,
    },
    "flow": {
        "m3/s": 1.0,
        "l/s": 1e-3,
        "m3/h": 1.0 / 3600.0,
        "l/min": 1e-3 / 60.0,
        "m3/d": 1.0 / 86400.0,
        "ML/d": 1000.0 / 86400.0,
    },
    "pump_status": {"on/off": 1.0, "%": 0.01},
    "valve_position": {"fraction": 1.0, "%": 0.01},
}
"""Canonical spelling -> factor to SI (Pa, m^3/s, fraction 0..1), per quantity."""

_SI_UNITS = {"pressure": "Pa", "flow": "m^3/s", "pump_status": "-", "valve_position": "-"}

# Alternative spellings, keyed by the normalised form (see _normalise).
_ALIASES: Mapping[str, Mapping[str, str]] = {
    "pressure": {
        "pa": "Pa", "pag": "Pa",
        "kpa": "kPa", "kpag": "kPa", "kpa(g)": "kPa", "kpagauge": "kPa",
        "mpa": "MPa", "mpag": "MPa", "mpa(g)": "MPa",
        "bar": "bar", "barg": "bar", "bar(g)": "bar",
        "mbar": "mbar", "mbarg": "mbar", "hpa": "mbar",
        "psi": "psi", "psig": "psi", "psi(g)": "psi", "lbf/in2": "psi", "lb/in2": "psi",
        "m": "m", "mh2o": "m", "mwc": "m", "mwg": "m", "mhd": "m", "mofwater": "m",
        "m.w.c.": "m", "mw.c.": "m", "mwater": "m",
        "fth2o": "ftH2O", "ftwc": "ftH2O", "ftofwater": "ftH2O",
    },
    "flow": {
        "m3/s": "m3/s", "cumecs": "m3/s", "l/s": "l/s", "lps": "l/s",
        "m3/h": "m3/h", "m3/hr": "m3/h", "l/min": "l/min", "lpm": "l/min",
        "m3/d": "m3/d", "m3/day": "m3/d", "ml/d": "ML/d", "mld": "ML/d",
    },
    "pump_status": {
        "on/off": "on/off", "0/1": "on/off", "-": "on/off", "1": "on/off",
        "bool": "on/off", "status": "on/off", "%": "%", "percent": "%",
    },
    "valve_position": {
        "fraction": "fraction", "0..1": "fraction", "0-1": "fraction", "-": "fraction",
        "1": "fraction", "%": "%", "percent": "%", "%open": "%",
    },
}

_ABSOLUTE = re.compile(r"^(k?pa|mpa|m?bar|psi)(a|\(a\)|abs|absolute)$")


def _normalise(unit: str) -> str:
    text = unit.strip().replace("³", "3").replace("^3", "3").replace("₂", "2")
    return re.sub(r"\s+", "", text).lower()


def _check_quantity(quantity: str) -> None:
    if quantity not in UNIT_FACTORS:
        raise ValueError(f"unknown quantity {quantity!r}; expected one of {QUANTITIES}")


def recognise_unit(unit: str, quantity: str = "pressure") -> str | None:
    """The canonical spelling of ``unit`` for ``quantity``, or ``None`` if not recognised.

    Absolute-pressure spellings and ``mPa`` raise ``ValueError`` (see the module notes);
    anything else unknown returns ``None``.

    >>> recognise_unit(" KPA "), recognise_unit("mH2O"), recognise_unit("furlong")
    ('kPa', 'm', None)
    """
    _check_quantity(quantity)
    if not isinstance(unit, str):
        raise ValueError(f"unit must be a string such as 'kPa', got {unit!r}")
    key = _normalise(unit)
    if quantity == "pressure":
        if unit.strip() == "mPa":
            raise ValueError(
                "unit 'mPa' means millipascal; write 'MPa' for megapascal or 'kPa' for kilopascal"
            )
        if _ABSOLUTE.match(key):
            raise ValueError(
                f"unit {unit!r} is an absolute pressure; surgesift works in gauge pressure: "
                "export gauge values (e.g. 'kPa' or 'barg') from the logger"
            )
    return _ALIASES[quantity].get(key)


def canonical_unit(unit: str, quantity: str = "pressure") -> str:
    """The canonical spelling of ``unit``; ``ValueError`` listing the known ones otherwise.

    >>> canonical_unit("psig"), canonical_unit("L/S", "flow")
    ('psi', 'l/s')
    """
    found = recognise_unit(unit, quantity)
    if found is None:
        known = ", ".join(UNIT_FACTORS[quantity])
        raise ValueError(f"unknown {quantity} unit {unit!r}; expected one of: {known}")
    return found


def si_factor(unit: str, quantity: str = "pressure") -> float:
    """Factor that turns a value in ``unit`` into SI (Pa, m^3/s, or a fraction 0..1).

    Parameters
    ----------
    unit : str
        Any recognised spelling (see the module table).
    quantity : str
        ``"pressure"``, ``"flow"``, ``"pump_status"`` or ``"valve_position"``.

    Returns
    -------
    float
        SI value per unit value [Pa], [m^3/s] or [-].

    Notes
    -----
    Metres of water: p = rho_n g_n h with rho_n = 1000 kg/m^3, g_n = 9.80665 m/s^2.
    psi: 1 lbf/in^2 = 0.45359237 kg * g_n / (0.0254 m)^2.

    References
    ----------
    NIST Special Publication 811 (2008), Appendix B; see the module references.
    """
    canonical = canonical_unit(unit, quantity)
    return UNIT_FACTORS[quantity][canonical]


def si_unit(quantity: str) -> str:
    """The SI unit values of ``quantity`` are held in: ``'Pa'``, ``'m^3/s'`` or ``'-'``."""
    _check_quantity(quantity)
    return _SI_UNITS[quantity]


def to_si(values, unit: str, quantity: str = "pressure") -> np.ndarray:
    """Values in ``unit`` converted to SI as float64 (NaN stays NaN).

    >>> float(to_si(1.0, "bar")[()])
    100000.0
    """
    return np.asarray(values, dtype=np.float64) * si_factor(unit, quantity)


def from_si(values, unit: str, quantity: str = "pressure") -> np.ndarray:
    """SI values converted to ``unit`` (the inverse of :func:`to_si`).

    >>> float(from_si(9806.65, "m")[()])
    1.0
    """
    return np.asarray(values, dtype=np.float64) / si_factor(unit, quantity)


def same_unit(unit_a: str, unit_b: str, quantity: str = "pressure") -> bool:
    """True when two spellings mean the same unit (``'kPa'`` and ``'kpag'``)."""
    return canonical_unit(unit_a, quantity) == canonical_unit(unit_b, quantity)


def valid_si_range(quantity: str) -> tuple[float, float]:
    """Physically meaningful range of SI values of ``quantity`` [Pa], [m^3/s] or [-].

    Gauge pressure cannot fall below a full vacuum (about -101.3 kPa at sea level); the
    fractions of pump status and valve position lie in 0..1; flow is unbounded.
    """
    _check_quantity(quantity)
    if quantity in ("pump_status", "valve_position"):
        return (0.0, 1.0)
    if quantity == "pressure":
        return (-101_325.0, np.inf)
    return (-np.inf, np.inf)
