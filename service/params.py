"""Turn the ``[detection]`` settings (config units) into the detector's SI parameters.

Every field of :class:`detectors.params.DetectionParams` may be set in ``[detection]`` under its
name with the unit changed to the one people type: ``_pa`` becomes ``_kpa``, ``_pa_s`` becomes
``_kpa_s`` and ``_fraction`` becomes ``_percent``; other names are used as they are.
"""

from __future__ import annotations

import dataclasses

from detectors.params import DetectionParams

from .config_schema import DetectionSettings

__all__ = ["detection_params", "config_key_for", "SERVICE_ONLY_KEYS"]

SERVICE_ONLY_KEYS = {"window_margin_s", "window_max_s"}
_SUFFIXES = (("_pa_s", "_kpa_s", 1e3), ("_pa", "_kpa", 1e3), ("_fraction", "_percent", 1e-2))


def config_key_for(field_name: str) -> tuple[str, float]:
    """The ``[detection]`` key for a parameter field and the factor to SI."""
    for si, typed, factor in _SUFFIXES:
        if field_name.endswith(si):
            return field_name[: -len(si)] + typed, factor
    return field_name, 1.0


def detection_params(settings: DetectionSettings, **overrides) -> DetectionParams:
    """Build the detector parameters from the settings.

    Raises
    ------
    ValueError
        Naming ``detection.<key>`` when a key is unknown or a value is out of range.
    """
    given = settings.model_dump()
    given.update(settings.model_extra or {})
    by_key = {config_key_for(f.name)[0]: f for f in dataclasses.fields(DetectionParams)}
    values = {}
    for key, value in given.items():
        if key in SERVICE_ONLY_KEYS:
            continue
        if key not in by_key:
            known = ", ".join(sorted(set(by_key) | SERVICE_ONLY_KEYS))
            raise ValueError(f"service.toml: detection.{key}: unknown key; known keys: {known}")
        f = by_key[key]
        factor = config_key_for(f.name)[1]
        values[f.name] = type(f.default)(value * factor) if factor != 1.0 else type(f.default)(value)
    values.update(overrides)
    try:
        return DetectionParams(**values)
    except ValueError as exc:
        raise ValueError(f"service.toml: [detection]: {exc}") from exc
