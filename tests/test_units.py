"""Unit spellings and conversions to SI (service.units).

Check values
------------
- NIST Special Publication 811 (A. Thompson, B. N. Taylor, "Guide for the Use of the
  International System of Units (SI)", 2008), Appendix B: 1 psi = 6.894757 E+03 Pa,
  1 bar = 1 E+05 Pa exactly, 1 MPa = 1000 kPa (SI prefix), standard acceleration of gravity
  g_n = 9.80665 m/s^2 exactly, conventional centimetre of water = 98.0665 Pa. These figures
  are quoted from memory (REFERENCES.md tag [M]); the exact definitions of the pound
  (0.45359237 kg) and the inch (0.0254 m) are the 1959 international yard and pound
  agreement, also from memory.
- ``scipy.constants`` (CODATA / NIST values in a general-purpose library) [R].
"""

import math

import numpy as np
import pytest
import scipy.constants
from numpy.testing import assert_allclose

from service import units


class TestPublishedFactors:
    def test_psi_is_6_894757_kpa(self):
        # NIST SP 811 (2008) App. B: psi -> Pa 6.894757 E+03 (rounded to 7 digits; from memory)
        assert_allclose(units.si_factor("psi") / 1e3, 6.894757, rtol=0, atol=5e-7)

    def test_psi_from_exact_definitions(self):
        # lbf/in^2 = 0.45359237 kg * 9.80665 m/s^2 / (0.0254 m)^2 (1959 agreement; from memory)
        assert units.PA_PER_PSI == pytest.approx(0.45359237 * 9.80665 / 0.0254**2, rel=1e-15)

    def test_bar_is_100_kpa_exactly(self):
        # NIST SP 811 (2008) App. B: bar -> Pa 1.0 E+05, exact (from memory)
        assert units.si_factor("bar") == 100_000.0
        assert units.to_si(2.5, "bar")[()] == 250_000.0

    def test_mpa_is_1000_kpa(self):
        # SI prefixes mega = 1e6, kilo = 1e3 (NIST SP 811, 2008, sec. 4.3; from memory)
        assert units.si_factor("MPa") / units.si_factor("kPa") == 1000.0

    def test_standard_gravity(self):
        # NIST SP 811 (2008): g_n = 9.80665 m/s^2 exactly (from memory)
        assert units.STANDARD_GRAVITY_M_S2 == 9.80665

    def test_metre_of_water_is_9_80665_kpa(self):
        # NIST SP 811 (2008) App. B: centimeter of water (conventional) = 98.0665 Pa, so
        # 1 m = 9806.65 Pa = rho_n g_n with rho_n = 1000 kg/m^3 (from memory)
        assert units.si_factor("m") == pytest.approx(9806.65, rel=1e-15)
        assert units.si_factor("mH2O") == units.si_factor("m")

    def test_foot_of_water_conventional(self):
        # analytical: 0.3048 m * 9806.65 Pa/m = 2989.06692 Pa (conventional; from memory)
        assert units.si_factor("ftH2O") == pytest.approx(2989.06692, abs=1e-5)

    def test_agrees_with_scipy_constants(self):
        # scipy.constants [R]: psi, bar and g as a general-purpose reference library
        assert units.si_factor("psi") == pytest.approx(scipy.constants.psi, rel=1e-12)
        assert units.si_factor("bar") == scipy.constants.bar
        assert units.STANDARD_GRAVITY_M_S2 == scipy.constants.g


class TestFlowAndFractions:
    def test_flow_units(self):
        # analytical: 1 l = 1e-3 m^3, 1 h = 3600 s, 1 ML/d = 1000 m^3 / 86400 s (common practice)
        assert units.to_si(250.0, "l/s", "flow")[()] == pytest.approx(0.25)
        assert units.to_si(3600.0, "m3/h", "flow")[()] == pytest.approx(1.0)
        assert units.to_si(86.4, "ML/d", "flow")[()] == pytest.approx(1.0)
        assert units.to_si(60.0, "l/min", "flow")[()] == pytest.approx(1e-3)

    def test_percent_to_fraction(self):
        assert units.to_si(45.0, "%", "valve_position")[()] == pytest.approx(0.45)
        assert units.to_si(1.0, "on/off", "pump_status")[()] == 1.0
        assert units.valid_si_range("valve_position") == (0.0, 1.0)


class TestSpellings:
    @pytest.mark.parametrize("spelling, canonical", [
        ("kPa", "kPa"), (" kpa ", "kPa"), ("KPAG", "kPa"), ("kPa(g)", "kPa"), ("barg", "bar"),
        ("psig", "psi"), ("lbf/in²", None), ("lbf/in2", "psi"), ("m H2O", "m"), ("mwc", "m"),
        ("MPa", "MPa"), ("hPa", "mbar"), ("furlong", None),
    ])
    def test_recognise(self, spelling, canonical):
        assert units.recognise_unit(spelling) == canonical

    def test_flow_spellings(self):
        assert units.canonical_unit("m³/h", "flow") == "m3/h"
        assert units.canonical_unit("L/s", "flow") == "l/s"

    @pytest.mark.parametrize("spelling", ["bara", "psia", "kPa(a)", "kPa abs"])
    def test_absolute_pressure_refused(self, spelling):
        with pytest.raises(ValueError, match="absolute pressure.*gauge"):
            units.recognise_unit(spelling)

    def test_millipascal_refused(self):
        with pytest.raises(ValueError, match="millipascal.*'MPa'"):
            units.canonical_unit("mPa")

    def test_unknown_unit_lists_known(self):
        with pytest.raises(ValueError,
                           match=r"unknown pressure unit 'kp'; expected one of: Pa, kPa"):
            units.canonical_unit("kp")

    def test_unknown_quantity(self):
        with pytest.raises(ValueError, match="unknown quantity 'head'"):
            units.si_factor("m", "head")

    def test_same_unit(self):
        assert units.same_unit("kPa", "kpag")
        assert not units.same_unit("kPa", "bar")


def test_round_trip_keeps_nan():
    values = np.array([1.0, np.nan, -0.5])
    back = units.from_si(units.to_si(values, "psi"), "psi")
    assert_allclose(back, values, rtol=1e-15)
    assert math.isnan(back[1])
