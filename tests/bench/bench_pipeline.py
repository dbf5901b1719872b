"""Pipeline benchmark (for tests/bench/): Pipeline.process and Session+alarm engine against derive() alone, side by side.

Run: python tests/bench/bench_pipeline.py [--readings N]

Prints readings/s for batches of 1, 100, 1,000, 10,000 and 100,000 readings
(ne every reading, Te every 50th as its own sample, p0 and B constant): the
physics alone on the same arrays, the whole pipeline (map, validate, align,
derive, rolling statistics), and a Session with the demo envelope's alarm
engine; ratios to the physics alone. Figures vary with machine load: compare ratios.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from adapters.base import LinkState, Polled, SourceStatus  # noqa: E402
from adapters.batch import Batch  # noqa: E402
from monitor.commands.demo import envelope_path  # noqa: E402
from monitor.config import load_config  # noqa: E402
from monitor.physics import derive  # noqa: E402
from monitor.pipeline import Pipeline  # noqa: E402
from monitor.pipeline.align import Aligner  # noqa: E402
from monitor.session import Session, make_engine  # noqa: E402


def batches(total: int, size: int) -> list[Batch]:
    rng = np.random.default_rng(0)
    out = []
    for k in range(max(1, total // size)):
        idx = k * size + np.arange(size)
        te = np.where(idx % 50 == 0, 3.0, np.nan)
        out.append(Batch("bench", idx * 1e-5, {"ne": 5e16 * (1 + 0.01 * rng.standard_normal(size)), "Te": te,
                                                "p0": np.full(size, 2.0), "B": np.full(size, 0.01)}, seq=idx))
    return out


class ListSource:
    name = "bench"

    def __init__(self, items: list[Batch]) -> None:
        self.items = list(items)

    def open(self) -> None:
        return None

    def poll(self, timeout: float) -> Polled:
        if not self.items:
            return Polled(status=SourceStatus(self.name, LinkState.ENDED))
        return Polled(batches=[self.items.pop(0)], status=SourceStatus(self.name, LinkState.CONNECTED))

    def status(self) -> SourceStatus:
        return SourceStatus(self.name, LinkState.CONNECTED)

    def close(self) -> None:
        return None


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--readings", type=int, default=1_000_000)
    args = ap.parse_args()
    config = load_config(envelope_path())
    print(f"config: demo envelope, {len(config.limits)} limits; {args.readings:,} readings per case")
    for size in (1, 100, 1_000, 10_000, 100_000):
        total = min(args.readings, 20_000 * size)
        bs = batches(total, size)
        n = len(bs) * size
        aligner = Aligner(0.25, {})
        aligned = [aligner.align("bench", b.t, b.columns, {})[0] for b in bs]
        t0 = time.perf_counter()
        for a in aligned:
            derive(a, config.device)
        t_phys = time.perf_counter() - t0
        p = Pipeline(config)
        t0 = time.perf_counter()
        for b in bs:
            p.process(b)
        p.stats()
        t_pipe = time.perf_counter() - t0
        s = Session(ListSource(bs), config, engine=make_engine(config), live=False)
        t0 = time.perf_counter()
        while s.step(0.0):
            pass
        t_sess = time.perf_counter() - t0
        assert s.summary()["accepted"] == n
        print(f"batch {size:>7,}: derive alone {n / t_phys:>12,.0f}/s | pipeline {n / t_pipe:>12,.0f}/s "
              f"(ratio {t_phys / t_pipe:.2f}) | session+engine {n / t_sess:>12,.0f}/s (ratio {t_phys / t_sess:.2f})")


if __name__ == "__main__":
    main()
