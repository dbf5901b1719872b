"""Headless output: a human status line per second, or JSON lines (status ~1/s, one per alarm event, a summary at exit)."""

from __future__ import annotations

import datetime as _dt
import json
import math
import signal
import sys
import threading
from typing import Any, Callable, Iterable, Mapping, TextIO

from adapters.base import SourceStatus
from adapters.batch import Rejection
from monitor.alarms.events import AlarmEvent
from monitor.errors import EXIT_RECORDING  # re-exported: 4, the recording is incomplete
from monitor.model import Frame
from monitor.snapshot import Snapshot

__all__ = ["ATTENTION", "EXIT_RECORDING", "HeadlessPrinter", "jsonable", "status_record", "human_status",
           "human_summary", "recorder_record", "human_recorder", "install_signals", "restore_signals",
           "final_summary", "failed_run"]

_SHOWN = (("ne", "ne", "m^-3"), ("Te", "Te", "eV"), ("debye_length", "debye", "m"))
# states that want the operator's attention (the others: normal, shelved, suppressed, out_of_service)
ATTENTION = frozenset({"unacknowledged", "acknowledged", "returned_unacknowledged"})


def jsonable(x: Any) -> Any:
    """Plain JSON values: NaN and infinities become null, numpy scalars floats, tuples lists."""
    if isinstance(x, float):
        return x if math.isfinite(x) else None
    if isinstance(x, Mapping):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [jsonable(v) for v in x]
    if hasattr(x, "item") and callable(x.item):       # numpy scalar
        return jsonable(x.item())
    if hasattr(x, "value") and isinstance(getattr(x, "value"), str):   # str enums
        return x.value
    return x


def _active(snap: Snapshot) -> list[dict[str, Any]]:
    out = []
    for v in snap.alarms:
        state = getattr(v.state, "value", str(v.state))
        if state != "normal":
            out.append({"alarm": v.alarm, "state": state, "priority": getattr(v.priority, "value", v.priority),
                        "quantity": v.quantity, "value": v.value})
    return out


def recorder_record(status: Any) -> dict[str, Any]:
    """The recorder's RecorderStatus as the ``"recorder"`` object of the status and summary lines."""
    return {
        "ok": status.ok, "complete": status.complete, "message": status.message, "file": status.file,
        "shots": status.shots, "rows_written": status.rows_written, "rows_pending": status.rows_pending,
        "split": status.split, "outside_shots_not_recorded": status.rows_idle,
        "dropped": status.dropped, "errors": status.errors,
    }


def human_recorder(rec: Mapping[str, Any]) -> str:
    """``recorded N`` with the readings outside shots that were not recorded, and any loss, loudly."""
    text = f"recorded {rec['rows_written']:,}"
    if rec["split"] != "none":
        text += f" (outside shots: {rec['outside_shots_not_recorded']:,} not recorded)"
    if rec["dropped"]:
        text += f"  RECORDER DROPPED {rec['dropped']:,}"
    if not rec["ok"]:
        text += f"  RECORDER FAILING: {rec['message']}"
    return text


def status_record(snap: Snapshot) -> dict[str, Any]:
    """The ``{"type": "status", ...}`` line."""
    accepted = sum(c.accepted for c in snap.counts.values())
    rejected: dict[str, int] = {}
    for c in snap.counts.values():
        for k, n in c.rejected.items():
            rejected[k] = rejected.get(k, 0) + n
    src = next(iter(snap.sources.values()), None)
    rec = {
        "type": "status",
        "wall": snap.wall_time,
        "time": snap.data_time,
        "source": src.name if src else None,
        "state": snap.source_states.get(src.name, src.state.value) if src else None,
        "message": src.message if src else "",
        "accepted": accepted,
        "rejected": dict(sorted(rejected.items())),
        "lost": sum(c.lost for c in snap.counts.values()),
        "rate": sum(c.rate for c in snap.counts.values()),
        "latest": {k: snap.latest[k][0] for k in ("ne", "Te", "Ti", "B", "p0", "debye_length") if k in snap.latest},
        "discharge_on": snap.discharge_on,
        "alarms": _active(snap),
        "flood": snap.flood,
        "alarm_rate_10min": snap.alarm_rate_10min,
        "chattering": list(snap.chattering),
        "warnings": list(snap.warnings),
    }
    if snap.replay is not None:
        rec["replay"] = {"time": snap.replay.time, "start": snap.replay.start, "end": snap.replay.end,
                         "speed": snap.replay.speed, "paused": snap.replay.paused}
    if snap.recording:
        rec["recording"] = snap.recording
    if snap.recorder is not None:
        rec["recorder"] = recorder_record(snap.recorder)
    return jsonable(rec)


