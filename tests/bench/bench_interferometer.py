"""Benchmark of the interferometer analysis: I/Q -> line-averaged density with uncertainty, samples/s on one core, beside a bare numpy atan2.

Run: python tests/bench/bench_interferometer.py [--quick]
Prints figures and ratios measured side by side in this one run (no timed assertions anywhere).
Three paths at each batch size: the floor (``numpy.arctan2`` alone, the least any I/Q analysis costs);
the analysis chain (phase and amplitude, unwrapping, a fixed zero, density and sigma); and the whole
InterferometerStage as a live run uses it (zero from the discharge-off periods, phase noise estimated
from them, fringe-jump flags, output columns), batch after batch with its state carried.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path
from typing import Callable

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from adapters.batch import Batch  # noqa: E402
from adapters.sim_interferometer import generate_samples  # noqa: E402
from monitor.diagnostics.interferometer import line_averaged_density, phase_from_iq, unwrap  # noqa: E402
from monitor.diagnostics.interferometer_source import simulator_config  # noqa: E402
from monitor.diagnostics.interferometer_stage import InterferometerStage  # noqa: E402

F, L, P = 100e9, 0.2, 2


def best_rate(fn: Callable[[], object], n: int, repeats: int) -> float:
    """Samples per second of the fastest of ``repeats`` calls."""
    best = float("inf")
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return n / best


def stage_rate(source: Batch, n: int, repeats: int) -> float:
    """Samples per second of the whole stage over ``source`` cut into batches of ``n`` (state carried),
    the best of ``repeats`` passes, each with a fresh stage."""
    batches = [Batch(source="bench", t=source.t[k:k + n], columns={c: v[k:k + n] for c, v in source.columns.items()})
               for k in range(0, len(source), n)]
    best = float("inf")
    for _ in range(repeats):
        stage = InterferometerStage(simulator_config())
        t0 = time.perf_counter()
        for b in batches:
            stage.process(b)
        best = min(best, time.perf_counter() - t0)
    return len(source) / best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--quick", action="store_true", help="smaller sizes, fewer repeats")
    args = ap.parse_args()
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})       # one core
    sizes = (10_000, 100_000) if args.quick else (10_000, 100_000, 1_000_000)
    repeats = 5 if args.quick else 15
    # a fast instrument (200 kHz): one 5 s pass of the scenario, so most batches are all-on or all-off,
    # as in a live run; and the same samples at 1 kHz (every batch of 10,000 or more crosses a
    # discharge on/off edge and the fringe jump): the stage's worst case
    live = generate_samples(1, 200_000.0, 0, 1_000_000)
    worst = generate_samples(1, 1000.0, 0, 1_000_000, loop=True)
    print(f"numpy {np.__version__}, one core, best of {repeats}")
    print(f"{'batch':>10} {'atan2 floor':>14} {'chain':>14} {'stage live':>14} {'stage worst':>14} "
          f"{'chain/floor':>12} {'live/floor':>11} {'worst/floor':>12}")
    for n in sizes:
        i = np.ascontiguousarray(live.columns["I_q"][:n])
        q = np.ascontiguousarray(live.columns["Q_q"][:n])

        def floor() -> object:
            return np.arctan2(q, i)

        def chain() -> object:
            wrapped, amp = phase_from_iq(i, q)
            u, _ = unwrap(wrapped, 0.1, 0.1)
            u -= 0.3
            return line_averaged_density(u, F, L, P, phase_sigma=0.01 / amp, path_length_sigma=0.002)

        r_floor = best_rate(floor, n, repeats)
        r_chain = best_rate(chain, n, repeats)
        r_live = stage_rate(live, n, max(3, repeats // 3))
        r_worst = stage_rate(worst, n, max(3, repeats // 3))
        print(f"{n:>10,} {r_floor / 1e6:>10.1f} M/s {r_chain / 1e6:>10.1f} M/s {r_live / 1e6:>10.1f} M/s "
              f"{r_worst / 1e6:>10.1f} M/s {r_floor / r_chain:>11.1f}x {r_floor / r_live:>10.1f}x "
              f"{r_floor / r_worst:>11.1f}x")
    print("x/floor: how many times the bare atan2 the analysis costs (lower is better); "
          "target: I/Q -> density with uncertainty at >= 10 M samples/s")


if __name__ == "__main__":
    main()
