"""Wave-speed estimation from arrival delays: error and interval coverage tables.

Prints figures, never gates anything. Run from the repository root::

    python benchmarks/bench_wavespeed.py              # all tables
    python benchmarks/bench_wavespeed.py --weightings # GCC weighting and peak refinement
    python benchmarks/bench_wavespeed.py --sampling   # timing error of noiseless fronts
    python benchmarks/bench_wavespeed.py --table      # error and coverage vs rate, spacing, SNR
    python benchmarks/bench_wavespeed.py --moc        # on MOC-generated events, where available

Synthetic fronts: a smoothed step (``tanh``) or a pump-trip-like ramp with rounded corners,
arriving at sensor B a known fractional delay after sensor A, with seeded white noise at a
stated SNR (``20 log10(step / noise std)``) and a slow drift of 5 % of the step per second.
All scenario numbers are invented.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from detectors.delays import (  # noqa: E402
    GCC_WEIGHTINGS,
    PEAK_REFINEMENTS,
    estimate_front_delay,
    estimate_onset_delay,
    gcc_lag_samples,
)

TANH_RISE = 2.0 * np.arctanh(0.8)  # 10-90 % rise of tanh(t / w) is 2.197 w


def front(times_s: np.ndarray, arrival_s: float, rise_s: float, shape: str) -> np.ndarray:
    """Unit front arriving at ``arrival_s`` with a 10-90 % rise time ``rise_s``."""
    if shape == "tanh":
        return 0.5 * (1.0 + np.tanh((times_s - arrival_s) / (rise_s / TANH_RISE)))
    # ramp over rise/0.8 s with quarter-cosine rounded corners of 10 % of the ramp
    ramp_s = rise_s / 0.8
    u = np.clip((times_s - arrival_s) / ramp_s + 0.5, 0.0, 1.0)
    return u - np.sin(2 * np.pi * u) / (2 * np.pi) * 0.2


def pair(rng, *, sample_interval_s, delay_s, rise_s, snr_db, shape="tanh", window_s=None,
         drift_per_s=0.05, step_pa=50e3, arrival_s=None):
    """Front windows at A and B (common start times), B delayed by ``delay_s``."""
    window_s = window_s or max(40 * sample_interval_s, 8 * rise_s)
    n = int(round(window_s / sample_interval_s))
    t = np.arange(n) * sample_interval_s
    arrival = arrival_s if arrival_s is not None else (
        0.4 * window_s + rng.uniform(0, sample_interval_s))
    noise = step_pa / 10 ** (snr_db / 20)
    out = []
    for extra in (0.0, delay_s):
        drift = drift_per_s * step_pa * (t - t.mean()) * rng.uniform(-1, 1)
        clean = -step_pa * front(t, arrival + extra, rise_s, shape)
        out.append(clean + drift + rng.normal(0, noise, n) + 3e5)
    return out[0], out[1], n


def weightings_table(trials: int = 300) -> None:
    """RMS lag error for every weighting and refinement, same trials side by side."""
    print("\nGCC weighting x peak refinement: RMS lag error [samples] (30 dB, fractional lag)")
    rng = np.random.default_rng(1)
    cases = []
    for _ in range(trials):
        rise = rng.uniform(1.0, 10.0)
        lag = rng.uniform(-3, 3)
        shape = "tanh" if rng.random() < 0.5 else "ramp"
        a, b, _ = pair(rng, sample_interval_s=1.0, delay_s=lag, rise_s=rise, snr_db=30.0,
                       shape=shape, window_s=max(64, 10 * rise))
        cases.append((a, b, lag))
    print(f"{'weighting':>12}" + "".join(f"{r:>12}" for r in PEAK_REFINEMENTS))
    for weighting in GCC_WEIGHTINGS:
        row = []
        for refinement in PEAK_REFINEMENTS:
            errors = [gcc_lag_samples(a, b, weighting=weighting, refinement=refinement,
                                      max_lag_samples=8)[0] - lag for a, b, lag in cases]
            row.append(np.sqrt(np.mean(np.square(errors))))
        print(f"{weighting:>12}" + "".join(f"{v:12.3f}" for v in row))


def sampling_table() -> None:
    """Timing error of noiseless fronts versus rise time: the sampling term."""
    print("\nNoiseless fronts: RMS lag error [samples] vs 10-90 % rise [samples]")
    rng = np.random.default_rng(2)
    print(f"{'rise':>6}{'gcc tanh':>10}{'gcc ramp':>10}{'onset tanh':>12}{'onset ramp':>12}"
          f"{'parab tanh':>12}{'parab ramp':>12}")
    for rise in (0.05, 0.5, 1.0, 1.5, 2.0, 3.0, 5.0, 10.0):
        row = []
        for method in ("gcc", "onset", "parabolic"):
            for shape in ("tanh", "ramp"):
                errors = []
                for _ in range(200):
                    lag = rng.uniform(-2, 2)
                    a, b, _ = pair(rng, sample_interval_s=1.0, delay_s=lag, rise_s=rise,
                                   snr_db=300.0, shape=shape, drift_per_s=0.0,
                                   window_s=max(64, 10 * rise))
                    if method == "gcc":
                        got = gcc_lag_samples(a, b, max_lag_samples=8)[0]
                    elif method == "parabolic":
                        got = gcc_lag_samples(a, b, max_lag_samples=8,
                                              refinement="parabolic")[0]
                    else:
                        got = estimate_onset_delay(a, b, 1.0).delay_s
                    errors.append(got - lag)
                row.append(np.sqrt(np.mean(np.square(errors))))
        print(f"{rise:6.2f}" + "".join(f"{v:10.3f}" for v in row[:2])
              + "".join(f"{v:12.3f}" for v in row[2:]))
    print(f"(unresolved step, uniform quantisation of both arrivals: 1/sqrt(6) = "
          f"{1 / np.sqrt(6):.3f})")


def coverage_row(rng, *, rate_hz, spacing_m, snr_db, speed_m_s=1100.0, trials=60,
                 rise_s=None, shape="tanh", n_bootstrap=60):
    """Median |error| [%] and 95 % coverage [%] of both methods for one scenario."""
    dt = 1.0 / rate_hz
    results = {"gcc": [], "onset": []}
    elapsed = 0.0
    for _ in range(trials):
        speed = speed_m_s * rng.uniform(0.9, 1.1)
        delay = spacing_m / speed
        rise = rise_s if rise_s is not None else rng.uniform(2, 6) * dt
        window = max(80 * dt, 10 * rise)
        # B's window starts at A's start plus the delay rounded to a sample and a jitter, as an
        # onset picker would place it.
        offset = (np.round(delay / dt) + rng.integers(-2, 3)) * dt
        arrival = 0.4 * window + rng.uniform(0, dt)
        a, b, n = pair(rng, sample_interval_s=dt, delay_s=delay - offset, rise_s=rise,
                       snr_db=snr_db, shape=shape, window_s=window, arrival_s=arrival)
        start = time.perf_counter()
        estimates = {}
        for key, method in (("gcc", estimate_front_delay), ("onset", estimate_onset_delay)):
            options = {"n_bootstrap": n_bootstrap} if key == "gcc" else {}
            try:
                estimates[key] = method(a, b, dt, offset_b_s=offset, **options)
            except ValueError:
                results[key].append((np.inf, False))
        elapsed += time.perf_counter() - start
        for key, est in estimates.items():
            estimated_speed = spacing_m / est.delay_s
            sigma = estimated_speed * est.uncertainty_s / est.delay_s
            results[key].append((abs(estimated_speed - speed) / speed * 100,
                                 abs(estimated_speed - speed) <= 1.96 * sigma))
    out = {}
    for key, rows in results.items():
        arr = np.array(rows, dtype=float)
        out[key] = (float(np.median(arr[:, 0])), float(arr[:, 1].mean() * 100))
    return out, elapsed / trials


def coverage_table(trials: int = 60) -> None:
    """Median |error| and coverage of the stated 95 % interval vs rate, spacing and SNR."""
    print("\nSynthetic fronts (rise 2-6 samples, tanh), wave speed 990-1210 m/s, "
          f"{trials} trials per row")
    print(f"{'rate Hz':>8}{'spacing m':>10}{'SNR dB':>7}{'gcc med|e| %':>14}{'gcc cover %':>12}"
          f"{'onset med|e| %':>16}{'onset cover %':>14}{'ms/pair':>9}")
    rng = np.random.default_rng(3)
    for rate_hz in (100.0, 1000.0):
        for spacing_m in (250.0, 500.0, 1000.0, 2000.0):
            for snr_db in (20.0, 30.0, 40.0):
                out, per_pair = coverage_row(rng, rate_hz=rate_hz, spacing_m=spacing_m,
                                             snr_db=snr_db, trials=trials)
                (ge, gc), (oe, oc) = out["gcc"], out["onset"]
                print(f"{rate_hz:8.0f}{spacing_m:10.0f}{snr_db:7.0f}{ge:14.3f}{gc:12.1f}"
                      f"{oe:16.3f}{oc:14.1f}{per_pair * 1e3:9.1f}")


def moc_event(rng, *, rate_hz, spacing_m, snr_db, model_step_s=0.0005):
    """One valve-closure event on an invented rising main, sampled like a logger.

    Reservoir (head 60 m) - 3.2 km pipe (D 0.5 m, Darcy f 0.018) - end valve closing over
    0.05-0.4 s (power law, exponent 2) from a flow of about 1 m/s. Two probes ``spacing_m``
    apart; the logger samples are means over each sample interval (a simple anti-alias) at a
    random phase; white noise at ``snr_db`` of the Joukowsky step is added.
    """
    from models.moc import MocModel, Probe
    from models.network import Fluid, Network, Pipe, Reservoir, Valve, ValveMotion

    speed = rng.uniform(950.0, 1250.0)
    length = 3200.0
    closure_s = rng.uniform(0.05, 0.4)
    network = Network(
        Fluid(999.5, 1.2e-6, -10.0),
        (Pipe("M1", "R", "V", length, 0.5, speed, friction_factor=0.018),),
        (Reservoir("R", 60.0), Valve("V", 0.025, ValveMotion.closure(1.0, closure_s, 2.0))),
    )
    model = MocModel(network, model_step_s)
    true_speed = model.discretisation.wave_speed_m_s["M1"]
    x_b = rng.uniform(300.0, length - spacing_m - 300.0)  # B nearer the reservoir
    x_a = x_b + spacing_m                                  # A nearer the valve: first hit
    result = model.run(4.5, (Probe("A", "M1", x_a), Probe("B", "M1", x_b)))
    per_sample = int(round(1.0 / rate_hz / model_step_s))
    phase = int(rng.integers(0, per_sample))
    heads = result.probe_heads_m[phase:]
    n = heads.shape[0] // per_sample
    logged = heads[: n * per_sample].reshape(n, per_sample, 2).mean(axis=1) * 999.5 * 9.80665
    step_pa = float(np.ptp(logged[:, 0]))
    noise = 0.5 * step_pa / 10 ** (snr_db / 20)
    logged = logged + rng.normal(0, noise, logged.shape)
    start_s = (phase + 0.5 * per_sample) * model_step_s
    arrivals = [1.0 + (length - x) / true_speed for x in (x_a, x_b)]
    return logged, start_s, 1.0 / rate_hz, arrivals, true_speed


def moc_table(trials: int = 30, verbose: bool = False) -> None:
    """Error and coverage on MOC-generated valve closures, through the event-level function."""
    from detectors.traces import SensorTrace
    from detectors.wavespeed import estimate_event_wave_speeds
    from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
    from models.properties import speed_of_sound_m_s

    print(f"\nMOC valve closures (Tc 0.05-0.4 s, friction on), {trials} events per row; onsets "
          "given to the estimator +-3 samples off")
    print(f"{'rate Hz':>8}{'spacing m':>10}{'SNR dB':>7}{'method':>11}{'accepted':>9}"
          f"{'med|e| %':>10}{'cover %':>9}")
    rng = np.random.default_rng(7)
    for rate_hz in (100.0, 1000.0):
        for spacing_m in (500.0, 1000.0):
            for snr_db in (30.0,):
                rows: dict[str, list] = {}
                for _ in range(trials):
                    logged, start_s, dt, arrivals, true_speed = moc_event(
                        rng, rate_hz=rate_hz, spacing_m=spacing_m, snr_db=snr_db)
                    times_ns = (1_700_000_000e9 + (start_s + np.arange(logged.shape[0]) * dt)
                                * 1e9).astype(np.int64)
                    traces = {sid: SensorTrace(sid, "pressure", times_ns, logged[:, j])
                              for j, sid in enumerate(("A", "B"))}
                    layout = SystemLayout(
                        "bench", (NodeSite("R", "reservoir"), NodeSite("V", "valve")),
                        (PipeSite("M1", "R", "V", 3200.0, 0.5),),
                        (SensorSite("A", "M1", 0.0), SensorSite("B", "M1", spacing_m)))

                    class Obs:
                        def __init__(self, sid, t):
                            self.sensor_id, self.onset_time_ns = sid, t

                    observations = [Obs(sid, int(1_700_000_000e9 + (t + rng.integers(-3, 4) * dt)
                                                 * 1e9)) for sid, t in zip("AB", arrivals)]
                    estimates = estimate_event_wave_speeds(
                        observations, traces, layout, max_wave_speed_m_s=speed_of_sound_m_s(12.0),
                        min_wave_speed_m_s=200.0, n_bootstrap=60)
                    for e in estimates:
                        if e.method == "none" or (not e.accepted and verbose):
                            print("   rejected:", e.method, round(e.wave_speed_m_s, 1),
                                  round(true_speed, 1), e.reason)
                        error = abs(e.wave_speed_m_s - true_speed) / true_speed * 100
                        covered = abs(e.wave_speed_m_s - true_speed) <= 1.96 * e.uncertainty_m_s
                        rows.setdefault(e.method, []).append((e.accepted, error, covered))
                for method, items in rows.items():
                    accepted = [(err, cov) for ok, err, cov in items if ok]
                    med = np.median([a for a, _ in accepted]) if accepted else np.nan
                    cover = 100 * np.mean([c for _, c in accepted]) if accepted else np.nan
                    print(f"{rate_hz:8.0f}{spacing_m:10.0f}{snr_db:7.0f}{method:>11}"
                          f"{len(accepted):5d}/{len(items):<3d}{med:10.3f}{cover:9.1f}")


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    for flag in ("weightings", "sampling", "table", "moc"):
        parser.add_argument(f"--{flag}", action="store_true")
    parser.add_argument("--trials", type=int, default=60)
    args = parser.parse_args(argv)
    run_all = not (args.weightings or args.sampling or args.table or args.moc)
    if args.weightings or run_all:
        weightings_table()
    if args.sampling or run_all:
        sampling_table()
    if args.table or run_all:
        coverage_table(args.trials)
    if args.moc or run_all:
        moc_table(max(10, args.trials // 2))


if __name__ == "__main__":
    main()
