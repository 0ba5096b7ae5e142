"""Rebuild the demo uploads in ``sample_logs/`` from the MOC model of the demo system.

    python -m service.demo [--config config] [--out sample_logs] [--seed 20261128]

The night of 2026-11-28 on the Kestrel Hill rising main (an invented system): four
high-rate loggers record at 100 Hz from 01:00 to 03:00 UTC and upload one Parquet file per
hour each; Brookfold pumping station's SCADA exports one semicolon-separated CSV at 1 s in
local time with decimal commas, from a clock that runs a few seconds fast. The events are
simulated with the MOC engine from the system's own configuration:

- 01:12:30 the Thornby flow-control valve closes in 6 s (the branch is reopened slowly,
  over ten minutes, from 01:35);
- 01:59:57 power failure at Brookfold: both pumps trip (the event straddles the hourly files);
- 02:20:00 both pumps are restarted together after the outage (10 s speed ramp);
- 02:41:00 a burst opens on KH-2, 700 m above the junction.

Distractors: sensor noise, a slow demand swing, a single-sample spike on KH1-PT2, a 90 s
gap in TB1-PT4's second file, and one broken upload (a truncated CSV with a ragged row) that
the screening must quarantine. Seeded: the same seed gives the same files.
"""

from __future__ import annotations

import argparse
import gzip
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from models.moc import MocModel
from models.network import Valve, ValveMotion
from models.properties import water_density_kg_m3

from .config import load_config
from .model_builder import build_scenario

__all__ = ["build_demo", "NIGHT"]

NIGHT = pd.Timestamp("2026-11-28T00:00:00Z")
RATE_HZ = 100.0
CAPTURE = (pd.Timedelta(hours=1), pd.Timedelta(hours=3))  # high-rate loggers, UTC
SCADA_SPAN = (pd.Timedelta(hours=0), pd.Timedelta(hours=4))
SCADA_CLOCK_FAST_S = 3.0
G = 9.80665

EVENTS = (  # (scenario, UTC time of the scenario's start_s, seconds simulated)
    ("thornby-valve-closure", pd.Timedelta("01:12:30"), 90.0),
    ("full-pump-trip", pd.Timedelta("01:59:57"), 120.0),
    ("pump-start", pd.Timedelta("02:20:00"), 90.0),
    ("kh2-burst", pd.Timedelta("02:41:00"), 90.0),
)
HIGH_RATE = {"BRK-PT1": "HL-0417", "KH1-PT2": "HL-0422", "KH2-PT3": "HL-0431", "TB1-PT4": "HL-0439"}


def _scenario_heads(system, name: str, duration_s: float) -> tuple[np.ndarray, dict, dict]:
    """Model times [s, from the scenario start], heads per sensor, and SCADA channels."""
    scenario = build_scenario(system, name)
    result = scenario.model.run(duration_s, scenario.probes)
    t = result.times_s - system.scenario(name).start_s
    heads = {p.name: result.probe_heads_m[:, i] for i, p in enumerate(scenario.probes)}
    pump = {"flow": result.pump_flow_m3_s[:, 0], "speed": result.pump_speed_ratio[:, 0]}
    return t, heads, pump


def _valve_closed_network(system):
    """The closure scenario's end state: Thornby valve shut (used for the slow reopening)."""
    scenario = build_scenario(system, "thornby-valve-closure")
    net = scenario.model.network
    valve = net.node("THORNBY_FCV")
    return net.replace(nodes=[replace(valve, motion=ValveMotion.constant(0.0)) if isinstance(n, Valve) else n
                              for n in net.nodes])


class _Timeline:
    """Head per sensor on a regular grid, stitched from scenario runs and slow transitions."""

    def __init__(self, times_s: np.ndarray):
        self.t = times_s
        self.heads: dict[str, np.ndarray] = {}
        self.flow = np.zeros_like(times_s)
        self.run = np.ones_like(times_s)

    def hold(self, sensor: str, level: float, start_s: float, end_s: float) -> None:
        h = self.heads.setdefault(sensor, np.full_like(self.t, np.nan))
        sel = (self.t >= start_s) & (self.t < end_s)
        h[sel] = level

    def ramp(self, sensor: str, a: float, b: float, start_s: float, end_s: float) -> None:
        h = self.heads.setdefault(sensor, np.full_like(self.t, np.nan))
        sel = (self.t >= start_s) & (self.t < end_s)
        x = (self.t[sel] - start_s) / (end_s - start_s)
        h[sel] = a + (b - a) * 0.5 * (1 - np.cos(np.pi * x))  # smooth operational change

    def paste(self, sensor: str, t_model: np.ndarray, head: np.ndarray, offset_s: float) -> None:
        h = self.heads.setdefault(sensor, np.full_like(self.t, np.nan))
        sel = (self.t >= offset_s + t_model[0]) & (self.t <= offset_s + t_model[-1])
        h[sel] = np.interp(self.t[sel] - offset_s, t_model, head)


