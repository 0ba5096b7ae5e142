"""Screen the labelled MOC corpus and print recall, precision, kind confusion and onset error.

Usage::

    python -m benchmarks.eval_detection --seeds 1 2 3 --slots 24

An event counts as eligible when its largest excursion is at least ten noise deviations of
that sensor and at least the detector's minimum amplitude. A detection matches a label when
its start lies within ``--match-s`` of the label's first true onset. Onset errors are in
samples of the 100 Hz record, per sensor of each matched event, against the physical
arrival (see :mod:`benchmarks.corpus`); observations of a sensor that saw only a later
phase of the event (its data resumed after a gap) carry no arrival time and are left out.
Figures are printed per seed and pooled: judge the detector across seeds, not on one.
"""

from __future__ import annotations

import argparse
import time
from collections import Counter

import numpy as np

from benchmarks.corpus import make_corpus
from detectors.events import EVENT_KINDS, detect_events
from detectors.params import DetectionParams


def evaluate(seed: int, slots: int, params: DetectionParams, match_s: float):
    corpus = make_corpus(seed, n_slots=slots)
    started = time.perf_counter()
    detected = detect_events(corpus.traces, corpus.layout, params)
    elapsed = time.perf_counter() - started
    labels = list(corpus.events)
    used = set()
    pairs = []
    for label in labels:
        first = min(label.onsets_ns.values())
        best = None
        for j, event in enumerate(detected):
            if j in used:
                continue
            gap = abs(event.start_time_ns - first) * 1e-9
            if gap <= match_s and (best is None or gap < best[0]):
                best = (gap, j)
        if best is not None:
            used.add(best[1])
        pairs.append((label, None if best is None else detected[best[1]]))
    unmatched = [e for j, e in enumerate(detected) if j not in used]
    return corpus, pairs, unmatched, detected, elapsed


def eligible(label, params) -> bool:
    if label.kind == "sensor_fault":
        return True
    return any(
        amp >= max(10.0 * label.noise_pa[s], params.min_amplitude_pa)
        for s, amp in label.excursions_pa.items()
    )


def _seed_figures(corpus, pairs, unmatched, detected, params) -> dict:
    """Recall, precision, kind accuracy and onset error of one seed."""
    found = [(label, event) for label, event in pairs if eligible(label, params)]
    hits = [(label, event) for label, event in found if event is not None]
    errors = [
        abs(o.onset_time_ns - label.onsets_ns[o.sensor_id]) * 1e-9 / corpus.sample_interval_s
        for label, event in hits if label.kind != "sensor_fault"
        for o in event.observations if o.sensor_id in label.onsets_ns and o.clock_synchronised
    ]
    return {
        "eligible": len(found),
        "recall": len(hits) / max(len(found), 1),
        "precision": (len(detected) - len(unmatched)) / max(len(detected), 1),
        "kind": sum(label.kind == event.kind for label, event in hits) / max(len(hits), 1),
        "onset_median": float(np.median(errors)) if errors else float("nan"),
        "onset_p90": float(np.percentile(errors, 90)) if errors else float("nan"),
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seeds", type=int, nargs="+", default=[1, 2, 3])
    parser.add_argument("--slots", type=int, default=24)
    parser.add_argument("--match-s", type=float, default=3.0)
    parser.add_argument("--verbose", action="store_true")
    args = parser.parse_args()
    params = DetectionParams()
    confusion: Counter = Counter()
    n_eligible = n_found = n_detected = n_false = 0
    onset_errors = []
    samples = seconds = 0.0
    per_seed = []
    for seed in args.seeds:
        corpus, pairs, unmatched, detected, elapsed = evaluate(seed, args.slots, params, args.match_s)
        seed_counts = _seed_figures(corpus, pairs, unmatched, detected, params)
        per_seed.append((seed, seed_counts))
        samples += sum(len(tr) for tr in corpus.traces.values())
        seconds += elapsed
        n_detected += len(detected)
        n_false += len(unmatched)
        for label, event in pairs:
            if not eligible(label, params):
                continue
            n_eligible += 1
            if event is None:
                confusion[(label.kind, "missed")] += 1
                if args.verbose:
                    print(f"seed {seed}: missed {label.kind} at {min(label.onsets_ns.values())}")
                continue
            n_found += 1
            confusion[(label.kind, event.kind)] += 1
            if args.verbose and event.kind != label.kind:
                print(f"seed {seed}: {label.kind} called {event.kind}: {event.reason}")
            for obs in event.observations:
                # observations first seen after a gap carry no arrival time (not timed)
                if obs.sensor_id in label.onsets_ns and label.kind != "sensor_fault" and obs.clock_synchronised:
                    onset_errors.append(abs(obs.onset_time_ns - label.onsets_ns[obs.sensor_id]) * 1e-9 / corpus.sample_interval_s)
        if args.verbose:
            for e in unmatched:
                print(f"seed {seed}: false {e.kind} at {e.start_time_ns} on {e.origin_sensor}: {e.reason}")
    recall = n_found / max(n_eligible, 1)
    precision = (n_detected - n_false) / max(n_detected, 1)
    correct = sum(v for (a, b), v in confusion.items() if a == b)
    print(f"seeds {args.seeds}, {args.slots} slots of 10 min each, 4 sensors at 100 Hz")
    for seed, f in per_seed:
        print(f"  seed {seed}: eligible {f['eligible']}, recall {f['recall']:.3f}, precision "
              f"{f['precision']:.3f}, kind accuracy {f['kind']:.3f}, median onset error "
              f"{f['onset_median']:.2f} samples (90th pct {f['onset_p90']:.1f})")
    print(f"eligible events {n_eligible}, found {n_found}, detections {n_detected}, false {n_false}")
    print(f"recall {recall:.3f}  precision {precision:.3f}  kind accuracy {correct / max(n_found, 1):.3f}")
    err = np.array(onset_errors)
    if err.size:
        print(f"onset error [samples]: median {np.median(err):.2f}, 90th pct {np.percentile(err, 90):.2f}, n={err.size}")
    print(f"detector throughput {samples / max(seconds, 1e-9) / 1e6:.1f} M samples/s")
    kinds = [k for k in EVENT_KINDS] + ["missed"]
    truth = sorted({a for a, _ in confusion})
    print("confusion (rows: truth, columns: detected)")
    print(" " * 16 + " ".join(f"{k[:10]:>10}" for k in kinds))
    for a in truth:
        print(f"{a[:15]:<16}" + " ".join(f"{confusion.get((a, k), 0):>10}" for k in kinds))


if __name__ == "__main__":
    main()
