"""Benchmark of the MOC engine: interior-node updates per second, compiled kernel against
its plain numpy twin, measured side by side in one run; then a whole calibration-sized run.

Prints figures only (machines are noisy: compare the ratios, not the absolute times).
Run: python -m benchmarks.bench_moc_kernel
"""

from __future__ import annotations

import math
import time

import numpy as np

from models.moc import MocModel, Probe, _execute
from models.moc_layout import build_layout
from models.steady import solve_steady_state
from models.moc_kernel import advance_interior
from models.moc_reference import reference_advance_interior
from models.network import Fluid, HeadSeries, Junction, Network, Pipe, Reservoir, Valve


def single_pipe(reaches: int):
    first = np.array([0], dtype=np.int64)
    n = np.array([reaches], dtype=np.int64)
    h = np.linspace(60.0, 50.0, reaches + 1)
    q = np.full(reaches + 1, 0.1)
    return first, n, np.array([1200.0]), np.array([0.01]), np.array([0.0]), np.full(reaches + 1, -10.0), h, q


def best_rate(run, node_updates: int, repeats: int = 5) -> float:
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return node_updates / best


def bench_interior(reaches: int, steps_compiled: int, steps_numpy: int, rounds: int = 5) -> None:
    """Kernel and numpy twin timed in alternation, round after round, so both see the same
    state of a noisy machine; prints the best rate of each and the median of the per-round
    ratios."""
    first, n, b, r, kb, hv, h, q = single_pipe(reaches)
    interior = reaches - 1
    advance_interior(2, first, n, b, r, kb, hv, h, q, q, 0.01)  # warm-up (compile or load)
    compiled, plain = [], []
    for _ in range(rounds):
        compiled.append(best_rate(lambda: advance_interior(steps_compiled, first, n, b, r, kb, hv, h, q, q, 0.01),
                                  interior * steps_compiled, repeats=2))
        plain.append(best_rate(lambda: reference_advance_interior(steps_numpy, first, n, b, r, kb, hv, h, q, q, 0.01),
                               interior * steps_numpy, repeats=1))
    ratios = sorted(c / p for c, p in zip(compiled, plain))
    print(f"{reaches:5d} reaches  kernel {max(compiled):10.3e}/s  numpy twin {max(plain):10.3e}/s  "
          f"ratio {ratios[len(ratios) // 2]:7.1f} (rounds {ratios[0]:.0f} to {ratios[-1]:.0f})")


def calibration_network() -> tuple[Network, list]:
    """A 5 km main: measured head upstream, a branch, a valve downstream (invented)."""
    fluid = Fluid(999.7, 1.306e-6, -10.1)
    times = np.arange(0.0, 60.0, 0.01)
    heads = 80.0 + 3.0 * np.sin(2 * np.pi * times / 7.0) * (times > 5.0)
    pipes = (Pipe("A", "S", "J", 2000.0, 0.5, 1100.0, roughness_m=1e-4),
             Pipe("B", "J", "V", 3000.0, 0.45, 1050.0, roughness_m=1e-4),
             Pipe("C", "J", "T", 800.0, 0.2, 1000.0, roughness_m=1e-4))
    nodes = (HeadSeries("S", times, heads), Junction("J", demand_m3_s=0.005),
             Valve("V", 0.02, outlet_head_m=40.0), Reservoir("T", 70.0))
    probes = [Probe("s1", "A", 1500.0), Probe("s2", "B", 1000.0), Probe("s3", "C", 400.0)]
    return Network(fluid, pipes, nodes), probes


def best_ms(run, repeats: int = 7) -> float:
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        best = min(best, time.perf_counter() - start)
    return 1e3 * best


def bench_event() -> None:
    """A whole calibration-sized run, and where its time goes."""
    network, probes = calibration_network()
    model = MocModel(network, 0.01)
    result = model.run(60.0, probes)  # warm-up
    points, steps = result.point_offsets_m.size, result.times_s.size - 1
    print(f"5.8 km network, dt 0.01 s, 60 s ({points} points, {steps} steps), best of 7:")
    print(f"  run, same model             {best_ms(lambda: model.run(60.0, probes)):7.2f} ms")
    times = network.node("S").times_s
    heads = network.node("S").heads_m
    print(f"  run, new head series        "
          f"{best_ms(lambda: model.run(60.0, probes, head_series={'S': (times, heads + 0.5)})):7.2f} ms")
    print(f"  new wave speed, first run   "
          f"{best_ms(lambda: model.with_parameters(wave_speed_factor=0.97).run(60.0, probes)):7.2f} ms")
    friction = iter(np.linspace(0.015, 0.02, 50))
    print(f"  new friction, first run     "
          f"{best_ms(lambda: model.with_parameters(friction_factor={'A': next(friction)}).run(60.0, probes)):7.2f} ms")
    steady = model.steady_state()
    coefficients = model._unsteady_coefficients(steady)
    layout = build_layout(network, model.discretisation, steady, coefficients, steps, True)
    print("  parts of one run:")
    print(f"    steady state solve        {best_ms(lambda: solve_steady_state(network)):7.2f} ms"
          " (cached unless friction or the initial heads change)")
    print(f"    layout building           "
          f"{best_ms(lambda: build_layout(network, model.discretisation, steady, coefficients, steps, True)):7.2f} ms"
          " (cached per model and number of steps)")
    print(f"    kernel and results        "
          f"{best_ms(lambda: _execute(layout, network, steady, model.discretisation, tuple(probes), steps, 0)):7.2f} ms")


def main() -> None:
    print("interior-node updates per second (best of several runs)")
    bench_interior(1000, 20000, 400)
    bench_interior(100, 200000, 4000)
    bench_event()


if __name__ == "__main__":
    main()
