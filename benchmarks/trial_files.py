"""Logger uploads of the unseen-system trial: the true night as the loggers would write it.

Each pressure logger samples the noise-free pressure of :mod:`benchmarks.trial_scene` at its
own rate, adds its own white noise and the distractors (a single-sample spike, a gap, a
flat-lined stretch, a 20 s offset step on one sensor, a drifting transducer), and uploads two
files split at its own time (an event can straddle them), in one of these forms:

- ``parquet_utc``: a timezone-aware timestamp column, the unit in the value header (``[bar]``);
- ``csv_semicolon_local``: semicolons and decimal commas, naive wall-clock time in the sensor's
  configured zone, the unit in parentheses;
- ``csv_gz_long_offset``: gzipped long layout (time, sensor, value, quality) with ISO 8601
  offsets, a few ``suspect`` and a run of ``bad`` rows;
- ``parquet_epoch``: epoch seconds, the unit as a suffix (``_MPa``);
- ``csv_comma_utc``: commas, ISO 8601 with ``Z``, a ``Time (UTC)`` header.

The station SCADA writes one semicolon CSV at 1 s with separate date and time columns in local
time, from a clock a couple of seconds off, with a logger error cell. Three broken uploads must
be quarantined: a ragged row, a header unit that disagrees with the configuration, and a file
with no sensor the configuration knows.
"""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pandas as pd

__all__ = ["write_uploads"]

#: Pa per unit, written out here rather than taken from the service (NIST SP 811, 2008:
#: 1 bar = 100 kPa exactly; 1 psi = 0.45359237 kg x 9.80665 m/s2 / (0.0254 m)^2; the
#: conventional metre of water = 1000 kg/m3 x 9.80665 m/s2 x 1 m)
PA_PER_UNIT = {"kPa": 1e3, "bar": 1e5, "MPa": 1e6, "psi": 0.45359237 * 9.80665 / 0.0254**2,
               "m": 1000.0 * 9.80665}
#: m3/s per flow unit (definitions)
M3_S_PER_UNIT = {"m3/s": 1.0, "l/s": 1e-3, "m3/h": 1.0 / 3600.0}


def _in_unit(pa: np.ndarray, unit: str) -> np.ndarray:
    return pa / PA_PER_UNIT[unit]


def _decimals(unit: str) -> int:
    return {"kPa": 2, "bar": 5, "psi": 4, "MPa": 6, "m": 4}[unit]


def _sample(scene, logger, rng) -> tuple[np.ndarray, np.ndarray, dict]:
    """Times [s from capture start] and values [Pa] of one logger, with its distractors."""
    t = np.arange(0.0, scene.capture_s, 1.0 / logger.rate_hz)
    p = scene.pressure_pa(logger.sensor, t) + rng.normal(0.0, logger.noise_kpa * 1e3, t.size)
    keep = np.ones(t.size, bool)
    marks = {}
    f = scene.faults
    if f["spike"][0] == logger.sensor:
        i = int(np.searchsorted(t, f["spike"][1]))
        p[i] += f["spike"][2] * 1e3
    if f["gap"][0] == logger.sensor:
        keep &= ~((t >= f["gap"][1]) & (t < f["gap"][1] + f["gap"][2]))
    if f["flat"][0] == logger.sensor:
        sel = (t >= f["flat"][1]) & (t < f["flat"][1] + f["flat"][2])
        p[sel] = p[np.flatnonzero(sel)[0]]
        marks["flat"] = sel
    if f["step"][0] == logger.sensor:
        sensor, start, length, size_kpa = f["step"]
        p[(t >= start) & (t < start + length)] += size_kpa * 1e3
    return t[keep], p[keep], marks


def _utc(scene, t: np.ndarray) -> pd.DatetimeIndex:
    return scene.night + pd.to_timedelta(np.round(t * 1e6).astype(np.int64), unit="us")


