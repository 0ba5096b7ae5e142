"""Load and validate the configuration folder.

Layout of the folder (``--config``, default ``config/``)::

    config/service.toml          service settings (inbox, database, schedule, thresholds)
    config/systems/<id>.toml     one file per monitored system

Everything is validated on load; a :class:`ConfigError` lists every problem found, each naming
the file and the key (``systems/demo.toml: pipes[P2].length_m: ...``) and what is expected.
Relative paths in ``service.toml`` are relative to the config folder's parent (the project
root when the default ``config/`` is used).
"""

from __future__ import annotations

import tomllib
import zoneinfo
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Mapping

from pydantic import ValidationError

from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout

from .config_schema import ServiceSettings, SystemConfig

__all__ = ["ConfigError", "Config", "load_config", "load_system_file", "system_layout"]

KPA = 1000.0


class ConfigError(ValueError):
    """The configuration cannot be used; ``problems`` lists one readable line per problem."""

    def __init__(self, problems: Iterable[str]):
        self.problems = tuple(problems)
        super().__init__("configuration problems:\n  " + "\n  ".join(self.problems))


@dataclass(frozen=True)
class Config:
    """The validated configuration: service settings and systems, with resolved paths."""

    folder: Path
    service: ServiceSettings
    systems: Mapping[str, SystemConfig]
    system_files: Mapping[str, Path] = field(default_factory=dict)

    @property
    def root(self) -> Path:
        """The folder relative paths in ``service.toml`` are resolved against."""
        return self.folder.resolve().parent

    def resolve(self, path: str) -> Path:
        p = Path(path)
        return p if p.is_absolute() else self.root / p

    @property
    def inbox_path(self) -> Path:
        return self.resolve(self.service.inbox.path)

    @property
    def archive_path(self) -> Path:
        return self.resolve(self.service.archive.path)

    @property
    def report_path(self) -> Path:
        return self.resolve(self.service.report.folder)

    @property
    def database_url(self) -> str:
        """Database URL; a relative SQLite file path is made relative to the root."""
        url = self.service.findings.database_url
        prefix = "sqlite:///"
        if url.startswith(prefix) and not url.startswith(prefix + "/") and ":memory:" not in url:
            return prefix + str(self.root / url[len(prefix):])
        return url

    def system(self, system_id: str) -> SystemConfig:
        try:
            return self.systems[system_id]
        except KeyError:
            known = ", ".join(sorted(self.systems)) or "none"
            raise KeyError(f"no system {system_id!r} in the configuration (known: {known})") from None

    def sensor_system(self) -> dict[str, str]:
        """Map every sensor id to its system id."""
        return {s.id: sys.id for sys in self.systems.values() for s in sys.sensors}


# --------------------------------------------------------------------------------------------
def _read_toml(path: Path) -> tuple[dict[str, Any] | None, list[str]]:
    try:
        with path.open("rb") as fh:
            return tomllib.load(fh), []
    except tomllib.TOMLDecodeError as exc:
        return None, [f"{path.name}: not valid TOML: {exc}"]
    except OSError as exc:
        return None, [f"{path}: cannot be read: {exc.strerror}"]


def _location(loc: tuple, data: Any) -> str:
    """Render a pydantic error location with list items named by their ``id`` when present."""
    parts: list[str] = []
    node = data
    for key in loc:
        if isinstance(key, int):
            label = str(key)
            if isinstance(node, list) and key < len(node) and isinstance(node[key], dict):
                ident = node[key].get("id") or node[key].get("name")
                label = f"{key}: {ident}" if ident else label
            parts[-1] = f"{parts[-1]}[{label}]" if parts else f"[{label}]"
            node = node[key] if isinstance(node, list) and key < len(node) else None
        else:
            parts.append(str(key))
            node = node.get(key) if isinstance(node, dict) else None
    return ".".join(parts) or "(top level)"


def _validation_problems(file_label: str, exc: ValidationError, data: Any) -> list[str]:
    problems = []
    for err in exc.errors():
        where = _location(tuple(err["loc"]), data)
        message = err["msg"].removeprefix("Value error, ")
        if err["type"] == "extra_forbidden":
            message = "unknown key (check its spelling against the config reference in README.md)"
        elif err["type"] == "missing":
            message = "required key is missing"
        got = err.get("input")
        suffix = "" if err["type"] in ("missing", "extra_forbidden") or isinstance(got, dict) else f" (got {got!r})"
        problems.append(f"{file_label}: {where}: {message}{suffix}")
    return problems


