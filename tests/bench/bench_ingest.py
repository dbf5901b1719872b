"""Ingest benchmark: publisher process -> adapter -> pipeline end, against a bare pyzmq loop; serial via a pty; RSS.

Run: python tests/bench/bench_ingest.py [--quick] [--rss-seconds S]

Sections, all measured side by side in this one run:
 1. transport floor vs our path: a publisher process sends pre-encoded messages
    as fast as it can (unlimited queues, so nothing is dropped), timed from its
    first send to the receiver's last reading (one machine clock); the receiver is
    either a bare pyzmq loop (recv + json.loads / np.frombuffer) or ZmqSource ->
    Pipeline.process (map, validate, align, derive, rolling statistics).
    Printed: readings/s of each and their ratio; for JSON single readings and
    binary batches of 1,000.
 2. sustained: `regime simulate` paced at 1,000,000 readings/s (binary, 1,000
    per message) and 30,000 readings/s (JSON, one per message) for 3 s, our
    default queues; zero loss checked by seq (the pipeline's lost counter and
    the received seq set).
 3. serial: a writer process feeds 40-byte lines at 2,300 lines/s (921,600
    baud with 8N1 framing is 92,160 bytes/s) into a pty; SerialSource ->
    Pipeline; CPU share of this process; zero loss by seq. Also the most lines/s
    our bulk reader and a byte-at-a-time pyserial readline() take from a pty
    that is filled as fast as possible.
 4. memory: `regime simulate` at 10 kHz (JSON) for --rss-seconds (default 60)
    through ZmqSource -> Pipeline in a fresh process; resident set size at start,
    after a 5 s warm-up and at the end.
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import socket
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import psutil
import zmq

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from adapters.serial_line import SerialSource  # noqa: E402
from adapters.zmq_stream import ZmqSource  # noqa: E402
from monitor.config import Config  # noqa: E402
from monitor.model import Device  # noqa: E402
from monitor.pipeline import Pipeline  # noqa: E402

PY = sys.executable
CONFIG = Config(device=Device(length=0.30, wave_frequency=2.45e9))


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


# ----------------------------------------------------------------------------- the blast publisher (child process)

def blast_publisher(endpoint: str, fmt: str, n_messages: int, batch: int) -> None:
    """Child: pre-encode, wait for one subscriber, send everything as fast as possible, then linger."""
    from adapters.simulated import generate_samples
    from monitor.commands.simulate import encode_binary, encode_json

    ctx = zmq.Context()
    pub = ctx.socket(zmq.XPUB)
    pub.setsockopt(zmq.SNDHWM, 0)
    pub.setsockopt(zmq.XPUB_VERBOSE, 1)
    pub.bind(endpoint)
    if fmt == "json":
        b = generate_samples("steady", 0, 1000.0, 0, n_messages, loop=True)
        msgs: list = [[f] for f in encode_json(b)]
    else:
        b = generate_samples("steady", 0, 1_000_000.0, 0, n_messages * batch, loop=True)
        msgs = [list(encode_binary(_part(b, i * batch, (i + 1) * batch))) for i in range(n_messages)]
    print("ready", flush=True)
    pub.recv()                                    # the subscription
    time.sleep(0.2)                               # let the receiver enter its loop (pacing, not sync)
    t_start = time.time()
    for m in msgs:
        pub.send_multipart(m, copy=False)
    print(f"start {t_start!r}", flush=True)       # the receiver times from here (same machine clock)
    pub.setsockopt(zmq.LINGER, 60_000)
    pub.close()
    ctx.term()


def _part(b, lo: int, hi: int):
    from adapters.batch import Batch

    return Batch(source=b.source, t=b.t[lo:hi], columns={k: v[lo:hi] for k, v in b.columns.items()}, seq=b.seq[lo:hi])


def _spawn_blast(endpoint: str, fmt: str, n: int, batch: int) -> subprocess.Popen:
    p = subprocess.Popen([PY, __file__, "--child-blast", endpoint, fmt, str(n), str(batch)],
                         stdout=subprocess.PIPE, text=True)
    assert p.stdout is not None and p.stdout.readline().strip() == "ready"
    return p


def bare_loop(fmt: str, n: int, batch: int) -> float:
    ep = f"tcp://127.0.0.1:{free_port()}"
    proc = _spawn_blast(ep, fmt, n, batch)
    ctx = zmq.Context()
    sub = ctx.socket(zmq.SUB)
    sub.setsockopt(zmq.RCVHWM, 0)
    sub.setsockopt(zmq.SUBSCRIBE, b"")
    sub.connect(ep)
    got = 0
    readings = 0
    while got < n:
        parts = sub.recv_multipart()
        if fmt == "json":
            json.loads(parts[0])
            readings += 1
        else:
            h = json.loads(parts[0])
            np.frombuffer(parts[1], dtype="<f8")
            readings += h["n"]
        got += 1
    t_end = time.time()
    sub.close(0)
    ctx.term()
    return readings / (t_end - _publisher_start(proc))


def _publisher_start(proc: subprocess.Popen) -> float:
    assert proc.stdout is not None
    line = proc.stdout.readline().split()
    proc.wait(30)
    return float(line[1])


def our_path(fmt: str, n: int, batch: int, with_pipeline: bool = True) -> tuple[float, int, int, float]:
    ep = f"tcp://127.0.0.1:{free_port()}"
    proc = _spawn_blast(ep, fmt, n, batch)
    src = ZmqSource(ep, rcvhwm=0, context=zmq.Context())
    src.open()
    pipe = Pipeline(CONFIG)
    total = n * (1 if fmt == "json" else batch)
    readings = 0
    cpu0 = time.process_time()                    # waiting costs no CPU; only handling does
    while readings < total:
        p = src.poll(0.5)
        for b in p.batches:
            if with_pipeline:
                pipe.process(b)
            readings += len(b)
        pipe.reject(p.rejections)
    t_end = time.time()
    per_cpu = readings / max(time.process_time() - cpu0, 1e-9)
    src.close()
    rate = readings / (t_end - _publisher_start(proc))
    if not with_pipeline:
        return rate, readings, 0, per_cpu
    c = pipe.counts()[ep]
    return rate, c.accepted, c.lost, per_cpu


# ----------------------------------------------------------------------------- sustained, via `regime simulate`

def sustained(fmt: str, rate: float, seconds: float, batch: int) -> dict[str, float]:
    ep = f"tcp://127.0.0.1:{free_port()}"
    n = int(rate * seconds)
    cmd = [PY, "-m", "monitor", "simulate", ep, "--scenario", "steady", "--rate", str(rate), "--count", str(n),
           "--format", fmt, "--batch", str(batch), "--wait-subscribers", "1"]
    proc = subprocess.Popen(cmd, cwd=ROOT, stderr=subprocess.PIPE, text=True)
    src = ZmqSource(ep)
    src.open()
    pipe = Pipeline(CONFIG)
    readings, seqs = 0, []
    t_first = t_last = 0.0
    deadline = time.monotonic() + seconds + 30
    cpu0 = time.process_time()
    while readings < n and time.monotonic() < deadline:
        p = src.poll(0.2)
        for b in p.batches:
            if readings == 0:
                t_first = time.perf_counter()
            pipe.process(b)
            readings += len(b)
            seqs.append(b.seq)
            t_last = time.perf_counter()
        pipe.reject(p.rejections)
    cpu = time.process_time() - cpu0
    src.close()
    _, err = proc.communicate(timeout=30)
    took = float(err.strip().rsplit(" in ", 1)[1].split()[0]) if " in " in err else float("nan")
    c = pipe.counts()[ep]
    seq = np.concatenate(seqs) if seqs else np.empty(0, dtype=np.int64)
    missing = n - len(np.unique(seq))
    return {"sent": n, "received": readings, "accepted": c.accepted, "lost_counted": c.lost, "missing_by_seq": missing,
            "seconds": t_last - t_first, "rate": readings / max(t_last - t_first, 1e-9), "cpu_s": cpu,
            "pub_s": took}


# ----------------------------------------------------------------------------- serial through a pty

def pty_writer(master_fd: int, lines_per_s: float, seconds: float, blast_lines: int) -> None:
    """Child: write 40-byte lines, paced, or blast_lines as fast as the pty takes them."""
    def line(i: int) -> bytes:
        s = b"t=%.4f seq=%d ne=5.00e16 Te=3.00" % (i / 2300.0, i)
        return s + b" " * max(0, 39 - len(s)) + b"\n"

    if blast_lines:
        data = b"".join(line(i) for i in range(blast_lines))
        view = memoryview(data)
        while view:
            view = view[os.write(master_fd, view):]
        return
    n = int(lines_per_s * seconds)
    t0 = time.perf_counter()
    i = 0
    while i < n:
        due = min(n, int((time.perf_counter() - t0) * lines_per_s) + 1)
        if due > i:
            chunk = b"".join(line(j) for j in range(i, due))
            view = memoryview(chunk)
            while view:
                view = view[os.write(master_fd, view):]
            i = due
        time.sleep(0.005)


def _pty() -> tuple[int, str]:
    master, slave = os.openpty()
    name = os.ttyname(slave)
    os.close(slave)
    return master, name


def serial_paced(seconds: float, with_pipeline: bool = True) -> dict[str, float]:
    master, name = _pty()
    src = SerialSource(name, baud=921600)
    src.open()
    assert src.connected.wait(5)
    pipe = Pipeline(CONFIG)
    n = int(2300 * seconds)
    proc = subprocess.Popen([PY, __file__, "--child-pty", str(master), "2300", str(seconds), "0"], pass_fds=(master,))
    readings, seqs, first = 0, [], 0
    ru0 = resource.getrusage(resource.RUSAGE_SELF)
    w0 = time.perf_counter()
    deadline = time.monotonic() + seconds + 20
    while readings < n and time.monotonic() < deadline:
        p = src.poll(0.1)
        for b in p.batches:
            if readings == 0:                     # measure from the first lines on (the writer starts up first)
                ru0, w0, first = resource.getrusage(resource.RUSAGE_SELF), time.perf_counter(), len(b)
            if with_pipeline:
                pipe.process(b)
            readings += len(b)
            seqs.append(b.seq)
        pipe.reject(p.rejections)
    ru1, w1 = resource.getrusage(resource.RUSAGE_SELF), time.perf_counter()
    proc.wait(10)
    src.close()
    os.close(master)
    cpu = (ru1.ru_utime - ru0.ru_utime) + (ru1.ru_stime - ru0.ru_stime)
    seq = np.concatenate(seqs) if seqs else np.empty(0, dtype=np.int64)
    return {"sent": n, "received": readings, "missing_by_seq": n - len(np.unique(seq)),
            "rejected": sum(sum(c.rejected.values()) for c in pipe.counts().values()),
            "wall_s": w1 - w0, "cpu_share": cpu / (w1 - w0), "lines_per_s": (readings - first) / (w1 - w0)}


def serial_max(n_lines: int, readline: bool) -> float:
    master, name = _pty()
    if readline:
        import serial

        port = serial.serial_for_url(name, baudrate=921600, timeout=1.0)
    else:
        src = SerialSource(name, baud=921600)
        src.open()
        assert src.connected.wait(5)
    proc = subprocess.Popen([PY, __file__, "--child-pty", str(master), "0", "0", str(n_lines)], pass_fds=(master,))
    got = 0
    t0 = time.perf_counter()
    if readline:
        while got < n_lines:
            if not port.readline():
                break
            got += 1
        port.close()
    else:
        while got < n_lines and time.perf_counter() - t0 < 60:
            got += sum(len(b) for b in src.poll(0.5).batches)
        src.close()
    dt = time.perf_counter() - t0
    proc.wait(30)
    os.close(master)
    return got / dt


# ----------------------------------------------------------------------------- memory

def rss_run(seconds: float) -> dict[str, object]:
    ep = f"tcp://127.0.0.1:{free_port()}"
    rate = 10_000.0
    cmd = [PY, "-m", "monitor", "simulate", ep, "--scenario", "steady", "--loop", "--rate", str(rate),
           "--count", str(int(rate * seconds)), "--format", "json", "--wait-subscribers", "1", "--quiet"]
    proc = subprocess.Popen(cmd, cwd=ROOT)
    src = ZmqSource(ep)
    src.open()
    pipe = Pipeline(CONFIG)
    me = psutil.Process()          # a fresh process: nothing from the other sections in the baseline
    rss_start = me.memory_info().rss
    rss_warm = None
    t0 = time.monotonic()
    readings = 0
    peak = rss_start
    n = int(rate * seconds)
    series: list[float] = []
    next_sample = t0
    max_lag = 0.0
    while readings < n and time.monotonic() - t0 < seconds + 30:
        p = src.poll(0.2)
        for b in p.batches:
            pipe.process(b)
            readings += len(b)
            max_lag = max(max_lag, time.time() - float(b.t[-1]))     # t is the publisher's clock at sending
        pipe.reject(p.rejections)
        now = time.monotonic()
        rss = me.memory_info().rss
        if rss_warm is None and now - t0 > 5.0:
            rss_warm = rss
        if now >= next_sample:
            series.append(round(rss / 2**20, 1))
            next_sample += 5.0
        peak = max(peak, rss)
    rss_end = me.memory_info().rss
    src.close()
    proc.wait(30)
    c = pipe.counts()[ep]
    return {"seconds": time.monotonic() - t0, "readings": readings, "lost": c.lost,
            "rss_start_MB": rss_start / 2**20, "rss_after_warmup_MB": (rss_warm or rss_end) / 2**20,
            "rss_end_MB": rss_end / 2**20, "rss_peak_MB": peak / 2**20,
            "growth_after_warmup_MB": (rss_end - (rss_warm or rss_end)) / 2**20, "series_MB": series,
            "max_lag_s": max_lag}


# ----------------------------------------------------------------------------- main

def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="smaller counts (a smoke run)")
    ap.add_argument("--rss-seconds", type=float, default=60.0)
    args = ap.parse_args()
    q = args.quick
    t_all = time.monotonic()
    print(f"# bench_ingest  python {sys.version.split()[0]}  pyzmq {zmq.__version__}  libzmq {zmq.zmq_version()}  "
          f"cores {os.cpu_count()}  load {os.getloadavg()[0]:.1f}")

    print("\n## 1. transport floor vs adapter + pipeline (publisher process, pre-encoded, unlimited queues)")
    n_json = 30_000 if q else 150_000
    n_bin = 500 if q else 3000
    print("(best of 2 interleaved runs each; 'per CPU-s' = readings per second of this process's CPU time,")
    print(" the capacity on a free core - this machine is shared, wall-clock rates vary with its load)")
    for fmt, n, batch in (("json", n_json, 1), ("binary", n_bin, 1000)):
        runs = [(bare_loop(fmt, n, batch), our_path(fmt, n, batch, with_pipeline=False), our_path(fmt, n, batch))
                for _ in range(2)]
        bare = max(r[0] for r in runs)
        adapter = max(r[1][0] for r in runs)
        adapter_cpu = max(r[1][3] for r in runs)
        full = max(r[2][0] for r in runs)
        full_cpu = max(r[2][3] for r in runs)
        acc = min(r[2][1] for r in runs)
        lost = max(r[2][2] for r in runs)
        label = "JSON single readings" if fmt == "json" else "binary batches x1000"
        print(f"{label}: bare pyzmq loop {bare:,.0f}/s | ZmqSource alone {adapter:,.0f}/s (ratio {adapter / bare:.2f}; "
              f"{adapter_cpu:,.0f} per CPU-s) | ZmqSource+Pipeline {full:,.0f}/s (ratio {full / bare:.3f}; "
              f"{full_cpu:,.0f} per CPU-s) | accepted {acc} of {n * batch} in each run, lost {lost}")
    print("\n## 2. sustained from `regime simulate` (paced), default queues, zero loss by seq")
    for fmt, rate, batch in (("binary", 1_000_000.0, 1000), ("json", 30_000.0, 1)):
        r = sustained(fmt, rate, 1.0 if q else 3.0, batch)
        print(f"{fmt:6s} target {rate:>9,.0f}/s: sent {r['sent']}, received {r['received']}, accepted {r['accepted']}, "
              f"lost (pipeline) {r['lost_counted']}, missing by seq {r['missing_by_seq']}, "
              f"publisher took {r['pub_s']:.2f} s ({r['sent'] / r['pub_s']:,.0f}/s); received over {r['seconds']:.2f} s "
              f"= {r['rate']:,.0f} readings/s; receiver CPU {r['cpu_s']:.2f} s "
              f"({r['received'] / max(r['cpu_s'], 1e-9):,.0f} readings per CPU-s)")

    print("\n## 3. serial line through a pty")
    for with_pipeline in (False, True):
        s = serial_paced(2.0 if q else 5.0, with_pipeline)
        what = "SerialSource reader thread + framer + parse" + (" + Pipeline" if with_pipeline else "")
        print(f"paced 2,300 lines/s of 40 B (921,600 baud): sent {s['sent']}, received {s['received']}, "
              f"missing by seq {s['missing_by_seq']}, rejected {s['rejected']}, {s['lines_per_s']:,.0f} lines/s, "
              f"CPU {100 * s['cpu_share']:.1f} % of one core ({what})")
    n_lines = 20_000 if q else 100_000
    bulk = serial_max(n_lines, readline=False)
    rl = serial_max(n_lines // 4, readline=True)
    print(f"pty filled as fast as possible: bulk read + framer + parse {bulk:,.0f} lines/s | "
          f"pyserial readline() {rl:,.0f} lines/s | ratio {bulk / rl:.1f}")

    print(f"\n## 4. resident memory, `regime simulate` JSON at 10 kHz for {args.rss_seconds:g} s -> ZmqSource -> Pipeline")
    out = subprocess.run([PY, __file__, "--child-rss", str(5.5 if q else args.rss_seconds)], capture_output=True,
                         text=True, timeout=(5.5 if q else args.rss_seconds) + 90)
    m = json.loads(out.stdout.strip().splitlines()[-1])
    print(f"{m['readings']} readings in {m['seconds']:.1f} s, lost {m['lost']}; RSS start {m['rss_start_MB']:.1f} MB, "
          f"after 5 s warm-up {m['rss_after_warmup_MB']:.1f} MB, end {m['rss_end_MB']:.1f} MB, "
          f"peak {m['rss_peak_MB']:.1f} MB; growth after warm-up {m['growth_after_warmup_MB']:+.1f} MB")
    print(f"RSS every 5 s (MB): {m['series_MB']}; largest receive lag {m['max_lag_s']:.2f} s "
          "(readings queued in ZeroMQ while this process waited for CPU)")
    print(f"\n# total bench time {time.monotonic() - t_all:.0f} s")


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "--child-blast":
        blast_publisher(sys.argv[2], sys.argv[3], int(sys.argv[4]), int(sys.argv[5]))
    elif len(sys.argv) > 1 and sys.argv[1] == "--child-rss":
        print(json.dumps(rss_run(float(sys.argv[2]))))
    elif len(sys.argv) > 1 and sys.argv[1] == "--child-pty":
        pty_writer(int(sys.argv[2]), float(sys.argv[3]), float(sys.argv[4]), int(sys.argv[5]))
    else:
        main()