def _write_logger(scene, logger, unit: str, zone: str, folder: Path, rng) -> list[Path]:
    t, p, marks = _sample(scene, logger, rng)
    values = np.round(_in_unit(p, unit), _decimals(unit))
    if "flat" in marks:  # the stuck logger repeats its last reading exactly
        flat_t = (t >= scene.faults["flat"][1]) & (t < scene.faults["flat"][1] + scene.faults["flat"][2])
        values[flat_t] = values[np.flatnonzero(flat_t)[0]]
    paths = []
    for part, sel in enumerate((t < logger.split_s, t >= logger.split_s)):
        stamp = scene.night + pd.Timedelta(seconds=0 if part == 0 else logger.split_s)
        base = folder / f"{logger.sensor}_{stamp:%Y%m%dT%H%M%SZ}"
        times, vals = _utc(scene, t[sel]), values[sel]
        if logger.form == "parquet_utc":
            path = base.with_suffix(".parquet")
            pd.DataFrame({"timestamp": times, f"{logger.sensor} [{unit}]": vals}).to_parquet(path, index=False)
        elif logger.form == "parquet_epoch":
            path = base.with_suffix(".parquet")
            epoch = times.as_unit("ns").asi8 / 1e9
            pd.DataFrame({"epoch": epoch, f"{logger.sensor}_{unit}": vals}).to_parquet(path, index=False)
        elif logger.form == "csv_semicolon_local":
            path = base.with_suffix(".csv")
            local = times.tz_convert(zone).tz_localize(None)
            frame = pd.DataFrame({"Timestamp": local, f"{logger.sensor} ({unit})": vals})
            frame.to_csv(path, sep=";", decimal=",", index=False, date_format="%Y-%m-%d %H:%M:%S.%f")
        elif logger.form == "csv_comma_utc":
            path = base.with_suffix(".csv")
            text = times.strftime("%Y-%m-%dT%H:%M:%S.%fZ")
            pd.DataFrame({"Time (UTC)": text, f"{logger.sensor} [{unit}]": vals}).to_csv(path, index=False)
        elif logger.form == "csv_gz_long_offset":
            path = Path(str(base) + ".csv.gz")
            quality = np.full(vals.size, "good", dtype=object)
            k = np.flatnonzero(sel)
            suspect = rng.choice(vals.size, 30, replace=False)
            quality[suspect] = "suspect"
            if part == 0:  # a run of bad samples in a quiet minute (becomes a gap)
                bad = (t[sel] >= 150.0) & (t[sel] < 150.4)
                quality[bad] = "bad"
            assert k.size == vals.size
            text = times.tz_convert("Etc/GMT-3").strftime("%Y-%m-%dT%H:%M:%S.%f+03:00")
            frame = pd.DataFrame({"time": text, "sensor": logger.sensor, "value": vals, "quality": quality})
            with gzip.open(path, "wt", encoding="utf-8") as fh:
                frame.to_csv(fh, index=False)
        else:  # pragma: no cover
            raise ValueError(logger.form)
        paths.append(path)
    return paths


def _write_scada(scene, folder: Path, rng, units: dict) -> Path:
    sc = scene.scada
    t_stamp = np.arange(-600.0, scene.capture_s + 600.0, 1.0)  # the logger's own clock
    t_true = t_stamp - sc["clock_s"]
    pressure = scene.pressure_pa(sc["pressure"], np.clip(t_true, 0.0, scene.capture_s - 1e-6))
    pressure = pressure + rng.normal(0.0, 1.5e3, t_stamp.size)
    bar = np.round(_in_unit(pressure, units[sc["pressure"]]), 3)
    flow = np.round(_in_unit_flow(sc["flow_m3_s"](t_true) + rng.normal(0, 0.002, t_stamp.size), units[sc["flow"]]), 1)
    flow = np.maximum(flow, 0.0)
    run = sc["running"](t_true).astype(int)
    local = _utc(scene, t_stamp).tz_convert(sc["zone"]).tz_localize(None)
    frame = pd.DataFrame({
        "Date": local.strftime("%Y-%m-%d"), "Time": local.strftime("%H:%M:%S"),
        f"{sc['pressure']} [{units[sc['pressure']]}]": bar,
        f"{sc['flow']} [{units[sc['flow']]}]": flow,
        sc["run"]: run,
    })
    pressure_text = np.char.replace(np.char.mod("%.3f", bar), ".", ",").astype(object)
    pressure_text[900] = "ERR"  # a logger error cell: a gap
    frame[frame.columns[2]] = pressure_text
    path = folder / f"station_scada_{scene.night:%Y%m%d}.csv"
    frame.to_csv(path, sep=";", decimal=",", index=False)
    return path


