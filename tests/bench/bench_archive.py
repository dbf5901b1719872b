"""Benchmark of the shot archive, ratios measured side by side in one run: `python tests/bench/bench_archive.py`.

1. Per-core catalogue build (rows/s) against numpy.loadtxt merely parsing the same files (target >= 1.0x),
   with the CSV readers measured alone (the recording's own block reader, pandas' C engine) for the choice.
2. Two workers against one on generated shots of 30 s at 1 kHz (target >= 1.7x).
3. The Dask path (a LocalCluster of two worker processes, already started) against the process pool of two
   (target: within 15 %).
4. Re-cataloguing an unchanged archive of 1,000 shots against merely listing its directory.

Options: --shots N (default 200) for 2 and 3, --small N (default 1000) for 4, --keep DIR to reuse files,
--parts 1,2,3,4 to choose the measurements.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests" / "archive"))

from make_shots import write_shot  # noqa: E402

from monitor.archive import catalogue  # noqa: E402
from monitor.archive.build import build  # noqa: E402


def _settle(folder: Path) -> None:
    old = time.time() - 600
    for f in folder.rglob("*.csv"):
        os.utime(f, (old, old))


def _fresh(folder: Path) -> None:
    for name in (catalogue.CATALOGUE,):
        p = folder / name
        if p.exists():
            p.unlink()


def _timed(fn, repeat: int = 1) -> float:  # type: ignore[no-untyped-def]
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def make(folder: Path, count: int, seconds: float, rate: float) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for n in range(1, count + 1):
        p = folder / f"shot-{n:04d}.csv"
        paths.append(p if p.exists() else write_shot(folder, n, seconds=seconds, rate=rate))
    _settle(folder)
    return paths


def per_core(folder: Path) -> None:
    from adapters.csv_file import CsvSource

    files = sorted(folder.glob("*.csv"))
    rows = sum(len(np.loadtxt(f, delimiter=",", comments="#", skiprows=1)) for f in files[:1]) * len(files)
    t_loadtxt = _timed(lambda: [np.loadtxt(f, delimiter=",", comments="#", skiprows=1) for f in files], 2)

    def block_reader() -> None:
        for f in files:
            src = CsvSource(f)
            src.open()
            while True:
                polled = src.poll(0)
                if not polled.batches:
                    break
            src.close()

    t_blocks = _timed(block_reader, 2)
    try:
        import pandas as pd

        t_pandas: float | None = _timed(lambda: [pd.read_csv(f, comment="#", dtype=np.float64, engine="c")
                                                 for f in files], 2)
    except ImportError:
        t_pandas = None

    def catalogue_build() -> None:
        _fresh(folder)
        build(folder, workers=1)

    t_build = _timed(catalogue_build, 2)
    print(f"[1] {len(files)} shots, {rows} rows, one core")
    print(f"    numpy.loadtxt            {rows / t_loadtxt:12,.0f} rows/s")
    print(f"    recording block reader   {rows / t_blocks:12,.0f} rows/s  = {t_loadtxt / t_blocks:.2f}x loadtxt")
    if t_pandas is not None:
        print(f"    pandas read_csv (C)      {rows / t_pandas:12,.0f} rows/s  = {t_loadtxt / t_pandas:.2f}x loadtxt")
    print(f"    catalogue build          {rows / t_build:12,.0f} rows/s  = {t_loadtxt / t_build:.2f}x loadtxt "
          f"(target >= 1.0x)")
    _profile_one(files[0])


def _profile_one(path: Path) -> None:
    """Where one shot's summary time goes (cProfile, cumulative), to say why the build costs what it does."""
    import cProfile
    import pstats

    from monitor.archive.summary import summarise

    prof = cProfile.Profile()
    prof.enable()
    for _ in range(3):
        summarise(str(path))
    prof.disable()
    stats = pstats.Stats(prof)
    total = max(stats.total_tt, 1e-9)  # type: ignore[attr-defined]
    wanted = {("csv_blocks.py", "_parse"): "CSV parse (loadtxt in blocks)",
              ("pipeline.py", "process_parts"): "pipeline.process_parts (align ... rolling)",
              ("pipeline.py", "_derive_frame"): "pipeline derive (physics, uncertainties)",
              ("rolling.py", "add"): "pipeline rolling statistics (for screens)",
              ("build.py", "_verdicts"): "report: criteria on 200 samples",
              ("summary.py", "limit_summary"): "report: limits and excursions",
              ("summary.py", "quantity_stats"): "report: quantity statistics"}
    print("    share of one shot's summary time (cProfile, cumulative; the parts overlap):")
    found: dict[str, float] = {}
    for (file, _line, func), (_cc, _nc, _tt, ct, _callers) in stats.stats.items():  # type: ignore[attr-defined]
        for (tail, name), label in wanted.items():
            if func == name and file.endswith(tail):
                found[label] = found.get(label, 0.0) + ct
    for label in wanted.values():
        if label in found:
            print(f"      {label:<46}{found[label] / total:6.0%}")


