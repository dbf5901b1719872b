"""Memory of a ZeroMQ binary stream at 1M readings/s: the ZmqSource alone, then ZmqSource + Pipeline.

Run: python tests/bench/bench_hostile_memory.py [--seconds S]
A `regime simulate` subprocess publishes binary batches of 1000 readings at 1,000,000 readings/s; this
process receives them (and, in the second half, runs them through the pipeline) and prints its resident
memory at the start, its peak and its mean over the last half of each run, with their ratios to the
start, all measured side by side in this one run (no timed assertions anywhere).
"""

from __future__ import annotations

import argparse
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def rss_mb() -> float:
    with open("/proc/self/status") as fh:
        for line in fh:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    return float("nan")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def run(seconds: float, with_pipeline: bool) -> tuple[float, float, float, int]:
    from adapters.zmq_stream import ZmqSource
    from monitor.config import Config
    from monitor.pipeline import Pipeline

    port = free_port()
    ep = f"tcp://127.0.0.1:{port}"
    pub = subprocess.Popen([sys.executable, "-m", "monitor", "simulate", ep, "--format", "binary", "--rate", "1e6",
                            "--loop", "--count", str(int(seconds * 1e6)), "--quiet", "--wait-subscribers", "1"],
                           cwd=ROOT, env={**os.environ, "PYTHONPATH": str(ROOT)})
    src = ZmqSource(ep, name="bench")
    pipe = Pipeline(Config()) if with_pipeline else None
    start = rss_mb()
    samples: list[tuple[float, float]] = []
    got = 0
    t0 = time.monotonic()
    try:
        src.open()
        while time.monotonic() - t0 < seconds + 5 and pub.poll() is None or got == 0:
            polled = src.poll(0.05)
            for b in polled.batches:
                got += len(b)
                if pipe is not None:
                    pipe.process(b)
            samples.append((time.monotonic() - t0, rss_mb()))
            if time.monotonic() - t0 > seconds + 10:
                break
    finally:
        src.close()
        pub.kill()
        pub.wait()
    peak = max(r for _, r in samples)
    late = [r for t, r in samples if t > seconds / 2]
    return start, peak, sum(late) / max(1, len(late)), got


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--seconds", type=float, default=20.0)
    a = ap.parse_args()
    for label, with_pipeline in (("ZmqSource alone", False), ("ZmqSource + Pipeline", True)):
        start, peak, steady, got = run(a.seconds, with_pipeline)
        print(f"{label}: {got} readings in ~{a.seconds:g} s; RSS start {start:.0f} MB, peak {peak:.0f} MB "
              f"({peak / start:.2f}x), second-half mean {steady:.0f} MB ({steady / start:.2f}x)")


if __name__ == "__main__":
    main()