def _num(x: float | None) -> str:
    if x is None or not math.isfinite(x):
        return "--"
    return f"{x:.3g}"


def human_status(snap: Snapshot) -> str:
    """One line for the operator's terminal."""
    rec = status_record(snap)
    parts = [f"[{rec['state'] or '?'}]"]
    if rec["time"] is None:
        parts.append("t=-- (no data yet)")
    else:
        clock = clock_time(rec["time"])
        parts.append(clock if clock is not None else f"t={rec['time']:.3f} s")
    parts.append(f"{rec['rate']:.0f}/s")
    nrej = sum(rec["rejected"].values())
    parts.append(f"accepted {rec['accepted']} rejected {nrej} lost {rec['lost']}")
    for key, label, unit in _SHOWN:
        v = snap.latest.get(key)
        parts.append(f"{label} {_num(v[0] if v else None)} {unit}")
    parts.append("ON" if rec["discharge_on"] else "off")
    active = [a for a in rec["alarms"] if a["state"] in ATTENTION]
    if active:
        names = ", ".join(f"{a['alarm']}({a['state']})" for a in active[:4])
        more = f" +{len(active) - 4}" if len(active) > 4 else ""
        parts.append(f"alarms {len(active)}: {names}{more}")
    else:
        parts.append("alarms 0")
    for state in ("shelved", "suppressed", "out_of_service"):
        k = sum(1 for a in rec["alarms"] if a["state"] == state)
        if k:
            parts.append(f"{state.replace('_', ' ')} {k}")
    if rec["flood"]:
        parts.append("FLOOD")
    if rec["chattering"]:
        parts.append("chattering: " + ", ".join(rec["chattering"]))
    if "recorder" in rec:
        parts.append(human_recorder(rec["recorder"]))
    if rec["message"] and rec["state"] != "connected":
        parts.append(f"({rec['message']})")
    return "  ".join(parts)


def human_summary(summary: Mapping[str, Any]) -> str:
    rej = summary.get("rejected", {})
    reasons = ", ".join(f"{k} {v}" for k, v in rej.items()) or "none"
    lines = [
        f"summary of {summary.get('source')}: accepted {summary.get('accepted')}, "
        f"rejected {sum(rej.values())} ({reasons}), lost {summary.get('lost')}",
        f"  state {summary.get('state')}" + (f": {summary['message']}" if summary.get("message") else ""),
        f"  alarm events {summary.get('alarm_events')}, active at exit: "
        f"{', '.join(summary.get('alarms_active') or []) or 'none'}",
    ]
    if summary.get("unknown_keys"):
        lines.append("  unknown keys: " + ", ".join(f"{k} {v}" for k, v in summary["unknown_keys"].items()))
    if summary.get("failure"):
        lines.append(f"  source failure: {summary['failure']}")
    rec = summary.get("recorder")
    if rec:
        line = f"  recorder: shots {rec['shots']}, readings written {rec['rows_written']:,}"
        if rec["split"] != "none":
            line += f", outside shots: {rec['outside_shots_not_recorded']:,} not recorded"
        line += f", dropped {rec['dropped']:,}, write errors {rec['errors']}"
        lines.append(line)
        if not rec["complete"]:
            lines.append(f"  RECORDING INCOMPLETE: {rec['dropped']:,} readings of shots did not reach the disk"
                         + ("" if rec["ok"] else f"; {rec['message']}"))
    return "\n".join(lines)


def clock_time(t: float) -> str | None:
    """A data time that is epoch seconds (after 2001-09-09) as an ISO 8601 UTC clock time; None for a
    data time counted from the start of a shot or an instrument's own zero."""
    if not math.isfinite(t) or t < 1e9:
        return None
    return _dt.datetime.fromtimestamp(t, _dt.timezone.utc).isoformat(timespec="milliseconds").replace("+00:00", "Z")


