"""Water properties and Korteweg wave speed (models.properties).

Water correlations are checked against IAPWS-95 as implemented by the ``iapws`` package
(Wagner & Pruss, J. Phys. Chem. Ref. Data 31(2), 2002) [R]. Korteweg values are checked
against the formula of Wylie & Streeter, "Fluid Transients in Systems", 1993, sec. 2.2, written
out by hand below with textbook moduli (from memory).
"""

import math

import numpy as np
import pytest
from iapws import IAPWS95
from numpy.testing import assert_allclose

from models.properties import (
    PIPE_MATERIALS,
    bulk_modulus_pa,
    korteweg_wave_speed_m_s,
    pipe_material,
    restraint_factor,
    speed_of_sound_m_s,
    theoretical_wave_speed,
    vapour_pressure_pa,
    water_density_kg_m3,
)

TEMPERATURES_C = (1.0, 4.0, 10.0, 12.0, 20.0, 30.0, 40.0, 60.0, 80.0, 95.0)
ATMOSPHERIC_MPA = 0.101325


def _iapws_liquid(temperature_c):
    return IAPWS95(T=273.15 + temperature_c, P=ATMOSPHERIC_MPA)


class TestWaterAgainstIapws:
    @pytest.mark.parametrize("temperature_c", TEMPERATURES_C)
    def test_density(self, temperature_c):
        # Kell (1975) against IAPWS-95 [R]; Kell's fit is on IPTS-68, hence 0.015 kg/m3.
        assert_allclose(water_density_kg_m3(temperature_c), _iapws_liquid(temperature_c).rho,
                        atol=0.015)

    @pytest.mark.parametrize("temperature_c", TEMPERATURES_C)
    def test_speed_of_sound(self, temperature_c):
        # Marczak (1997) against IAPWS-95 [R]; Marczak states ~0.02 m/s, 0.1 m/s allowed.
        assert_allclose(speed_of_sound_m_s(temperature_c), _iapws_liquid(temperature_c).w,
                        atol=0.1)

    @pytest.mark.parametrize("temperature_c", TEMPERATURES_C)
    def test_isentropic_bulk_modulus(self, temperature_c):
        # iapws gives the isentropic compressibility ks in 1/MPa [R].
        expected_pa = 1e6 / _iapws_liquid(temperature_c).ks
        assert_allclose(bulk_modulus_pa(temperature_c), expected_pa, rtol=2e-4)

    @pytest.mark.parametrize("temperature_c", (1.0, 10.0, 20.0, 50.0, 95.0, 150.0, 300.0))
    def test_vapour_pressure(self, temperature_c):
        # Wagner & Pruss (1993) against IAPWS-95 saturation [R].
        saturated = IAPWS95(T=273.15 + temperature_c, x=0.0)
        assert_allclose(vapour_pressure_pa(temperature_c), saturated.P * 1e6, rtol=2e-4)

    def test_published_check_values(self):
        # REFERENCES.md, IAPWS-95 at 0.101325 MPa via iapws [R].
        assert_allclose(speed_of_sound_m_s(10.0), 1447.27, atol=0.05)
        assert_allclose(speed_of_sound_m_s(20.0), 1482.35, atol=0.05)
        assert_allclose(speed_of_sound_m_s(30.0), 1509.15, atol=0.05)
        assert_allclose(water_density_kg_m3(10.0), 999.70, atol=0.01)
        assert_allclose(water_density_kg_m3(20.0), 998.21, atol=0.01)
        assert_allclose(vapour_pressure_pa(10.0), 1228.2, rtol=1e-3)
        assert_allclose(vapour_pressure_pa(20.0), 2339.3, rtol=1e-3)

    @pytest.mark.parametrize("bad", (-5.0, 120.0, float("nan")))
    def test_out_of_range_temperature(self, bad):
        with pytest.raises(ValueError, match="outside 0 to 95 C"):
            speed_of_sound_m_s(bad)


def _korteweg_by_hand(k_pa, rho, d_m, e_m, youngs_pa, c1):
    # a = sqrt((K/rho) / (1 + c1 K D / (E e))), Wylie & Streeter 1993 sec. 2.2 [M]
    return math.sqrt((k_pa / rho) / (1.0 + c1 * k_pa * d_m / (youngs_pa * e_m)))


