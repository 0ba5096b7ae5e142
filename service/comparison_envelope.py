"""Design-scenario envelopes at the loggers with an event's calibrated pipe parameters.

Each configured design scenario (``design = true`` in the system file) is run with the
wave speeds, friction factors and unsteady coefficient of the event's calibration, so the
field peaks can be set against the worst case the calibrated model predicts
(:func:`service.comparison_flags.envelope_flags`).
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any, Mapping

import numpy as np

from models.calibrate import CalibrationResult
from models.layout import SystemLayout
from models.moc import MocModel, choose_time_step
from models.moc_results import Probe
from models.network import Network

from .comparison_flags import ScenarioEnvelope

__all__ = ["design_envelopes"]

KPA = 1000.0


def _system_scenarios(system: Any) -> dict:
    """Design scenarios as (network, duration) from the model builder."""
    from .model_builder import scenario_network

    return {sc.name: (scenario_network(system, sc.name), sc.duration_s)
            for sc in getattr(system, "scenarios", ()) if sc.design}


def design_envelopes(system: Any, layout: SystemLayout, network: Network,
                     result: CalibrationResult,
                     scenario_networks: Mapping[str, tuple[Network, float]] | None = None
                     ) -> tuple[ScenarioEnvelope, ...]:
    """Envelope of each configured design scenario with the calibrated parameters."""
    scenarios = scenario_networks if scenario_networks is not None else _system_scenarios(system)
    out = []
    sensors = layout.pressure_sensors()
    for name, (scenario_net, duration_s) in scenarios.items():
        known = {p.id for p in scenario_net.pipes}
        probes = [Probe(s.id, s.pipe_id, s.offset_m) for s in sensors if s.pipe_id in known]
        elevations = np.array([s.elevation_m for s in sensors if s.pipe_id in known])
        pipes = [replace(p, wave_speed_m_s=result.wave_speed_m_s.get(p.id, p.wave_speed_m_s),
                         friction_factor=result.friction_factor.get(p.id, p.friction_factor))
                 for p in scenario_net.pipes]
        calibrated = scenario_net.replace(pipes=pipes)
        shortest = min(p.length_m / p.wave_speed_m_s for p in pipes)
        dt = choose_time_step(calibrated, min(0.01, shortest / 4), 0.01)
        model = MocModel(calibrated, dt, unsteady_friction=result.unsteady_coefficient or None)
        run = model.run(duration_s, probes)
        rho_g = calibrated.fluid.density_kg_m3 * calibrated.fluid.gravity_m_s2
        p = (run.probe_heads_m - elevations) * rho_g
        out.append(ScenarioEnvelope(
            name, {pr.name: float(p[:, j].max()) / KPA for j, pr in enumerate(probes)},
            {pr.name: float(p[:, j].min()) / KPA for j, pr in enumerate(probes)},
            {e.pipe_id: float(e.max_pressure_pa.max()) / KPA for e in run.envelopes},
            {e.pipe_id: float(e.min_pressure_pa.min()) / KPA for e in run.envelopes}))
    return tuple(out)