def workers(folder: Path) -> tuple[float, float]:
    def run(n: int) -> float:
        _fresh(folder)
        return _timed(lambda: build(folder, workers=n))

    one, two = run(1), run(2)
    files = len(list(folder.glob("*.csv")))
    print(f"[2] {files} shots of 30 s at 1 kHz: one worker {one:.2f} s, two workers {two:.2f} s "
          f"= {one / two:.2f}x (target >= 1.7x; {os.cpu_count()} cores)")
    return one, two


def dask_vs_pool(folder: Path, pool_s: float) -> None:
    try:
        from distributed import Client
    except ImportError:
        print("[3] skipped: distributed is not installed (pip install 'regime[cluster]')")
        return
    from monitor.archive.cluster import local_cluster

    with local_cluster(2) as cluster:          # the cluster `--scheduler local` starts
        _fresh(folder)
        cold = _timed(lambda: build(folder, workers=2, scheduler=cluster.scheduler_address))
        with Client(cluster.scheduler_address) as client:      # a long-lived cluster has imported the tool
            client.run(lambda: __import__("monitor.archive.summary"))
        _fresh(folder)
        warm = _timed(lambda: build(folder, workers=2, scheduler=cluster.scheduler_address))
    print(f"[3] Dask (LocalCluster, 2 worker processes, started beforehand) vs process pool of 2 ({pool_s:.2f} s):"
          f" first build {cold:.2f} s = {cold / pool_s:.2f}x the pool's time (workers import the tool), next "
          f"build {warm:.2f} s = {warm / pool_s:.2f}x (target within 1.15x)")


def unchanged(folder: Path, count: int) -> None:
    make(folder, count, seconds=1.0, rate=100.0)
    _fresh(folder)
    build(folder, workers=os.cpu_count() or 1)

    def listing() -> None:
        for dirpath, _dirs, names in os.walk(folder):
            for n in names:
                os.stat(os.path.join(dirpath, n))

    t_list = _timed(listing, 3)
    t_again = _timed(lambda: build(folder, workers=1), 3)
    print(f"[4] unchanged archive of {count} shots: re-catalogue {t_again * 1000:.0f} ms, listing the directory "
          f"(walk + stat) {t_list * 1000:.1f} ms = {t_again / t_list:.1f}x the listing (target: under 1 s)")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--shots", type=int, default=200)
    ap.add_argument("--small", type=int, default=1000)
    ap.add_argument("--keep", help="reuse generated files in this folder")
    ap.add_argument("--parts", default="1,2,3,4", help="which measurements, e.g. 2,3")
    args = ap.parse_args()
    base = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="bench-archive-"))
    print(f"(load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores at the start: other work on the "
          f"machine moves every ratio)")
    try:
        big = base / "big"
        t0 = time.perf_counter()
        make(big, args.shots, seconds=30.0, rate=1000.0)
        print(f"(generated {args.shots} shots of 30 s at 1 kHz in {time.perf_counter() - t0:.1f} s)")
        sample = base / "sample"
        if not sample.exists():
            sample.mkdir()
            for f in sorted(big.glob("*.csv"))[:10]:
                shutil.copy(f, sample / f.name)
            _settle(sample)
        parts = {p.strip() for p in args.parts.split(",")}
        if "1" in parts:
            per_core(sample)
        if parts & {"2", "3"}:
            _one, two = workers(big)
            if "3" in parts:
                dask_vs_pool(big, two)
        if "4" in parts:
            unchanged(base / "small", args.small)
        print(f"(load average {os.getloadavg()[0]:.1f} at the end)")
    finally:
        if not args.keep:
            shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    main()