def _stitch(system, times_s: np.ndarray) -> _Timeline:
    """Quiet periods, transitions and the four simulated events on one time line."""
    line = _Timeline(times_s)
    runs = {}
    for name, at, duration in EVENTS:
        runs[name] = (at.total_seconds(), *_scenario_heads(system, name, duration))
    sensors = list(runs["full-pump-trip"][2])
    closed = build_scenario(system, "thornby-valve-closure")
    closed_model = MocModel(_valve_closed_network(system), closed.model.time_step_s)
    closed_steady = closed_model.run(1.0, closed.probes)
    for sensor in sensors:
        v_at, v_t, v_h, _ = runs["thornby-valve-closure"]
        p_at, p_t, p_h, _ = runs["full-pump-trip"]
        s_at, s_t, s_h, _ = runs["pump-start"]
        b_at, b_t, b_h, _ = runs["kh2-burst"]
        open_level = v_h[sensor][0]
        shut_level = float(closed_steady.probe_heads_m[-1, [p.name for p in closed.probes].index(sensor)])
        line.hold(sensor, open_level, 0.0, v_at + v_t[0])
        line.paste(sensor, v_t, v_h[sensor], v_at)
        line.ramp(sensor, v_h[sensor][-1], shut_level, v_at + v_t[-1], v_at + v_t[-1] + 60.0)
        line.hold(sensor, shut_level, v_at + v_t[-1] + 60.0, 5700.0)
        line.ramp(sensor, shut_level, p_h[sensor][0], 5700.0, 6300.0)  # reopened over 10 min
        line.hold(sensor, p_h[sensor][0], 6300.0, p_at + p_t[0])
        line.paste(sensor, p_t, p_h[sensor], p_at)
        line.ramp(sensor, p_h[sensor][-1], s_h[sensor][0], p_at + p_t[-1], p_at + p_t[-1] + 240.0)
        line.hold(sensor, s_h[sensor][0], p_at + p_t[-1] + 240.0, s_at + s_t[0])
        line.paste(sensor, s_t, s_h[sensor], s_at)
        line.ramp(sensor, s_h[sensor][-1], b_h[sensor][0], s_at + s_t[-1], s_at + s_t[-1] + 300.0)
        line.hold(sensor, b_h[sensor][0], s_at + s_t[-1] + 300.0, b_at + b_t[0])
        line.paste(sensor, b_t, b_h[sensor], b_at)
        line.hold(sensor, b_h[sensor][-1], b_at + b_t[-1], times_s[-1] + 1.0)
    # pump station context: run status and total flow
    trip_at, start_at = runs["full-pump-trip"][0], runs["pump-start"][0]
    line.run[(times_s >= trip_at) & (times_s < start_at)] = 0.0
    _, p_t, _, p_pump = runs["full-pump-trip"]
    _, s_t, _, s_pump = runs["pump-start"]
    q_running = p_pump["flow"][0]
    line.flow[:] = q_running
    line.flow[(times_s >= trip_at)] = np.interp(times_s[times_s >= trip_at] - trip_at, p_t, p_pump["flow"])
    after_start = times_s >= start_at + s_t[0]
    line.flow[after_start] = np.interp(times_s[after_start] - start_at, s_t, s_pump["flow"])
    return line


def _pressure_kpa(head_m: np.ndarray, elevation_m: float, density: float) -> np.ndarray:
    return density * G * (head_m - elevation_m) / 1000.0


def _demand_swing_m(t_s: np.ndarray) -> np.ndarray:
    """A slow demand swing on the whole system: +-0.4 m over about 50 minutes."""
    return 0.4 * np.sin(2 * np.pi * t_s / 3000.0)