class TestKorteweg:
    # Water at 20 C: K = 2.19 GPa, rho = 998.2 kg/m3 (common practice round values).
    WATER = {"bulk_modulus_pa": 2.19e9, "density_kg_m3": 998.2}

    @pytest.mark.parametrize(
        "youngs_pa, nu, d_m, e_m",
        [
            (207e9, 0.30, 0.60, 0.008),  # steel, W&S table 2.1 (from memory)
            (169e9, 0.28, 0.45, 0.009),  # ductile iron (from memory)
            (3.0e9, 0.45, 0.20, 0.0096),  # PVC-U, D/e = 20.8 (from memory)
        ],
        ids=["steel", "ductile_iron", "pvc"],
    )
    @pytest.mark.parametrize("restraint", ["upstream_anchored", "fully_anchored",
                                           "expansion_joints"])
    def test_thin_and_thick_against_the_formula(self, youngs_pa, nu, d_m, e_m, restraint):
        x = {"upstream_anchored": 1 - nu / 2, "fully_anchored": 1 - nu**2,
             "expansion_joints": 1.0}[restraint]
        thin = _korteweg_by_hand(2.19e9, 998.2, d_m, e_m, youngs_pa, x)
        thick_c1 = (2 * e_m / d_m) * (1 + nu) + d_m * x / (d_m + e_m)
        thick = _korteweg_by_hand(2.19e9, 998.2, d_m, e_m, youngs_pa, thick_c1)
        common = dict(self.WATER, diameter_m=d_m, wall_thickness_m=e_m,
                      youngs_modulus_pa=youngs_pa, poisson_ratio=nu, restraint=restraint)
        assert_allclose(korteweg_wave_speed_m_s(**common, wall="thin"), thin, rtol=1e-12)
        assert_allclose(korteweg_wave_speed_m_s(**common, wall="thick"), thick, rtol=1e-12)

    def test_typical_magnitudes(self):
        # Common practice: steel and ductile iron mains ~1000-1300 m/s, PVC ~300-500 m/s.
        steel = theoretical_wave_speed(material="steel", diameter_m=0.6, wall_thickness_m=0.008,
                                       temperature_c=20.0)
        pvc = theoretical_wave_speed(material="pvc", diameter_m=0.2, wall_thickness_m=0.0096,
                                     temperature_c=20.0)
        assert 1000.0 < steel.wave_speed_m_s < 1300.0
        assert 300.0 < pvc.wave_speed_m_s < 500.0
        assert pvc.wall == "thick" and steel.wall == "thin"
        assert pvc.low_m_s < pvc.wave_speed_m_s < pvc.high_m_s

    def test_rigid_limit_is_speed_of_sound(self):
        # Analytical: E -> inf gives sqrt(K/rho) = speed of sound (Wylie & Streeter 1993).
        rigid = korteweg_wave_speed_m_s(
            bulk_modulus_pa=bulk_modulus_pa(20.0), density_kg_m3=water_density_kg_m3(20.0),
            diameter_m=0.5, wall_thickness_m=0.01, youngs_modulus_pa=1e30, poisson_ratio=0.3)
        assert_allclose(rigid, 1482.3, atol=0.1)  # REFERENCES.md rigid limit at 20 C [R]

    def test_thick_factor_tends_to_thin(self):
        # Analytical limit e/D -> 0.
        for restraint in ("upstream_anchored", "fully_anchored", "expansion_joints"):
            thin = restraint_factor(0.3, restraint)
            thick = restraint_factor(0.3, restraint, diameter_m=1.0, wall_thickness_m=1e-7,
                                     wall="thick")
            assert_allclose(thick, thin, rtol=1e-6)

    def test_restraint_ordering(self):
        # Analytical: for 0 < nu < 0.5, c1 = 1 > 1 - nu^2 > 1 - nu/2; smaller c1, faster wave.
        speeds = [
            korteweg_wave_speed_m_s(**self.WATER, diameter_m=0.3, wall_thickness_m=0.006,
                                    youngs_modulus_pa=169e9, poisson_ratio=0.28, restraint=r)
            for r in ("expansion_joints", "fully_anchored", "upstream_anchored")
        ]
        assert np.all(np.diff(speeds) > 0)


class TestMaterialsAndErrors:
    def test_table_has_the_named_materials(self):
        for name in ("steel", "ductile_iron", "pvc", "hdpe", "concrete", "copper", "grp"):
            entry = pipe_material(name)
            low, high = entry.youngs_modulus_range_pa
            assert low <= entry.youngs_modulus_pa <= high
            assert 0.0 < entry.poisson_ratio < 0.5
            assert "memory" in entry.note
        assert len(PIPE_MATERIALS) >= 7

    def test_unknown_material_names_the_known_ones(self):
        with pytest.raises(ValueError, match="unknown pipe material 'unobtainium'.*steel"):
            pipe_material("unobtainium")

    def test_explicit_moduli_override(self):
        result = theoretical_wave_speed(youngs_modulus_pa=169e9, poisson_ratio=0.28,
                                        diameter_m=0.45, wall_thickness_m=0.009,
                                        temperature_c=12.0)
        assert result.low_m_s == result.wave_speed_m_s == result.high_m_s
        assert result.material == "custom"

    @pytest.mark.parametrize(
        "kwargs, match",
        [
            ({"diameter_m": 0.0}, "diameter_m=0.0 must be > 0"),
            ({"wall_thickness_m": 0.3}, "below half the diameter"),
            ({"youngs_modulus_pa": -1.0}, "youngs_modulus_pa"),
            ({"poisson_ratio": 0.7}, "poisson_ratio=0.7"),
            ({"restraint": "bolted"}, "unknown restraint 'bolted'"),
            ({"wall": "medium"}, "unknown wall model 'medium'"),
        ],
    )
    def test_bad_input(self, kwargs, match):
        args = dict(bulk_modulus_pa=2.19e9, density_kg_m3=998.2, diameter_m=0.5,
                    wall_thickness_m=0.01, youngs_modulus_pa=207e9, poisson_ratio=0.3)
        args.update(kwargs)
        with pytest.raises(ValueError, match=match):
            korteweg_wave_speed_m_s(**args)