class HeadlessPrinter:
    """A sink printing alarm events and link changes as they come, and status lines when asked."""

    def __init__(self, stream: TextIO | None = None, *, as_json: bool = False) -> None:
        self.stream = stream if stream is not None else sys.stdout
        self.as_json = as_json
        self._lock = threading.Lock()
        self.lines = 0
        self.first_time: float | None = None     # the run's first data time: alarm times are said from it

    def _write(self, text: str) -> None:
        with self._lock:
            try:
                self.stream.write(text + "\n")
                self.stream.flush()
                self.lines += 1
            except (OSError, ValueError):
                pass        # a closed pipe must not stop the session

    def _json(self, record: Mapping[str, Any]) -> None:
        self._write(json.dumps(jsonable(record), separators=(",", ":")))

    # -- sink ---------------------------------------------------------------
    def on_frame(self, frame: Frame) -> None:
        if self.first_time is None and len(frame.t):
            self.first_time = float(frame.t[0])

    def on_rejections(self, rejections: list[Rejection]) -> None:
        return None

    def on_alarm(self, event: AlarmEvent) -> None:
        clock = clock_time(event.time)
        since = None if self.first_time is None else event.time - self.first_time
        if self.as_json:
            # the journal's object, plus the data time as a clock time (data times that are epoch
            # seconds) and as seconds into the run
            self._json({**event.to_json(), "clock": clock, "run_time": since})
        else:
            state = event.state.value
            what = f" by {event.action}" if event.action else ""
            when = clock if clock is not None else f"t={event.time:.3f} s"
            if since is not None:
                when += f" (+{since:.3f} s)"
            self._write(f"ALARM {when} {event.alarm} -> {state}{what}  "
                        f"{event.quantity or ''} {_num(event.value)} (limit {_num(event.limit)}) "
                        f"[{getattr(event.priority, 'value', event.priority)}] {event.message}".rstrip())

    def on_status(self, status: SourceStatus) -> None:
        if self.as_json:
            self._json({"type": "source", "source": status.name, "state": status.state.value,
                        "message": status.message, "retries": status.retries})
        else:
            msg = f": {status.message}" if status.message else ""
            self._write(f"SOURCE {status.name} {status.state.value}{msg}")

    def close(self) -> None:
        return None

    # -- periodic and final lines -------------------------------------------
    def status(self, snap: Snapshot) -> None:
        if self.as_json:
            self._json(status_record(snap))
        else:
            self._write(human_status(snap))

    def summary(self, summary: Mapping[str, Any]) -> None:
        if self.as_json:
            self._json(summary)
        else:
            self._write(human_summary(summary))


def install_signals(stop: threading.Event) -> dict[int, Any]:
    """SIGINT and SIGTERM set ``stop`` (main thread only); returns the previous handlers."""
    previous: dict[int, Any] = {}
    if threading.current_thread() is not threading.main_thread():
        return previous
    for sig in (signal.SIGINT, signal.SIGTERM):
        previous[sig] = signal.signal(sig, lambda *_: stop.set())
    return previous


def restore_signals(previous: dict[int, Any]) -> None:
    for sig, handler in previous.items():
        signal.signal(sig, handler)


def final_summary(session: Any, recorder: Any = None) -> tuple[dict[str, Any], Any]:
    """The session's summary with the recorder's block, and the recorder's final status (or None)."""
    summary = session.summary()
    final = recorder.status() if recorder is not None else None
    if final is not None:
        summary["recorder"] = recorder_record(final)
    return summary, final


def failed_run(session: Any, final: Any, command: str) -> int | None:
    """The exit code of a run that did not end well, said on stderr: 3 when the source failed (it wins),
    4 when the recording is incomplete (readings of shots that did not reach the disk); None otherwise."""
    from monitor.errors import EXIT_SOURCE

    if session.failure is not None:
        print(f"{command}: source failed: {session.failure}", file=sys.stderr)
        return EXIT_SOURCE
    if final is not None and not final.complete:
        print(f"{command}: the recording is incomplete: {final.dropped} readings of shots did not reach the disk"
              + ("" if final.ok else f" ({final.message})"), file=sys.stderr)
        return EXIT_RECORDING
    return None