def build_demo(config_folder: Path, out: Path, seed: int = 20261128) -> list[Path]:
    """Write the demo uploads; returns the files written."""
    config = load_config(config_folder)
    system = config.system("kestrel-hill")
    rng = np.random.default_rng(seed)
    density = water_density_kg_m3(system.water_temperature_c)
    out.mkdir(parents=True, exist_ok=True)
    for old in out.glob("*"):
        if old.is_file():
            old.unlink()
    written: list[Path] = []
    t_fast = np.arange(CAPTURE[0].total_seconds(), CAPTURE[1].total_seconds(), 1.0 / RATE_HZ)
    line = _stitch(system, t_fast)
    swing = _demand_swing_m(t_fast)
    for sensor, logger in HIGH_RATE.items():
        cfg = system.sensor(sensor)
        kpa = _pressure_kpa(line.heads[sensor] + swing, cfg.elevation_m, density)
        kpa = kpa + rng.normal(0.0, 0.8, kpa.size)
        if sensor == "KH1-PT2":
            kpa[np.searchsorted(t_fast, 5410.0)] += 180.0  # a single-sample spike (electrical)
        if sensor == "TB1-PT4":
            gap = (t_fast >= 7500.0) & (t_fast < 7590.0)
        else:
            gap = np.zeros_like(t_fast, bool)
        values = kpa / 100.0 if cfg.unit == "bar" else kpa
        decimals = 4 if cfg.unit == "bar" else 2
        for hour in (1, 2):
            sel = (t_fast >= hour * 3600.0) & (t_fast < (hour + 1) * 3600.0) & ~gap
            stamp = NIGHT + pd.Timedelta(hours=hour)
            frame = pd.DataFrame({
                "time": NIGHT + pd.to_timedelta(np.round(t_fast[sel] * 1e3).astype(np.int64), unit="ms"),
                f"{sensor} [{cfg.unit}]": np.round(values[sel], decimals).astype(np.float32),
            })
            path = out / f"{logger}_{sensor}_{stamp:%Y%m%dT%H%MZ}.parquet"
            frame.to_parquet(path, index=False, compression="zstd")
            written.append(path)
    written.append(_write_scada(system, out, rng, density, t_fast, line))
    written.append(_write_broken(out))
    return written


def _write_scada(system, out: Path, rng, density: float, fast_t: np.ndarray, line: "_Timeline") -> Path:
    t = np.arange(SCADA_SPAN[0].total_seconds(), SCADA_SPAN[1].total_seconds(), 1.0)
    inside = (t >= CAPTURE[0].total_seconds()) & (t < CAPTURE[1].total_seconds())
    head = np.interp(t, fast_t, line.heads["BRK-SCADA-P"])
    head[~inside] = line.heads["BRK-SCADA-P"][0]
    cfg = system.sensor("BRK-SCADA-P")
    bar = _pressure_kpa(head + _demand_swing_m(t), cfg.elevation_m, density) / 100.0 + rng.normal(0, 0.01, t.size)
    flow_l_s = np.interp(t, fast_t, line.flow) * 1000.0 + rng.normal(0, 1.5, t.size)
    run = np.interp(t, fast_t, line.run).round()
    flow_l_s[~inside] = line.flow[0] * 1000.0
    run[~inside] = 1.0
    local = (NIGHT + pd.to_timedelta(t + SCADA_CLOCK_FAST_S, unit="s")).tz_convert("Europe/London").tz_localize(None)
    rows = ["Timestamp;BRK-SCADA-P [bar];BRK-SCADA-Q [l/s];BRK-SCADA-RUN"]
    for stamp, p, q, r in zip(local.strftime("%Y-%m-%d %H:%M:%S"), bar, flow_l_s, run):
        rows.append(f"{stamp};{p:.3f};{max(q, 0.0):.1f};{int(r)}".replace(".", ","))
    rows[1 + 4000] = rows[1 + 4000].split(";")[0] + ";ERR;ERR;1"  # a logger error cell: a gap
    path = out / f"brookfold_scada_{NIGHT:%Y%m%d}.csv.gz"
    with gzip.open(path, "wt", encoding="utf-8") as fh:
        fh.write("\n".join(rows) + "\n")
    return path


def _write_broken(out: Path) -> Path:
    """A truncated CSV upload: the logger lost power while writing a line (ragged row)."""
    path = out / "HL-0439_TB1-PT4_20261128T0300Z_partial.csv"
    lines = ["time,TB1-PT4 [kPa]"]
    start = NIGHT + pd.Timedelta(hours=3)
    for k in range(40):
        lines.append(f"{(start + pd.Timedelta(milliseconds=10 * k)).isoformat().replace('+00:00', 'Z')},{340.0 + 0.1 * k:.2f}")
    lines.append(f"{(start + pd.Timedelta(milliseconds=400)).isoformat().replace('+00:00', 'Z')},34")
    lines[-1] += ",0.12,2026-11-28T03:00"
    path.write_text("\n".join(lines) + "\n")
    return path


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Rebuild the demo logger uploads from the MOC model.")
    parser.add_argument("--config", type=Path, default=Path("config"))
    parser.add_argument("--out", type=Path, default=Path("sample_logs"))
    parser.add_argument("--seed", type=int, default=20261128)
    args = parser.parse_args(argv)
    paths = build_demo(args.config, args.out, args.seed)
    total = sum(p.stat().st_size for p in paths)
    for p in paths:
        print(f"{p}  {p.stat().st_size / 1e6:.2f} MB")
    print(f"{len(paths)} files, {total / 1e6:.1f} MB")
    return 0


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
