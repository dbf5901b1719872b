"""Helpers of the screen's tests (a uniquely named module, so it never collides with another folder's conftest): a hand-built snapshot, a fixed clock, the demo session and deadline polls."""

from __future__ import annotations

import io
import time
from typing import Any, Callable

import numpy as np
from rich.console import Console

from adapters.base import LinkState, SourceStatus
from monitor.alarms.events import AlarmState, Priority
from monitor.snapshot import AlarmView, ReplayPosition, Snapshot, SourceCounts, Stats
from monitor.commands.demo import envelope_path
from monitor.config import load_config
from monitor.tui.feed import EventTap, SessionFeed

FIXED_NOW = 1_800_000_000.0   # the injected wall clock of the frozen scenes (s since the epoch)


def built_snapshot(*, alarms: tuple[AlarmView, ...] = (), stale: bool = False, replay: bool = False,
                   recording: str | None = None, state: LinkState = LinkState.CONNECTED) -> Snapshot:
    """A steady argon discharge, written by hand: ne 2e17 m^-3, Te 3 eV, p0 2 Pa, 30 cm device."""
    rng = np.random.default_rng(7)
    n = 200
    t = np.linspace(10.0, 30.0, n)
    ne = 2.0e17 * (1.0 + 0.3 * np.sin(t / 3.0)) * (1 + 0.01 * rng.standard_normal(n))
    te = 3.0 + 0.3 * np.cos(t / 4.0)
    latest = {
        "ne": (float(ne[-1]), float(ne[-1]) * 0.04), "Te": (float(te[-1]), 0.3), "p0": (2.0, 0.1),
        "debye_length": (2.9e-5, 1.5e-6), "debye_number": (2.0e4, 3e3), "debye_ratio": (1.0e4, 600.0),
        "electron_plasma_frequency": (2.5e10, 5e8), "coulomb_logarithm": (10.6, 0.2),
        "electron_ion_collision_frequency": (4.0e6, 4e5), "electron_neutral_collision_frequency": (5.6e7, 3e6),
        "electron_mean_free_path": (0.017, 0.002), "knudsen_number": (0.057, 0.006),
        "neutral_density": (4.8e20, 2e19), "ionization_fraction": (4.2e-4, 3e-5),
        "collectivity": (420.0, 30.0), "cutoff_density": (7.4e16, None), "cutoff_ratio": (2.7, 0.1),
        "electron_mean_speed": (1.16e6, 5e4),
    }
    wall = FIXED_NOW - (10.0 if stale else 0.05)
    counts = {"sim:steady": SourceCounts(accepted=20_000, rejected={"not_finite": 3}, lost=0, rate=1000.0,
                                         last_data_time=30.0, last_wall_time=wall)}
    sources = {"sim:steady": SourceStatus("sim:steady", state)}
    return Snapshot(
        data_time=30.0, wall_time=FIXED_NOW, latest=latest,
        stats={"ne": Stats(n, float(ne.mean()), float(ne.std()), float(ne.min()), float(ne.max()), 1e15)},
        trail_t=t, trail={"ne": ne, "Te": te}, warnings=(), sources=sources, counts=counts,
        alarms=alarms, discharge_on=True, live=not replay,
        replay=ReplayPosition(time=22.5, start=0.0, end=60.0, speed=1.0, paused=True) if replay else None,
        recording=recording,
    )


def alarm(name: str = "ne_high", state: AlarmState = AlarmState.UNACKNOWLEDGED,
          priority: Priority = Priority.HIGH, **kw: object) -> AlarmView:
    base = dict(alarm=name, state=state, priority=priority, kind="limit", quantity="ne", value=2.6e17,
                limit=2.5e17, since=25.0, description="density above the envelope")
    base.update(kw)
    return AlarmView(**base)  # type: ignore[arg-type]


# -- real sessions for the key and flow tests -------------------------------------------------------



def demo_config() -> Any:
    return load_config(envelope_path())


def demo_session(spec: str = "sim:demo?seed=3&speed=max&loop=0", *, config: Any = None,
                 sinks: tuple[Any, ...] = (), live: bool = True, wall: Callable[[], float] = time.time):
    """A real Session on a real source with the demo envelope, and the tap the screen reads."""
    from monitor.session import Session, make_engine
    from monitor.sources import open_source
    config = config or demo_config()
    tap = EventTap()
    session = Session(open_source(spec, config), config, sinks=[tap, *sinks], engine=make_engine(config),
                      live=live, wall=wall)
    return session, tap


def state_of(session: Any, alarm: str) -> Any:
    for v in session.snapshot().alarms:
        if v.alarm == alarm:
            return v.state
    return None


def step_until(session: Any, condition: Callable[[], bool], timeout: float = 20.0) -> None:
    """Step the session in this thread until ``condition`` holds (deadline, no sleeping)."""
    deadline = time.monotonic() + timeout
    while not condition():
        assert time.monotonic() < deadline, "condition not reached before the deadline"
        assert session.step(0.05), "the source ended before the condition was reached"


async def wait_for(pilot: Any, condition: Callable[[], bool], timeout: float = 20.0) -> None:
    """Let the app run until ``condition`` holds (polled with a deadline)."""
    deadline = time.monotonic() + timeout
    while not condition():
        assert time.monotonic() < deadline, "condition not reached before the deadline"
        await pilot.pause(0.05)


def text_of(widget: Any) -> str:
    """What a widget draws, as plain text at its current width."""
    console = Console(width=max(20, widget.size.width or 100), file=io.StringIO(), record=True,
                      color_system=None, legacy_windows=False)
    console.print(widget.render())
    return console.export_text()


def screen_feed(session: Any, tap: EventTap) -> SessionFeed:
    return SessionFeed(session, tap)
