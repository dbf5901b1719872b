"""One run recipe for watch, replay and demo, headless or on the screen: build the session, run it, print the summary, choose the exit code."""

from __future__ import annotations

import sys
import threading
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable

from adapters.base import Source
from monitor.config import Config
from monitor.errors import EXIT_OK, EXIT_USAGE
from monitor.headless import (HeadlessPrinter, failed_run, final_summary, human_summary, install_signals,
                              restore_signals)
from monitor.outputs import Outputs
from monitor.session import Session, make_engine

if TYPE_CHECKING:
    from monitor.tui.settings import ScreenSettings

__all__ = ["RunPlan", "RelayOptions", "execute"]


@dataclass(frozen=True)
class RelayOptions:
    """``--relay ENDPOINT``; ``operator_keys`` (--operator-keys F) names the consoles that may act;
    ``curve`` is the owner's secret key file and the directory of the consoles' public keys."""

    endpoint: str
    operator_keys: str | None = None
    allow_remote: bool = False
    curve: tuple[str, str] | None = None


@dataclass(frozen=True)
class RunPlan:
    """What one run is: its source and config, its outputs, and how it is shown.

    ``command`` names the run in messages (``regime watch``). ``duration`` ends it after that many
    wall seconds, on the screen too. ``screen`` holds the screen's settings
    (monitor.tui.settings.ScreenSettings), None when headless. ``on_interval`` is called about once a
    second while headless (a replay's progress line); ``annotate`` adds to the summary before it is
    printed; ``finish`` may turn a clean end into another exit code (a replay's empty window)."""

    command: str
    source: Source
    config: Config
    outputs: Outputs
    live: bool
    headless: bool = False
    json: bool = False
    duration: float | None = None
    screen: ScreenSettings | None = None
    open_first: bool = False
    on_interval: Callable[[Session], None] | None = None
    annotate: Callable[[dict[str, Any]], None] | None = None
    finish: Callable[[], int] | None = None
    stop: threading.Event = field(default_factory=threading.Event)
    relay: RelayOptions | None = None            # --relay: republish the run for consoles and browsers


def execute(plan: RunPlan) -> int:
    """Run ``plan`` to its end and return the exit code: 3 when the source failed, 4 when the
    recording is incomplete (said on stderr), else what ``finish`` says, else 0."""
    session = Session(plan.source, plan.config, plan.outputs.sinks, engine=make_engine(plan.config),
                      live=plan.live, recorder=plan.outputs.recorder)
    if plan.relay is not None:
        _start_relay(session, plan.relay)
    if plan.headless:
        _headless(session, plan)
    else:
        refused = _screen(session, plan)
        if refused is not None:
            return refused
    summary, final = final_summary(session, plan.outputs.recorder)
    if plan.annotate is not None:
        plan.annotate(summary)
    if plan.headless:
        printer = _printer(session)
        if printer is not None:
            printer.summary(summary)
    else:
        print(human_summary(summary))
    _say_why_nothing(summary, plan.command)
    code = failed_run(session, final, plan.command)
    if code is not None:
        return code
    return plan.finish() if plan.finish is not None else EXIT_OK


def _start_relay(session: Session, relay: RelayOptions) -> None:
    """The run's relay (monitor/relay): the session's close closes it; a refused address is a
    UsageError (exit 2), an address in use a PublisherBindError (exit 3)."""
    from monitor.relay.owner import load_operator_keys, start_relay

    keys = load_operator_keys(relay.operator_keys) if relay.operator_keys else None
    try:
        start_relay(session, relay.endpoint, allow_remote=relay.allow_remote, operators=keys,
                    journal=relay.operator_keys + ".journal" if relay.operator_keys else None,
                    curve=relay.curve)
    except BaseException:
        session.close()
        raise


def _say_why_nothing(summary: dict[str, Any], command: str) -> None:
    """A run that accepted nothing from an input that sent something says why, on stderr."""
    refused, lost = int(summary.get("rejected_total", 0)), int(summary.get("lost", 0))
    if summary.get("accepted", 0) or not (refused or lost):
        return
    reasons = sorted(summary.get("rejected", {}).items(), key=lambda kv: -kv[1])
    most = f", most as {reasons[0][0]} ({reasons[0][1]:,})" if reasons else ""
    print(f"{command}: no reading was accepted: {refused:,} refused{most}, {lost:,} lost", file=sys.stderr)


def _printer(session: Session) -> HeadlessPrinter | None:
    return next((s for s in session.sinks if isinstance(s, HeadlessPrinter)), None)


def _headless(session: Session, plan: RunPlan) -> None:
    printer = HeadlessPrinter(sys.stdout, as_json=plan.json)
    session.add_sink(printer)

    def every_second(s: Session) -> None:
        printer.status(s.snapshot())
        if plan.on_interval is not None:
            plan.on_interval(s)

    previous = install_signals(plan.stop)
    try:
        session.open()
        session.run(plan.duration, plan.stop, on_interval=every_second, interval=1.0)
    finally:
        restore_signals(previous)
        session.close()
        printer.status(session.snapshot())


def _screen(session: Session, plan: RunPlan) -> int | None:
    """The operator's screen until it quits; an exit code only when the screen cannot start."""
    try:
        from monitor.tui.app import RegimeApp
        from monitor.tui.feed import EventTap, SessionFeed
    except ImportError as exc:
        session.close()
        print(f"{plan.command}: the screen cannot start ({exc}); use --headless", file=sys.stderr)
        return EXIT_USAGE
    tap = EventTap()
    session.add_sink(tap)
    if plan.open_first:
        session.open()
    app = RegimeApp(SessionFeed(session, tap), plan.screen)
    try:
        app.run()
    finally:
        app.stop.set()
        session.close()
    return None
