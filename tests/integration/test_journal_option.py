"""--journal F on watch, replay and demo (and [alarms] journal for watch): every alarm transition and operator
action as one JSON line in F, appended, refused at start when F cannot be written, loud but harmless when a
write fails mid-run; and an --alarm-pub address already in use exits 3, as `regime simulate` does."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
ENVELOPE = ROOT / "monitor" / "demo" / "envelope.toml"
SHOT = ROOT / "replay_data" / "argon_rf_excursion.csv"
SHOT_ALARMS = ROOT / "replay_data" / "argon_rf_excursion.alarms.jsonl"


def regime(*args: str, cwd: Path | None = None, timeout: float = 120) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "monitor", *args], capture_output=True, text=True,
                          timeout=timeout, cwd=cwd or ROOT, env=env)


def _lines(path: Path) -> list[dict]:
    return [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]


def _alarm_lines(stdout: str) -> list[dict]:
    """The --json alarm lines as journal objects: the printer adds the data time as a clock time and
    as seconds into the run (``clock``, ``run_time``); the journal keeps the event alone."""
    objs = [json.loads(line) for line in stdout.splitlines() if line.startswith("{")]
    alarms = [o for o in objs if o.get("type") == "alarm"]
    assert all("clock" in o and "run_time" in o for o in alarms)
    return [{k: v for k, v in o.items() if k not in ("clock", "run_time")} for o in alarms]


def test_watch_headless_journal_holds_every_alarm_event_of_the_json_output(tmp_path: Path) -> None:
    journal = tmp_path / "shift.jsonl"
    out = regime("watch", "sim:excursion?speed=max", "--config", str(ENVELOPE), "--headless", "--json",
                 "--journal", str(journal))
    assert out.returncode == 0, out.stderr
    printed = _alarm_lines(out.stdout)
    assert any(e["state"] == "unacknowledged" for e in printed)      # the excursion raised something
    assert _lines(journal) == printed                                # same objects, same order


def test_journal_is_appended_to_never_truncated(tmp_path: Path) -> None:
    journal = tmp_path / "shift.jsonl"
    earlier = {"type": "alarm", "alarm": "from_an_earlier_run", "state": "normal"}
    journal.write_text(json.dumps(earlier) + "\n", encoding="utf-8")
    out = regime("watch", "sim:excursion?speed=max", "--config", str(ENVELOPE), "--headless", "--json",
                 "--journal", str(journal))
    assert out.returncode == 0, out.stderr
    kept = _lines(journal)
    assert kept[0] == earlier
    assert kept[1:] == _alarm_lines(out.stdout) and len(kept) > 1


@pytest.mark.parametrize("where", ["under_a_file", "a_directory"])
def test_journal_that_cannot_be_written_is_refused_at_start(tmp_path: Path, where: str) -> None:
    blocker = tmp_path / "plain.txt"
    blocker.write_text("not a directory\n")
    target = blocker / "shift.jsonl" if where == "under_a_file" else tmp_path
    out = regime("watch", "sim:excursion?speed=max", "--headless", "--json", "--journal", str(target))
    assert out.returncode == 2, (out.stdout, out.stderr)
    assert "cannot write the journal" in out.stderr and str(target) in out.stderr
    assert out.stdout == ""                                          # refused before any reading


def test_config_journal_is_relative_to_the_config_file_and_a_replay_ignores_it(tmp_path: Path) -> None:
    confdir = tmp_path / "conf"
    confdir.mkdir()
    config = confdir / "envelope.toml"
    config.write_text(ENVELOPE.read_text(encoding="utf-8").replace("[alarms]\n", '[alarms]\njournal = "shift.jsonl"\n', 1),
                      encoding="utf-8")
    elsewhere = tmp_path / "cwd"
    elsewhere.mkdir()
    out = regime("watch", "sim:excursion?speed=max", "--config", str(config), "--headless", "--json", cwd=elsewhere)
    assert out.returncode == 0, out.stderr
    journal = confdir / "shift.jsonl"
    assert _lines(journal) == _alarm_lines(out.stdout) and journal.stat().st_size > 0
    assert not (elsewhere / "shift.jsonl").exists()
    size = journal.stat().st_size
    # a replay never appends to the journal a config names (as it never records again from [recording])
    out = regime("replay", str(SHOT), "--config", str(config), "--headless", "--json", "--quiet", cwd=elsewhere)
    assert out.returncode == 0, out.stderr
    assert journal.stat().st_size == size


def test_config_journal_that_is_not_a_file_name_is_a_config_error(tmp_path: Path) -> None:
    config = tmp_path / "envelope.toml"
    config.write_text('[alarms]\njournal = 3\n', encoding="utf-8")
    out = regime("check", str(config))
    assert out.returncode == 2, (out.stdout, out.stderr)
    assert "alarms.journal" in out.stderr and "expected a file name" in out.stderr


def test_replay_journal_equals_the_recorded_alarm_journal(tmp_path: Path) -> None:
    journal = tmp_path / "replayed.jsonl"
    out = regime("replay", str(SHOT), "--headless", "--json", "--quiet", "--journal", str(journal))
    assert out.returncode == 0, out.stderr

    def key(events: list[dict]) -> list[tuple]:
        return [(e["alarm"], e["state"], e["time"]) for e in events]

    assert key(_lines(journal)) == key(_lines(SHOT_ALARMS)) and len(_lines(SHOT_ALARMS)) == 12


def test_demo_headless_journal(tmp_path: Path) -> None:
    journal = tmp_path / "demo.jsonl"
    out = regime("demo", "--headless", "--json", "--speed", "max", "--once", "--journal", str(journal))
    assert out.returncode == 0, out.stderr
    printed = _alarm_lines(out.stdout)
    assert printed and _lines(journal) == printed


class _Kept:
    def __init__(self) -> None:
        self.events: list = []

    def on_alarm(self, event) -> None:
        self.events.append(event)


def _raise_an_alarm(session, kept: _Kept, limit_s: float = 60.0) -> None:
    session.open()
    deadline = time.monotonic() + limit_s
    while not any(e.state.value == "unacknowledged" for e in kept.events):
        assert time.monotonic() < deadline, "no alarm raised"
        assert session.step(0.05) or any(e.state.value == "unacknowledged" for e in kept.events)


def test_operator_acknowledge_reaches_the_journal(tmp_path: Path) -> None:
    from monitor.config import load_config
    from monitor.outputs import build_outputs
    from monitor.session import Session, make_engine
    from monitor.sources import open_source

    journal = tmp_path / "shift.jsonl"
    config = load_config(str(ENVELOPE))
    source = open_source("sim:excursion?speed=max", config)
    outputs = build_outputs(config, source_name=source.name, journal=str(journal))
    kept = _Kept()
    session = Session(source, config, [kept, *outputs.sinks], engine=make_engine(config), live=True)
    try:
        _raise_an_alarm(session, kept)
        acked = session.acknowledge(None)
        assert acked, "acknowledge changed nothing"
    finally:
        session.close()
    lines = _lines(journal)
    assert lines == [e.to_json() for e in kept.events]
    # ISA-18.2: acknowledging an unacknowledged active alarm makes it acknowledged
    assert [(e["alarm"], e["state"]) for e in lines[-len(acked):]] == [(e.alarm, "acknowledged") for e in acked]


def test_write_failure_mid_run_is_counted_and_said_on_stderr_and_the_run_goes_on(capsys) -> None:
    from monitor.config import load_config
    from monitor.outputs import build_outputs
    from monitor.session import Session, make_engine
    from monitor.sources import open_source

    if not os.path.exists("/dev/full"):
        pytest.skip("needs /dev/full (every write fails with ENOSPC)")
    config = load_config(str(ENVELOPE))
    source = open_source("sim:excursion?speed=max", config)
    outputs = build_outputs(config, source_name=source.name, journal="/dev/full")
    journal = outputs.sinks[0]
    kept = _Kept()
    session = Session(source, config, [kept, *outputs.sinks], engine=make_engine(config), live=True)
    try:
        _raise_an_alarm(session, kept)
    finally:
        session.close()
    assert journal.failed == len(kept.events) > 0 and journal.written == 0 and journal.errors >= journal.failed
    err = capsys.readouterr().err
    assert err.count("cannot write an event") == 1                  # once per run of failures, not per event
    assert f"{len(kept.events)} event(s) not written" in err and "/dev/full" in err


def test_alarm_pub_on_a_port_in_use_exits_3() -> None:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as held:
        held.bind(("127.0.0.1", 0))
        held.listen(1)
        port = held.getsockname()[1]
        out = regime("watch", "sim:steady?speed=max&duration=1", "--headless", "--alarm-pub",
                     f"tcp://127.0.0.1:{port}", timeout=60)
    assert out.returncode == 3, (out.stdout, out.stderr)
    assert "cannot bind the alarm publisher" in out.stderr and str(port) in out.stderr