def _in_unit_flow(q_m3_s: np.ndarray, unit: str) -> np.ndarray:
    return q_m3_s / M3_S_PER_UNIT[unit]


def _write_broken(scene, folder: Path, units: dict) -> dict:
    """Three uploads that must be quarantined; returns path -> what must be wrong."""
    sensors = [lg.sensor for lg in scene.loggers]
    late = scene.night + pd.Timedelta(seconds=scene.capture_s)
    broken = {}
    # 1. a ragged row: the logger lost power while writing a line
    path = folder / f"{sensors[-1]}_{late:%Y%m%dT%H%M%SZ}_partial.csv"
    lines = [f"Time (UTC),{sensors[-1]} [{units[sensors[-1]]}]"]
    for k in range(50):
        lines.append(f"{(late + pd.Timedelta(milliseconds=10 * k)):%Y-%m-%dT%H:%M:%S.%f}Z,{412.0 + 0.1 * k:.2f}")
    lines.append(f"{(late + pd.Timedelta(milliseconds=500)):%Y-%m-%dT%H:%M:%S.%f}Z,41,2.0,7")
    path.write_text("\n".join(lines) + "\n")
    broken[path.name] = ("ragged", 52)
    # 2. a header unit that disagrees with the configured unit
    sensor = sensors[1]
    wrong = "kPa" if units[sensor] != "kPa" else "bar"
    path = folder / f"{sensor}_{late:%Y%m%dT%H%M%SZ}_reexport.csv"
    rows = [f"time;{sensor} [{wrong}]"] + [
        f"{(late + pd.Timedelta(seconds=k)):%Y-%m-%dT%H:%M:%S}Z;{480 + k % 3},5" for k in range(60)]
    path.write_text("\n".join(rows) + "\n")
    broken[path.name] = ("unit", sensor)
    # 3. a logger the configuration does not know
    path = folder / f"OV-9907_{late:%Y%m%dT%H%M%SZ}.csv"
    rows = ["timestamp,QX-PT9 [kPa],QX-PT9_quality"] + [
        f"{(late + pd.Timedelta(seconds=k)):%Y-%m-%dT%H:%M:%S}Z,{300 + k % 5}.5,good" for k in range(60)]
    path.write_text("\n".join(rows) + "\n")
    broken[path.name] = ("unknown", "QX-PT9")
    return broken


def write_uploads(scene, folder: Path, seed: int) -> tuple[list[Path], dict]:
    """Write every upload of the night into ``folder``; returns the good files and the broken
    ones (name -> what is wrong)."""
    rng = np.random.default_rng(seed + 7919)
    folder.mkdir(parents=True, exist_ok=True)
    zones = _zones(scene)
    good = []
    for logger in scene.loggers:
        good += _write_logger(scene, logger, scene.units[logger.sensor], zones[logger.sensor], folder, rng)
    good.append(_write_scada(scene, folder, rng, scene.units))
    return good, _write_broken(scene, folder, scene.units)


def _zones(scene) -> dict:
    import tomllib

    data = tomllib.loads(scene.system_toml)
    return {s["id"]: s.get("timezone", "UTC") for s in data["sensors"]}
