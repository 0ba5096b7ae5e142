"""Benchmark: calibrate one event on a 5 km main logged at 100 Hz over a 60 s window.

Prints the calibration time after warm-up, the number of model runs, the time of one
replay run at the logging rate (the ratio puts the calibration in units of model runs) and
of the compared run at the comparison's model steps per driving sample.
The calibration works on a copy decimated to its model step (block means), as
``service.comparison`` does, in stages within the service's default budget of model runs
(one factor, then unsteady friction only when it helps). Figures only; nothing here gates
CI.
"""

import time

import numpy as np

from models.calibrate import CalibrationOptions, calibrate_in_stages
from models.moc import MocModel, Probe
from models.network import Fluid, HeadSeries, Network, Pipe, Reservoir
from models.replay import InitialFlow, ReplayModel, block_mean, cut_network_at
from service.comparison import DEFAULT_MODEL_STEPS_PER_SAMPLE

FLUID = Fluid(999.7, 1.3e-6, -10.0)


def event():
    source = HeadSeries("S", np.array([0.0, 3.0, 4.0, 70.0]), np.array([120.0, 120.0, 70.0, 70.0]))
    net = Network(FLUID, (Pipe("M", "S", "R", 5000.0, 0.5, 1120.0, friction_factor=0.018),),
                  (source, Reservoir("R", 100.0)))
    run = MocModel(net, 0.005, cavitation=False).run(
        61.0, [Probe("D", "M", 20.0), Probe("T1", "M", 2500.0), Probe("T2", "M", 4800.0)])
    t = np.arange(0.0, 60.0, 0.01)
    heads = run.probe_heads_at(t) + np.random.default_rng(5).normal(0.0, 0.05, (t.size, 3))
    config = Network(FLUID, (Pipe("M", "S", "R", 5000.0, 0.5, 1060.0, friction_factor=0.015),),
                     (Reservoir("S", 120.0), Reservoir("R", 95.0)))
    cut = cut_network_at(config, "M", 20.0, heads[0, 0], keep_points=[("M", 2500.0)])
    flow = InitialFlow("measured", run.steady.pipe_flow_m3_s["M"])
    probes = (cut.probe("T1", "M", 2500.0), cut.probe("T2", "M", 4800.0))
    return t, heads, cut, flow, probes


def replay_at(t, heads, cut, flow, probes, dt):
    dec = max(1, int(round(dt / 0.01)))
    tb, hb = block_mean(t, heads[:, 0], dec)
    tt, ht = block_mean(t, heads[:, 1:], dec)
    return ReplayModel(cut, tb, hb, probes, tt, {"M": 1060.0}, {"M": 0.015}, flow, dt,
                       cavitation=False), ht


def main():
    t, heads, cut, flow, probes = event()
    travel = cut.network.pipe("M").length_m / 1060.0
    coarse_dt = travel / 48
    replay, measured = replay_at(t, heads, cut, flow, probes, coarse_dt)
    options = CalibrationOptions(max_model_runs=120)
    calibrate_in_stages(replay, measured, options=options)  # warm-up (numba, caches)
    replay, measured = replay_at(t, heads, cut, flow, probes, coarse_dt)
    start = time.perf_counter()
    fit = calibrate_in_stages(replay, measured, options=options)
    elapsed = time.perf_counter() - start
    full, _ = replay_at(t, heads, cut, flow, probes, travel / round(travel / 0.01))
    start = time.perf_counter()
    full.predict(fit.wave_speed_m_s, fit.friction_factor, fit.unsteady_coefficient)
    one_full = time.perf_counter() - start
    fine, _ = replay_at(t, heads, cut, flow, probes,
                        travel / round(travel * DEFAULT_MODEL_STEPS_PER_SAMPLE / 0.01))
    start = time.perf_counter()
    fine.predict(fit.wave_speed_m_s, fit.friction_factor, fit.unsteady_coefficient)
    one_fine = time.perf_counter() - start
    print(f"5 km main, 100 Hz, 60 s window; calibration on a copy decimated to {coarse_dt:.3f} s")
    print(f"  status: {fit.reason}; wave speed {fit.wave_speed_m_s['M']:.1f} m/s (true 1120), "
          f"friction {fit.friction_factor['M']:.4f} (true 0.018), k {fit.unsteady_coefficient:.4f}")
    print(f"  calibration: {elapsed:.2f} s for {fit.n_model_runs} model runs "
          f"({1000 * elapsed / fit.n_model_runs:.1f} ms per run, budget 120); target <= 2 s")
    print(f"  notes: {'; '.join(fit.notes)}")
    print(f"  one replay at the logging rate: {one_full:.2f} s; calibration = "
          f"{elapsed / one_full:.1f} full-rate runs")
    print(f"  compared run at {DEFAULT_MODEL_STEPS_PER_SAMPLE} model steps per sample "
          f"(service.comparison): {one_fine:.2f} s; calibration + compared run "
          f"{elapsed + one_fine:.2f} s")


if __name__ == "__main__":
    main()
