"""Typed schema of the configuration files (pydantic models).

``config/service.toml`` maps onto :class:`ServiceSettings`, each ``config/systems/*.toml`` onto
:class:`SystemConfig`. Field names are the TOML keys; units are in the names. Unknown keys are
errors (``extra="forbid"``) so that a typo is caught on load, not silently ignored.
Cross-references (a pipe's nodes, a sensor's pipe) are checked in ``service.config``.
"""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

__all__ = [
    "ServiceSettings",
    "SystemConfig",
    "NodeConfig",
    "PipeConfig",
    "SensorConfig",
    "AssetConfig",
    "ScenarioConfig",
    "PumpConfig",
    "ValveConfig",
    "DetectionSettings",
    "WaveSpeedSettings",
    "ComparisonSettings",
]

PRESSURE_UNITS = ("kPa", "bar", "psi", "MPa", "m")
FLOW_UNITS = ("m3/s", "l/s", "m3/h")
STATE_UNITS = ("1", "%")
NodeKind = Literal["reservoir", "pump_station", "valve", "junction", "dead_end", "air_vessel",
                   "air_valve"]
Quantity = Literal["pressure", "flow", "pump_status", "valve_position"]
ScenarioKind = Literal["pump_trip", "pump_start", "valve_closure", "valve_opening", "burst"]


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True)


# --------------------------------------------------------------------------------------------
# service.toml
# --------------------------------------------------------------------------------------------
class InboxSettings(_Strict):
    path: str = "sample_logs"
    patterns: tuple[str, ...] = ("*.csv", "*.csv.gz", "*.txt", "*.txt.gz", "*.tsv", "*.tsv.gz", "*.parquet", "*.pq")


class FindingsSettings(_Strict):
    database_url: str = "sqlite:///surgesift.sqlite"


class ScheduleSettings(_Strict):
    cron: str = "30 2 * * *"
    timezone: str = "UTC"
    misfire_grace_time_s: float = Field(3600.0, gt=0)


class DetectionSettings(BaseModel):
    """Thresholds of the event detector, in the units their names carry.

    The keys below are the common ones; any other parameter of the detector may be given too
    (``service.params`` maps and checks them).
    """

    model_config = ConfigDict(extra="allow", frozen=True)

    min_amplitude_kpa: float = Field(20.0, gt=0)
    min_rate_kpa_s: float = Field(50.0, gt=0)
    noise_multiple: float = Field(8.0, gt=0)
    wave_speed_min_m_s: float = Field(200.0, gt=0)
    wave_speed_max_m_s: float = Field(1600.0, gt=0)
    severity_margin_percent: float = Field(10.0, ge=0)
    window_margin_s: float = Field(120.0, ge=0)
    window_max_s: float = Field(6 * 3600.0, gt=0)


class WaveSpeedSettings(_Strict):
    floor_m_s: float = Field(250.0, gt=0)
    agreement_k_sigma: float = Field(3.0, gt=0)
    max_relative_uncertainty: float = Field(0.1, gt=0)
    calibration_window_days: float = Field(180.0, gt=0)
    min_estimates: int = Field(3, ge=1)
    drift_k_sigma: float = Field(3.0, gt=0)
    drift_percent: float = Field(5.0, gt=0)
    bootstrap_replicates: int = Field(40, ge=10)
    min_snr_db: float = 10.0
    min_correlation: float = Field(0.5, ge=-1, le=1)
    # |reflection coefficient| from which a reflection reaching a sensor before its front's
    # steepest slope refuses the pair's correlation estimate (detectors.reflections)
    reflection_min_fraction: float = Field(0.3, ge=0, le=1)


class ComparisonSettings(_Strict):
    enabled: bool = True
    peak_tolerance_percent: float = Field(10.0, gt=0)
    repeated_trip_count: int = Field(3, ge=2)
    repeated_trip_period_h: float = Field(24.0, gt=0)
    pre_event_s: float = Field(2.0, gt=0)
    window_s: float = Field(60.0, gt=0)
    max_rms_percent: float = Field(15.0, gt=0)
    calibration_reaches: int = Field(48, ge=4)
    envelope: bool = True
    max_model_runs: int = Field(120, ge=10)
    min_samples_per_travel: float = Field(10.0, gt=0)
    envelope_floor_kpa: float = Field(5.0, ge=0)
    #: model steps per sample of the driving logger in the final, compared run
    model_steps_per_sample: int = Field(4, ge=1, le=32)


class ArchiveSettings(_Strict):
    path: str = "archive"


class ReportSettings(_Strict):
    folder: str = "reports"


