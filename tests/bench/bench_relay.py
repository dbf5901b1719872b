"""Relay benchmark: 20 consoles on one relay while the source delivers 100,000 readings/s; every console's count against the owner's, the relay's CPU cost to the owner.

Run: python tests/bench/bench_relay.py [--consoles 20] [--rate 100000] [--seconds 5] [--rounds 3] [--batch 5000]

Side by side in one run, alternating: the same owner run (the simulated demo
discharge paced at --rate readings/s for --seconds, the demo envelope and its
alarm engine, handed out in batches of --batch readings on the wall clock) without a relay, and with a relay on ipc:// and --consoles console
processes attached. Printed: the owner's CPU seconds (this process, every thread,
ZeroMQ's I/O thread included) of each, their ratio, and the extra CPU as a share of
one core (extra CPU seconds / wall seconds of the run); the relay thread's own CPU
(thread_time) as a share of one core, which a shared machine disturbs less; each console's received
and missed readings against the owner's accepted count.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from adapters.base import Polled, SourceStatus  # noqa: E402
from adapters.simulated import SimSource  # noqa: E402
from monitor.commands.demo import envelope_path  # noqa: E402
from monitor.config import load_config  # noqa: E402
from monitor.relay.publisher import RelayPublisher  # noqa: E402
from monitor.session import Session, make_engine  # noqa: E402

CONSOLE = """
import json, sys, time
from adapters.base import LinkState
from monitor.relay.console import RelayConsole
c = RelayConsole(sys.argv[1]); c.open()
end = time.monotonic() + float(sys.argv[2])
while time.monotonic() < end:
    c.poll(0.1)
    s = c.owner_status
    if s is not None and s.state is LinkState.ENDED and c.received:
        break
print(json.dumps({**c.summary(), "cpu": time.process_time()}), flush=True)
"""


class Paced:
    """The simulated source in batches of a fixed size, each handed out when the wall clock reaches it
    (--rate readings/s): both runs process the very same batches, so their CPU compares the relay alone
    (a source paced by polls would batch more when the owner is busier, which costs less per reading)."""

    def __init__(self, rate: float, seconds: float, batch: int) -> None:
        self.inner = SimSource("demo", rate=rate, speed=None, duration=seconds, loop=True, chunk=batch)
        self.name = self.inner.name
        self.period = batch / rate
        self.k = 0
        self.start = 0.0

    def open(self) -> None:
        self.inner.open()
        self.start = time.monotonic()

    def status(self) -> SourceStatus:
        return self.inner.status()

    def poll(self, timeout: float) -> Polled:
        due = self.start + self.k * self.period
        wait = due - time.monotonic()
        if wait > 0:
            time.sleep(min(timeout, wait))
            if time.monotonic() < due:
                return Polled(status=self.inner.status())
        self.k += 1
        return self.inner.poll(timeout)

    def close(self) -> None:
        self.inner.close()


def owner_run(rate: float, seconds: float, endpoint: str | None, consoles: int, batch: int) -> dict[str, float | int]:
    config = load_config(envelope_path())
    source = Paced(rate, seconds, batch)
    session = Session(source, config, engine=make_engine(config), live=True)
    procs: list[subprocess.Popen[str]] = []
    pub = None
    if endpoint is not None:
        pub = RelayPublisher(session, endpoint)
        env = dict(os.environ, PYTHONPATH=str(ROOT))
        procs = [subprocess.Popen([sys.executable, "-c", CONSOLE, "relay+" + pub.endpoint, str(seconds + 60)],
                                  stdout=subprocess.PIPE, text=True, env=env) for _ in range(consoles)]
        deadline = time.monotonic() + 60
        while pub.subscribers < consoles and time.monotonic() < deadline:
            time.sleep(0.05)
        assert pub.subscribers >= consoles, f"only {pub.subscribers} consoles subscribed"
    cpu0, wall0 = time.process_time(), time.monotonic()
    session.open()
    session.run()
    session.close()          # the relay sends what is queued and a last state
    cpu, wall = time.process_time() - cpu0, time.monotonic() - wall0
    out: dict[str, float | int] = {"cpu": cpu, "wall": wall, "accepted": int(session.summary()["accepted"]),
                                   "relay_thread": 0.0 if pub is None else pub.cpu}
    if procs:
        results = [json.loads(p.communicate(timeout=120)[0]) for p in procs]
        odd = [r for r in results if not (r["received"] == out["accepted"] and r["missed"] == 0)]
        out["example"] = ("" if not odd else " differing: " + json.dumps(odd[0]))
        out["consoles_equal"] = sum(r["received"] == out["accepted"] and r["missed"] == 0 for r in results)
        out["missed_max"] = max(r["missed"] for r in results)
        out["console_cpu_mean"] = sum(r["cpu"] for r in results) / len(results)
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--consoles", type=int, default=20)
    ap.add_argument("--rate", type=float, default=100_000.0)
    ap.add_argument("--seconds", type=float, default=5.0)
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--batch", type=int, default=5000, help="readings per batch (default 5000: 20 batches/s)")
    args = ap.parse_args()
    print(f"owner: sim:demo at {args.rate:,.0f} readings/s in batches of {args.batch:,} for {args.seconds:g} s, "
          "demo envelope; "
          f"{args.consoles} console processes; {os.cpu_count()} cores")
    plain: list[dict[str, float | int]] = []
    relayed: list[dict[str, float | int]] = []
    with tempfile.TemporaryDirectory() as tmp:
        for k in range(args.rounds):
            plain.append(owner_run(args.rate, args.seconds, None, 0, args.batch))
            relayed.append(owner_run(args.rate, args.seconds, f"ipc://{tmp}/relay{k}", args.consoles, args.batch))
            a, b = plain[-1], relayed[-1]
            print(f"round {k + 1}: without relay cpu {a['cpu']:.2f} s wall {a['wall']:.2f} s accepted {a['accepted']:,}; "
                  f"with relay cpu {b['cpu']:.2f} s wall {b['wall']:.2f} s accepted {b['accepted']:,}; "
                  f"consoles equal to the owner {b['consoles_equal']}/{args.consoles}, most missed {b['missed_max']}, "
                  f"console cpu mean {b['console_cpu_mean']:.2f} s{b['example']}")
    cpu_a = min(float(r["cpu"]) for r in plain)
    cpu_b = min(float(r["cpu"]) for r in relayed)
    wall = min(float(r["wall"]) for r in relayed)
    med_a = sorted(float(r["cpu"]) for r in plain)[len(plain) // 2]
    med_b = sorted(float(r["cpu"]) for r in relayed)[len(relayed) // 2]
    print(f"owner CPU with relay / without: {cpu_b / cpu_a:.3f} (best of {args.rounds} each), "
          f"{med_b / med_a:.3f} (medians); extra {(med_b - med_a) / wall:.3f} of one core (medians)")
    print(f"relay's extra CPU: {(cpu_b - cpu_a) / wall:.3f} of one core over the run (process CPU, best of each)")
    thread = sorted(float(r["relay_thread"]) / float(r["wall"]) for r in relayed)
    print(f"relay thread's own CPU (encode + send): {thread[len(thread) // 2]:.3f} of one core (median of rounds)")
    print(f"every console's count equal to the owner's in every round: "
          f"{all(r['consoles_equal'] == args.consoles for r in relayed)}")


if __name__ == "__main__":
    main()
