"""Pipe and water properties for a configured pipe (adapter from config to ``models.properties``)."""

from __future__ import annotations

from models.properties import theoretical_wave_speed, vapour_pressure_pa

from .config_schema import PipeConfig

__all__ = ["theoretical_wave_speed_m_s", "pipe_theoretical", "vapour_gauge_pressure_pa"]

STANDARD_ATMOSPHERE_PA = 101_325.0


def pipe_theoretical(pipe: PipeConfig, water_temperature_c: float):
    """Theoretical wave speed (typical and range) of a configured pipe."""
    return theoretical_wave_speed(
        diameter_m=pipe.diameter_m,
        wall_thickness_m=pipe.wall_thickness_m,
        temperature_c=water_temperature_c,
        material=pipe.material,
        youngs_modulus_pa=pipe.youngs_modulus_pa,
        poisson_ratio=pipe.poisson_ratio,
        restraint=pipe.restraint,
    )


def theoretical_wave_speed_m_s(pipe: PipeConfig, water_temperature_c: float) -> float:
    """Typical theoretical wave speed of a configured pipe [m/s]."""
    return pipe_theoretical(pipe, water_temperature_c).wave_speed_m_s


def vapour_gauge_pressure_pa(water_temperature_c: float, atmosphere_pa: float = STANDARD_ATMOSPHERE_PA) -> float:
    """Vapour pressure as a gauge pressure [Pa] (negative: below atmospheric)."""
    return vapour_pressure_pa(water_temperature_c) - atmosphere_pa