class ServiceSettings(_Strict):
    inbox: InboxSettings = InboxSettings()
    findings: FindingsSettings = FindingsSettings()
    schedule: ScheduleSettings = ScheduleSettings()
    detection: DetectionSettings = DetectionSettings()
    wavespeed: WaveSpeedSettings = WaveSpeedSettings()
    comparison: ComparisonSettings = ComparisonSettings()
    archive: ArchiveSettings = ArchiveSettings()
    report: ReportSettings = ReportSettings()


# --------------------------------------------------------------------------------------------
# systems/*.toml
# --------------------------------------------------------------------------------------------
class PumpConfig(_Strict):
    """One pump set of a pump station (identical sets run in parallel)."""

    rated_flow_m3_s: float = Field(gt=0)
    rated_head_m: float = Field(gt=0)
    shutoff_head_m: float | None = Field(None, gt=0)
    rated_speed_rpm: float = Field(1480.0, gt=0)
    rated_efficiency: float = Field(0.8, gt=0, le=1)
    inertia_kg_m2: float = Field(gt=0)
    count: int = Field(1, ge=1)
    running: bool = True
    check_valve: bool = True


class ValveConfig(_Strict):
    """A valve node's hydraulic data."""

    effective_area_m2: float = Field(gt=0)
    initial_opening: float = Field(1.0, ge=0, le=1)
    discharge: Literal["inline", "atmosphere", "reservoir"] = "inline"
    downstream_head_m: float | None = None
    stroke_time_s: float = Field(30.0, gt=0)
    closure_exponent: float = Field(1.0, gt=0)


class VesselConfig(_Strict):
    """A surge vessel's (air chamber's) data."""

    gas_volume_m3: float = Field(gt=0)
    vessel_volume_m3: float = Field(gt=0)
    liquid_level_m: float | None = None
    polytropic_exponent: float = Field(1.2, ge=1.0, le=1.4)
    inflow_loss_s2_m5: float = Field(0.0, ge=0)
    outflow_loss_s2_m5: float = Field(0.0, ge=0)

    @model_validator(mode="after")
    def _some_liquid(self) -> "VesselConfig":
        if self.gas_volume_m3 >= self.vessel_volume_m3:
            raise ValueError("gas_volume_m3 must be below vessel_volume_m3 (the vessel holds "
                             "some water in the steady state)")
        return self


class AirValveConfig(_Strict):
    """An air inlet and release valve's orifices (discharge coefficient times area)."""

    inlet_area_m2: float = Field(gt=0)
    outlet_area_m2: float = Field(gt=0)


class NodeConfig(_Strict):
    id: str = Field(min_length=1)
    kind: NodeKind
    elevation_m: float = 0.0
    name: str | None = None
    head_m: float | None = None  # reservoir: water level head
    suction_head_m: float | None = None  # pump station: suction reservoir head
    pump: PumpConfig | None = None
    valve: ValveConfig | None = None
    vessel: VesselConfig | None = None
    air_valve: AirValveConfig | None = None
    local_loss_coefficient: float = Field(0.0, ge=0)

    @model_validator(mode="after")
    def _kind_specific(self) -> "NodeConfig":
        if self.kind == "reservoir" and self.head_m is None:
            raise ValueError("a reservoir node needs head_m (water level as head [m])")
        if self.kind == "pump_station":
            if self.pump is None:
                raise ValueError("a pump_station node needs a [nodes.pump] table")
            if self.suction_head_m is None:
                raise ValueError("a pump_station node needs suction_head_m [m]")
        if self.kind == "valve" and self.valve is None:
            raise ValueError("a valve node needs a [nodes.valve] table")
        if self.kind == "air_vessel" and self.vessel is None:
            raise ValueError("an air_vessel node needs a [nodes.vessel] table (gas_volume_m3, "
                             "vessel_volume_m3)")
        if self.kind == "air_valve" and self.air_valve is None:
            raise ValueError("an air_valve node needs a [nodes.air_valve] table (inlet_area_m2, "
                             "outlet_area_m2)")
        if self.kind != "junction" and self.local_loss_coefficient > 0:
            raise ValueError("local_loss_coefficient is the loss of a junction's pipe connections; "
                             f"a {self.kind} node does not take it (remove it, or model the loss "
                             "as a junction next to this node)")
        return self