def _check_zone(label: str, key: str, zone: str) -> list[str]:
    try:
        zoneinfo.ZoneInfo(zone)
        return []
    except (zoneinfo.ZoneInfoNotFoundError, ValueError):
        return [f"{label}: {key}: unknown time zone {zone!r}; use an IANA name like 'Europe/Lisbon' or 'UTC'"]


def _check_cron(label: str, cron: str, zone: str) -> list[str]:
    from apscheduler.triggers.cron import CronTrigger

    if len(cron.split()) != 5:
        return [f"{label}: schedule.cron: expected five fields 'minute hour day month weekday', got {cron!r}"]
    try:
        CronTrigger.from_crontab(cron, timezone=zone)
    except ValueError as exc:
        return [f"{label}: schedule.cron: {exc} (got {cron!r})"]
    return []


def _cross_check_system(label: str, system: SystemConfig) -> list[str]:
    """References between nodes, pipes, sensors, assets and scenarios."""
    problems: list[str] = []
    for kind, items in (("nodes", system.nodes), ("pipes", system.pipes), ("sensors", system.sensors)):
        seen: set[str] = set()
        for item in items:
            if item.id in seen:
                problems.append(f"{label}: {kind}[{item.id}].id: duplicate id {item.id!r}")
            seen.add(item.id)
    node_ids = {n.id for n in system.nodes}
    pipe_by_id = {p.id: p for p in system.pipes}
    for p in system.pipes:
        for key in ("from_node", "to_node"):
            ref = getattr(p, key)
            if ref not in node_ids:
                problems.append(f"{label}: pipes[{p.id}].{key}: no node {ref!r} (nodes: {sorted(node_ids)})")
        if p.from_node == p.to_node:
            problems.append(f"{label}: pipes[{p.id}]: from_node and to_node are the same node")
        if p.material is not None:
            problems += _check_material(label, p.id, p.material)
    for s in system.sensors:
        problems += _check_zone(label, f"sensors[{s.id}].timezone", s.timezone)
        pipe = pipe_by_id.get(s.pipe)
        if pipe is None:
            problems.append(f"{label}: sensors[{s.id}].pipe: no pipe {s.pipe!r} (pipes: {sorted(pipe_by_id)})")
        elif s.offset_m > pipe.length_m:
            problems.append(
                f"{label}: sensors[{s.id}].offset_m: {s.offset_m} m is beyond the end of pipe "
                f"{pipe.id} ({pipe.length_m} m long); offset is measured from its from_node"
            )
        if s.asset is not None and s.asset not in node_ids:
            problems.append(f"{label}: sensors[{s.id}].asset: no node {s.asset!r}")
    for sc in system.scenarios:
        if sc.node is not None and sc.node not in node_ids:
            problems.append(f"{label}: scenarios[{sc.name}].node: no node {sc.node!r}")
        if sc.pipe is not None and sc.pipe not in pipe_by_id:
            problems.append(f"{label}: scenarios[{sc.name}].pipe: no pipe {sc.pipe!r}")
    for a in system.assets:
        if a.node is not None and a.node not in node_ids:
            problems.append(f"{label}: assets[{a.id}].node: no node {a.node!r}")
        if a.pipe is not None and a.pipe not in pipe_by_id:
            problems.append(f"{label}: assets[{a.id}].pipe: no pipe {a.pipe!r}")
    return problems


def _check_material(label: str, pipe_id: str, material: str) -> list[str]:
    try:
        from models.properties import PIPE_MATERIALS
    except ImportError:  # pragma: no cover - the property tables are part of the package
        return []
    if material not in PIPE_MATERIALS:
        return [
            f"{label}: pipes[{pipe_id}].material: unknown material {material!r}; use one of "
            f"{sorted(PIPE_MATERIALS)} or give youngs_modulus_pa and poisson_ratio"
        ]
    return []


