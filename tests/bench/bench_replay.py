"""Benchmark: replay of a 1,000,000-row recording (derive, six limits) beside numpy.loadtxt; recording rate; RSS.

Run: python tests/bench/bench_replay.py [--rows N] [--big-rows N]
Prints ratios measured side by side in one run; no assertion is timed.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

SIX_LIMITS = """
[device]
length = "0.3m"
A = 39.948
wave_frequency = "2.45GHz"
[discharge]
on_above = "1e15m^-3"
[[limit]]
name = "ne_high"
quantity = "ne"
high = "1.5e17m^-3"
deadband = "5%"
on_delay = "0.3s"
[[limit]]
name = "ne_low"
quantity = "ne"
low = "1e16m^-3"
on_delay = "3s"
[[limit]]
name = "Te_band"
quantity = "Te"
low = "1.2eV"
high = "6eV"
on_delay = "1s"
[[limit]]
name = "debye_long"
quantity = "debye_length"
high = "2e-4m"
[[limit]]
name = "over_cutoff"
quantity = "cutoff_ratio"
high = 1.0
deadband = "5%"
[[limit]]
name = "few_in_sphere"
quantity = "debye_number"
low = 1000
"""


def make_recording(path: Path, rows: int, config_path: Path) -> float:
    """A recording of ``rows`` readings at 10 kHz (ne every row, Te every 20th), written by the
    recorder's own formatter and header; returns the seconds it took."""
    from monitor.config import load_config
    from monitor.recording.csvformat import RowFormatter, header_block

    config = load_config(config_path)
    rng = np.random.default_rng(0)
    columns = ("t", "seq", "ne", "Te")
    fmt = RowFormatter(columns)
    start = time.perf_counter()
    with open(path, "w") as fh:
        fh.write(header_block(columns, shot=1, start_wall=1.7e9, source="bench", on_above=config.on_above,
                              limits=[lim.name for lim in config.limits]))
        block = 100_000
        for a in range(0, rows, block):
            n = min(block, rows - a)
            i = np.arange(a, a + n)
            t = 1.7e9 + i * 1e-4
            ne = 5e16 * (1 + 0.02 * rng.standard_normal(n)) * (1 + 4 * ((i // 200_000) % 2))
            te = np.where(i % 20 == 0, 3.0 * (1 + 0.03 * rng.standard_normal(n)), np.nan)
            fh.write(fmt.format(t, {"ne": ne, "Te": te}, i))
    return time.perf_counter() - start


# The shared environment sets PYTHONDONTWRITEBYTECODE=1, which makes every child compile all of its
# modules again (about 0.15-0.3 s here). An installed tool has its bytecode cached, so the children
# get a bytecode cache of their own (outside the source tree), warmed up by a first run.
CHILD_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
CHILD_ENV["PYTHONPYCACHEPREFIX"] = str(Path(tempfile.gettempdir()) / "regime-bench-pycache")


def timed(args: list[str], samples: list[float] | None = None) -> tuple[float, float, str]:
    """Wall seconds, peak RSS (MB, from wait4) and the last stdout line of one child process;
    ``samples`` collects its RSS (MB) every 0.2 s while it runs (psutil, when installed)."""
    start = time.perf_counter()
    proc = subprocess.Popen(args, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
                            env=CHILD_ENV)
    lines: list[str] = []
    reader = threading.Thread(target=lambda: lines.extend(proc.stdout or []), daemon=True)
    reader.start()
    done = None
    if samples is not None:
        try:
            import psutil

            child = psutil.Process(proc.pid)
        except ImportError:
            child = None
        while child is not None:
            pid, status, usage = os.wait4(proc.pid, os.WNOHANG)
            if pid:
                done = (pid, status, usage)
                break
            try:
                samples.append(child.memory_info().rss / 1e6)
            except psutil.Error:
                pass
            threading.Event().wait(0.2)
    _, status, usage = done if done is not None else os.wait4(proc.pid, 0)
    proc.returncode = status
    wall = time.perf_counter() - start
    reader.join(timeout=10)
    if status != 0:
        raise SystemExit(f"child failed ({status}): {' '.join(args)}")
    return wall, usage.ru_maxrss / 1024.0, lines[-1].strip() if lines else ""


def recording_throughput(rows: int, tmp: Path) -> tuple[float, int, int]:
    """Readings/s the Recorder writes from pipeline-sized frames of 1,000; rows written back."""
    from monitor.config import load_config
    from monitor.model import Frame
    from monitor.recording import Recorder, RecordingOptions

    rec = Recorder(tmp / "rec", load_config(None), source_name="bench", options=RecordingOptions(split="none"))
    rng = np.random.default_rng(1)
    frames = []
    n = 1000
    for a in range(0, rows, n):
        i = np.arange(a, a + n)
        ne = 5e16 * (1 + 0.02 * rng.standard_normal(n))
        te = np.where(i % 20 == 0, 3.0, np.nan)
        vals = {"ne": ne, "Te": te}
        frames.append(Frame("bench", 1.7e9 + i * 1e-4, vals, seq=i, raw=vals))
    start = time.perf_counter()
    for f in frames:
        rec.on_frame(f)
    rec.close()
    elapsed = time.perf_counter() - start
    (csv,) = (tmp / "rec").glob("shot-*.csv")
    written = sum(1 for line in open(csv) if line[:1].isdigit())
    return rows / elapsed, written, rec.status().dropped


def pipeline_with_recorder(rows: int, tmp: Path, config_path: Path) -> tuple[float, float, int]:
    """The whole pipeline (derive, six limits) on a CSV source, with and without the recorder: readings/s."""
    from adapters.csv_file import CsvSource
    from monitor.config import load_config
    from monitor.recording import Recorder, RecordingOptions
    from monitor.session import Session, make_engine

    config = load_config(config_path)
    src_path = tmp / "src.csv"
    make_recording(src_path, rows, config_path)
    rates = []
    written = 0
    for with_recorder in (False, True):
        sinks = []
        if with_recorder:
            sinks.append(Recorder(tmp / f"rec2", config, source_name="bench", options=RecordingOptions(split="none")))
        session = Session(CsvSource(src_path, name="bench"), config, sinks, engine=make_engine(config), live=False)
        start = time.perf_counter()
        session.run()
        session.close()
        rates.append(rows / (time.perf_counter() - start))
        if with_recorder:
            (csv,) = (tmp / "rec2").glob("shot-*.csv")
            written = sum(1 for line in open(csv) if line[:1].isdigit())
    return rates[0], rates[1], written


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--big-rows", type=int, default=3_000_000, help="rows of the file for the RSS figure")
    args = ap.parse_args()
    py = sys.executable
    with tempfile.TemporaryDirectory() as d:
        tmp = Path(d)
        cfg = tmp / "six.toml"
        cfg.write_text(SIX_LIMITS)
        path = tmp / "million.csv"
        gen = make_recording(path, args.rows, cfg)
        size = path.stat().st_size
        print(f"recording of {args.rows} rows: {size / 1e6:.1f} MB, written in {gen:.2f} s "
              f"({args.rows / gen:,.0f} rows/s by the recorder's formatter)")
        warm = tmp / "warm.csv"
        warm.write_text("t,ne,Te\n0,1e16,3\n")
        timed([py, "-m", "monitor", "replay", str(warm), "--config", str(cfg), "--headless", "--json", "--quiet"])
        t0 = time.perf_counter()
        a = np.loadtxt(path, delimiter=",", comments="#", skiprows=1)
        floor_in = time.perf_counter() - t0
        assert a.shape[0] == args.rows
        del a
        floor_proc, floor_rss, _ = timed([py, "-c", "import numpy, sys; a = numpy.loadtxt(sys.argv[1], "
                                          "delimiter=',', comments='#', skiprows=1); print(a.shape[0])", str(path)])
        replay, replay_rss, last = timed([py, "-m", "monitor", "replay", str(path), "--config", str(cfg),
                                          "--headless", "--json", "--quiet", "--speed", "max"])
        import json
        summary = json.loads(last)
        assert summary["accepted"] == args.rows, summary
        print(f"numpy.loadtxt in-process:          {floor_in:6.2f} s ({args.rows / floor_in:,.0f} rows/s)")
        print(f"numpy.loadtxt as a whole process:  {floor_proc:6.2f} s, peak RSS {floor_rss:.0f} MB")
        print(f"regime replay --speed max (process, derive + six limits + alarms): {replay:6.2f} s, "
              f"peak RSS {replay_rss:.0f} MB, {summary['alarm_events']} alarm events")
        print(f"RATIO replay / loadtxt (both whole processes): {replay / floor_proc:.2f}  (target <= 2)")
        print(f"RATIO replay / loadtxt in-process:             {replay / floor_in:.2f}")
        rate, written, dropped = recording_throughput(args.rows, tmp)
        print(f"Recorder alone, frames of 1,000: {rate:,.0f} readings/s; written {written} of {args.rows}, "
              f"dropped {dropped}  (target 200,000/s, zero loss)")
        n2 = min(args.rows, 400_000)
        bare, with_rec, written2 = pipeline_with_recorder(n2, tmp, cfg)
        print(f"pipeline + six limits on {n2} readings: {bare:,.0f} readings/s without the recorder, "
              f"{with_rec:,.0f}/s with it; written {written2} of {n2}")
        if args.big_rows:
            big = tmp / "big.csv"
            make_recording(big, args.big_rows, cfg)
            bsize = big.stat().st_size
            rss: list[float] = []
            big_t, big_rss, last = timed([py, "-m", "monitor", "replay", str(big), "--config", str(cfg),
                                          "--headless", "--json", "--quiet", "--speed", "max"], rss)
            quarters = [rss[int(q * (len(rss) - 1))] for q in (0.25, 0.5, 0.75, 1.0)] if rss else []
            growth = (big_rss - replay_rss) / max(bsize - size, 1)
            print(f"RSS: {size / 1e6:.0f} MB file -> {replay_rss:.0f} MB peak; {bsize / 1e6:.0f} MB file -> "
                  f"{big_rss:.0f} MB peak ({big_t:.1f} s); RSS during the {bsize / 1e6:.0f} MB replay at 1/4, 1/2, "
                  f"3/4, end: {', '.join(f'{x:.0f}' for x in quarters)} MB")
            print(f"RSS for a 1 GB file, extrapolated (not measured) linearly from the two peaks: "
                  f"{big_rss + growth * (1e9 - bsize):.0f} MB  (target < 300 MB)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
