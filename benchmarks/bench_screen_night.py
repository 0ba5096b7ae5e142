"""A night of 100 Hz data from four loggers, inbox to findings, against a plain pyarrow read.

Writes one Parquet file per logger (8 h at 100 Hz, with a few surges) into a temporary
project, then measures side by side in one run:

- the time pyarrow takes to read the same files (``pyarrow.parquet.read_table``);
- the time of a full screening pass: hashing, ingest and validation, archive writes, window
  planning, detection, wave speeds, flags and database writes (the MOC calibration of each
  event is measured on its own by ``bench_calibrate.py`` and is switched off here).

Each round reads the files with pyarrow and then screens them into a fresh project (its own
database and archive, the same inbox), so both figures see the same state of the file cache.
Prints the medians over the rounds, each round's ratio (target: at most 3) and samples per
second. A benchmark, not a test: nothing here gates CI.

    python benchmarks/bench_screen_night.py [--hours 8] [--rounds 3]
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pyarrow.parquet as pq

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.config import load_config  # noqa: E402
from service.screening import ScreeningPass  # noqa: E402

RATE_HZ = 100.0
SENSORS = {"NB-A": 150.0, "NB-B": 1400.0, "NB-C": 2700.0, "NB-D": 3900.0}
LENGTH_M, WAVE_SPEED = 4000.0, 1050.0

SYSTEM = """
id = "bench"
water_temperature_c = 10.0
[[nodes]]
id = "RES"
kind = "reservoir"
head_m = 80.0
[[nodes]]
id = "END"
kind = "valve"
[nodes.valve]
effective_area_m2 = 0.01
discharge = "atmosphere"
[[pipes]]
id = "M"
from_node = "RES"
to_node = "END"
length_m = 4000.0
diameter_m = 0.4
wall_thickness_m = 0.009
material = "ductile_iron"
wave_speed_m_s = 1050.0
allowable_pressure_kpa = 1600.0
"""


def write_config(root: Path, inbox: Path) -> Path:
    """A project folder (config, database, archive) screening ``inbox``; returns its config."""
    (root / "config" / "systems").mkdir(parents=True)
    (root / "config" / "service.toml").write_text(textwrap.dedent(f"""
        [inbox]
        path = "{inbox.as_posix()}"
        [findings]
        database_url = "sqlite:///bench.sqlite"
        [archive]
        path = "archive"
        [comparison]
        enabled = false   # model calibration has its own benchmark (bench_calibrate.py)
    """))
    blocks = "".join(f'\n[[sensors]]\nid = "{s}"\npipe = "M"\noffset_m = {o}\nunit = "kPa"\n' for s, o in SENSORS.items())
    (root / "config" / "systems" / "bench.toml").write_text(SYSTEM + blocks)
    return root / "config"


def write_inbox(inbox: Path, hours: float, seed: int = 7) -> list[Path]:
    """One Parquet file per logger: ``hours`` of 100 Hz data with five surges."""
    inbox.mkdir(parents=True)
    rng = np.random.default_rng(seed)
    n = int(hours * 3600 * RATE_HZ)
    t_s = np.arange(n) / RATE_HZ
    margin_s = min(600.0, hours * 3600 / 4)
    surge_times = np.sort(rng.uniform(margin_s, hours * 3600 - margin_s, 5))
    start = pd.Timestamp("2026-11-20T22:00:00Z")
    paths = []
    for sensor, offset in SENSORS.items():
        values = 600.0 + 5.0 * np.sin(2 * np.pi * t_s / 7200.0) + rng.normal(0, 1.0, n)
        for t0 in surge_times:
            arrival = t0 + (LENGTH_M - offset) / WAVE_SPEED
            i = int(arrival * RATE_HZ)
            k = np.arange(n - i)[: int(120 * RATE_HZ)]
            values[i:i + k.size] += 250.0 * np.exp(-k / (30 * RATE_HZ)) * np.cos(2 * np.pi * k / (4 * LENGTH_M / WAVE_SPEED * RATE_HZ))
        frame = pd.DataFrame({"time": start + pd.to_timedelta(t_s, unit="s"), sensor: values.astype(np.float32)})
        path = inbox / f"{sensor}_night.parquet"
        frame.to_parquet(path, index=False)
        paths.append(path)
    return paths


def make_project(root: Path, hours: float, seed: int = 7) -> list[Path]:
    """A project with its own inbox under ``root``; returns the inbox files."""
    paths = write_inbox(root / "inbox", hours, seed)
    write_config(root, root / "inbox")
    return paths


def one_round(root: Path, inbox: Path, paths: list[Path]) -> tuple[float, float, int, object]:
    """Read the files with pyarrow, then screen them in a fresh project: both times [s]."""
    started = time.perf_counter()
    n_samples = sum(pq.read_table(p).num_rows for p in paths)
    read_s = time.perf_counter() - started
    config = load_config(write_config(root, inbox))
    started = time.perf_counter()
    summary = ScreeningPass(config).run()
    return read_s, time.perf_counter() - started, n_samples, summary


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--hours", type=float, default=8.0)
    parser.add_argument("--rounds", type=int, default=3,
                        help="side-by-side rounds (read, then a fresh pass); the median is shown")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        inbox = root / "inbox"
        paths = write_inbox(inbox, args.hours)
        # warm-up: compile the numba kernels on a small copy so the figure is the steady cost
        warm = root / "warm"
        make_project(warm, 0.2)
        ScreeningPass(load_config(warm / "config")).run()
        rounds = [one_round(root / f"round{k}", inbox, paths) for k in range(max(1, args.rounds))]
    read_s = float(np.median([r[0] for r in rounds]))
    screen_s = float(np.median([r[1] for r in rounds]))
    ratios = [r[1] / r[0] for r in rounds]
    n_samples, summary = rounds[0][2], rounds[-1][3]
    print(f"night of {args.hours:g} h at {RATE_HZ:g} Hz, {len(paths)} loggers, {n_samples:,} samples, "
          f"{len(rounds)} rounds (medians)")
    print(f"  pyarrow read only       : {read_s:7.2f} s")
    print(f"  screening pass (full)   : {screen_s:7.2f} s  ({summary.events_new} events, {summary.windows_screened} windows)")
    print(f"  ratio pass / read       : {float(np.median(ratios)):7.1f}  (target <= 3; rounds "
          + ", ".join(f"{r:.1f}" for r in ratios) + ")")
    print(f"  samples per second      : {n_samples / screen_s:,.0f}")


if __name__ == "__main__":
    main()