class PipeConfig(_Strict):
    id: str = Field(min_length=1)
    from_node: str
    to_node: str
    length_m: float = Field(gt=0)
    diameter_m: float = Field(gt=0)
    wall_thickness_m: float = Field(gt=0)
    material: str | None = None
    youngs_modulus_pa: float | None = Field(None, gt=0)
    poisson_ratio: float | None = Field(None, ge=0, lt=0.5)
    restraint: Literal["fully_anchored", "upstream_anchored", "expansion_joints"] = "fully_anchored"
    roughness_m: float = Field(1e-4, ge=0)
    friction_factor: float | None = Field(None, gt=0, lt=0.2)
    wave_speed_m_s: float | None = Field(None, gt=0)
    allowable_pressure_kpa: float
    minimum_pressure_kpa: float = -10.0
    name: str | None = None

    @model_validator(mode="after")
    def _material_or_moduli(self) -> "PipeConfig":
        if self.material is None and (self.youngs_modulus_pa is None or self.poisson_ratio is None):
            raise ValueError("give material, or both youngs_modulus_pa and poisson_ratio")
        if self.minimum_pressure_kpa >= self.allowable_pressure_kpa:
            raise ValueError("minimum_pressure_kpa must be below allowable_pressure_kpa")
        return self


class SensorConfig(_Strict):
    id: str = Field(min_length=1)
    pipe: str
    offset_m: float = Field(ge=0)
    elevation_m: float = 0.0
    quantity: Quantity = "pressure"
    unit: str = "kPa"
    timezone: str = "UTC"
    clock_synchronised: bool = True
    asset: str | None = None
    range_max: float | None = Field(None, gt=0)
    logger: str | None = None

    @model_validator(mode="after")
    def _unit_fits_quantity(self) -> "SensorConfig":
        allowed = {
            "pressure": PRESSURE_UNITS,
            "flow": FLOW_UNITS,
            "pump_status": STATE_UNITS,
            "valve_position": STATE_UNITS,
        }[self.quantity]
        if self.unit not in allowed:
            raise ValueError(
                f"unit {self.unit!r} does not fit quantity {self.quantity!r}; use one of {allowed}"
            )
        if self.quantity in ("pump_status", "valve_position") and self.asset is None:
            raise ValueError(f"a {self.quantity} channel needs asset = the node id it reports on")
        return self


class AssetConfig(_Strict):
    id: str = Field(min_length=1)
    kind: str
    node: str | None = None
    pipe: str | None = None
    description: str = ""


class ScenarioConfig(_Strict):
    """A design scenario the MOC model can run (``surgesift simulate``)."""

    name: str = Field(min_length=1)
    kind: ScenarioKind
    node: str | None = None
    start_s: float = Field(2.0, ge=0)
    duration_s: float = Field(120.0, gt=0)
    stroke_time_s: float | None = Field(None, gt=0)
    closure_exponent: float | None = Field(None, gt=0)
    pipe: str | None = None
    offset_m: float | None = Field(None, ge=0)
    effective_area_m2: float | None = Field(None, gt=0)
    opening_time_s: float = Field(0.05, gt=0)
    design: bool = True
    description: str = ""

    @model_validator(mode="after")
    def _targets(self) -> "ScenarioConfig":
        if self.kind == "burst":
            if self.pipe is None or self.offset_m is None or self.effective_area_m2 is None:
                raise ValueError("a burst scenario needs pipe, offset_m and effective_area_m2")
        elif self.node is None:
            raise ValueError(f"a {self.kind} scenario needs node = the pump station or valve id")
        return self


class SystemConfig(_Strict):
    id: str = Field(min_length=1, pattern=r"^[A-Za-z0-9_.-]+$")
    name: str = ""
    operator: str = ""
    water_temperature_c: float = Field(12.0, ge=0, le=40)
    time_step_s: float | None = Field(None, gt=0)
    nodes: tuple[NodeConfig, ...] = Field(min_length=2)
    pipes: tuple[PipeConfig, ...] = Field(min_length=1)
    sensors: tuple[SensorConfig, ...] = Field(min_length=1)
    assets: tuple[AssetConfig, ...] = ()
    scenarios: tuple[ScenarioConfig, ...] = ()

    def node(self, node_id: str) -> NodeConfig:
        return next(n for n in self.nodes if n.id == node_id)

    def pipe(self, pipe_id: str) -> PipeConfig:
        return next(p for p in self.pipes if p.id == pipe_id)

    def sensor(self, sensor_id: str) -> SensorConfig:
        return next(s for s in self.sensors if s.id == sensor_id)

    def scenario(self, name: str) -> ScenarioConfig:
        for s in self.scenarios:
            if s.name == name:
                return s
        known = ", ".join(s.name for s in self.scenarios) or "none configured"
        raise KeyError(f"system {self.id!r} has no scenario {name!r} (known: {known})")