def load_system_file(path: Path) -> tuple[SystemConfig | None, list[str]]:
    """Parse and validate one system file; returns the system or the problems found."""
    label = f"systems/{path.name}"
    data, problems = _read_toml(path)
    if data is None:
        return None, problems
    try:
        system = SystemConfig.model_validate(data)
    except ValidationError as exc:
        return None, _validation_problems(label, exc, data)
    return system, _cross_check_system(label, system)


def load_config(folder: Path | str = "config") -> Config:
    """Load ``service.toml`` and every ``systems/*.toml`` below ``folder``.

    Raises
    ------
    ConfigError
        Listing every problem, each naming the file and key.
    """
    folder = Path(folder)
    if not folder.is_dir():
        raise ConfigError([f"{folder}: no such configuration folder (expected service.toml and systems/)"])
    problems: list[str] = []
    service_file = folder / "service.toml"
    settings = ServiceSettings()
    if service_file.exists():
        data, problems = _read_toml(service_file)
        if data is not None:
            try:
                settings = ServiceSettings.model_validate(data)
            except ValidationError as exc:
                problems += _validation_problems("service.toml", exc, data)
    else:
        problems.append(f"{service_file}: missing (copy the one shipped in config/ and edit it)")
    problems += _check_zone("service.toml", "schedule.timezone", settings.schedule.timezone)
    if not problems:
        problems += _check_cron("service.toml", settings.schedule.cron, settings.schedule.timezone)
    systems: dict[str, SystemConfig] = {}
    files: dict[str, Path] = {}
    system_files = sorted((folder / "systems").glob("*.toml"))
    if not system_files:
        problems.append(f"{folder / 'systems'}: no system files (*.toml) found")
    sensor_owner: dict[str, str] = {}
    for path in system_files:
        system, found = load_system_file(path)
        problems += found
        if system is None:
            continue
        if system.id in systems:
            problems.append(f"systems/{path.name}: id: system {system.id!r} is also defined in {files[system.id].name}")
        for s in system.sensors:
            if s.id in sensor_owner and sensor_owner[s.id] != system.id:
                problems.append(
                    f"systems/{path.name}: sensors[{s.id}].id: sensor ids must be unique across "
                    f"systems; {s.id!r} is also in system {sensor_owner[s.id]!r}"
                )
            sensor_owner[s.id] = system.id
        systems[system.id] = system
        files[system.id] = path
    if problems:
        raise ConfigError(problems)
    return Config(folder=folder, service=settings, systems=systems, system_files=files)


# --------------------------------------------------------------------------------------------
def system_layout(system: SystemConfig, wave_speeds_m_s: Mapping[str, float] | None = None) -> SystemLayout:
    """The pure topology of a system, pressures in Pa, with the best wave speed per pipe.

    Wave speed per pipe: ``wave_speeds_m_s`` (the newest calibration) where given, else the
    configured prior, else the theoretical value from the pipe's material and geometry.
    """
    from .pipe_properties import theoretical_wave_speed_m_s

    wave_speeds_m_s = wave_speeds_m_s or {}
    pipes = []
    for p in system.pipes:
        speed = wave_speeds_m_s.get(p.id) or p.wave_speed_m_s or theoretical_wave_speed_m_s(p, system.water_temperature_c)
        pipes.append(
            PipeSite(
                id=p.id,
                from_node=p.from_node,
                to_node=p.to_node,
                length_m=p.length_m,
                diameter_m=p.diameter_m,
                wave_speed_m_s=speed,
                allowable_pressure_pa=p.allowable_pressure_kpa * KPA,
                minimum_pressure_pa=p.minimum_pressure_kpa * KPA,
            )
        )
    from .units import to_si

    sensors = []
    for s in system.sensors:
        range_si = None
        if s.range_max is not None:
            range_si = float(to_si(s.range_max, s.unit))
        sensors.append(
            SensorSite(
                id=s.id,
                pipe_id=s.pipe,
                offset_m=s.offset_m,
                elevation_m=s.elevation_m,
                clock_synchronised=s.clock_synchronised,
                quantity=s.quantity,
                asset_id=s.asset,
                range_max_pa=range_si if s.quantity == "pressure" else None,
            )
        )
    nodes = tuple(NodeSite(n.id, n.kind, n.elevation_m) for n in system.nodes)
    return SystemLayout(system_id=system.id, nodes=nodes, pipes=tuple(pipes), sensors=tuple(sensors))
