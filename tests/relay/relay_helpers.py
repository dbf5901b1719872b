"""Helpers of the relay tests: an owner session on the simulated demo, waiting on a condition with a deadline."""

from __future__ import annotations

import time
from typing import Callable, Iterable

from adapters.simulated import SimSource
from monitor.commands.demo import envelope_path
from monitor.config import load_config
from monitor.relay.console import RelayConsole
from monitor.session import Session, make_engine

DEADLINE = 10.0


def demo_session(duration: float = 30.0, rate: float = 500.0, chunk: int | None = None) -> Session:
    """The demo discharge at ``rate`` readings/s as fast as possible (30 s of it raises ne_high and the
    latched over_cutoff), with the demo envelope and its engine."""
    config = load_config(envelope_path())
    source = SimSource("demo", rate=rate, speed=None, duration=duration, chunk=chunk, epoch=1000.0)
    return Session(source, config, engine=make_engine(config), live=False)


def until(cond: Callable[[], bool], consoles: Iterable[RelayConsole] = (), deadline: float = DEADLINE) -> bool:
    """Poll ``consoles`` until ``cond()`` holds or the deadline passes; whether it held."""
    end = time.monotonic() + deadline
    consoles = list(consoles)
    while time.monotonic() < end:
        for c in consoles:
            c.poll(0.01)
        if not consoles:
            time.sleep(0.01)
        if cond():
            return True
    return cond()


def accepted(session: Session) -> int:
    return int(session.summary()["accepted"])
