"""The optional outputs of a run reach their targets: command hooks from [alarms.hooks] run on a raised
alarm in a real `regime watch` process, a replay never records again from an old shot's config, a recording
directory that cannot be written is refused at start, and the recorder's write alarm always reaches the output."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

ENVELOPE = """
[device]
length = 0.3
[discharge]
on_above = 1e15
[[limit]]
name = "ne-high"
quantity = "ne"
high = 2.0e17
priority = "urgent"
description = "density above the band"
[alarms.hooks]
urgent = [{python}, "-c", "import sys, pathlib; pathlib.Path(sys.argv[1]).open('a').write(sys.argv[2] + ' ' + sys.argv[3] + chr(10))", "{marker}", "{{alarm}}", "{{state}}"]
"""


def _watch(config: Path, *extra: str) -> list[dict]:
    cmd = [sys.executable, "-m", "monitor", "watch", "sim:excursion?speed=max&rate=200", "--headless", "--json",
           "--config", str(config), *extra]
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    return [json.loads(line) for line in out.stdout.splitlines() if line.startswith("{")]


def test_hook_runs_on_the_excursion_alarm(tmp_path: Path) -> None:
    marker = tmp_path / "hook.log"
    config = tmp_path / "envelope.toml"
    config.write_text(textwrap.dedent(ENVELOPE.format(python=json.dumps(sys.executable), marker=marker)))
    lines = _watch(config)
    raised = [x for x in lines if x["type"] == "alarm" and x["alarm"] == "ne-high" and x["state"] == "unacknowledged"]
    assert raised, "the excursion past 2e17 m^-3 raised no alarm"
    # the hook runs in a worker thread; the process waits for it on close
    assert marker.exists(), "the urgent hook did not run"
    assert "ne-high unacknowledged" in marker.read_text()


def test_replay_does_not_record_from_the_recorded_config(tmp_path: Path) -> None:
    config = tmp_path / "envelope.toml"
    shots = tmp_path / "shots"
    config.write_text(textwrap.dedent(f"""
        [device]
        length = 0.3
        [recording]
        directory = {json.dumps(str(shots))}
    """))
    _watch(config)
    recorded = sorted(p for p in shots.rglob("*.csv") if "reject" not in p.name)
    assert recorded, "watch with [recording] directory wrote no shot"
    before = sorted(shots.rglob("*"))
    out = subprocess.run([sys.executable, "-m", "monitor", "replay", str(recorded[0]), "--headless", "--json",
                          "--speed", "max"], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert sorted(shots.rglob("*")) == before


def _event(n: int):
    from monitor.alarms.events import AlarmEvent, AlarmState, Priority

    return AlarmEvent(time=float(n), wall=1000.0 + n, alarm="recorder:write", state=AlarmState.UNACKNOWLEDGED,
                      previous=AlarmState.NORMAL, quantity=None, value=None, limit=None, priority=Priority.HIGH,
                      kind="quality", message=f"write failure {n}")


class _Kept:
    """A sink that keeps the alarm events it is handed."""

    def __init__(self) -> None:
        self.events: list = []

    def on_alarm(self, event) -> None:
        self.events.append(event)


def test_a_recorder_problem_from_before_the_run_is_raised_at_its_first_step(tmp_path: Path) -> None:
    """The recorder only reports its health; the session raises it as the engine's recorder:write
    alarm, so a problem the recorder had before the session existed is not lost."""
    import shutil

    from monitor.config import load_config
    from monitor.recording import Recorder, RecordingOptions
    from monitor.session import Session, make_engine
    from monitor.sources import open_source

    config = load_config(None)
    rec = Recorder(tmp_path / "rec", config, source_name="s", options=RecordingOptions(split="none"))
    shutil.rmtree(tmp_path / "rec")
    (tmp_path / "rec").write_text("a file where the directory was")      # no shot file can be opened
    kept = _Kept()
    session = Session(open_source("sim:steady?speed=max&duration=1", config), config, [kept],
                      engine=make_engine(config), recorder=rec, live=False)
    try:
        while session.step(0.05) and not [e for e in kept.events if e.alarm == "recorder:write"]:
            pass
    finally:
        session.close()
    raised = [e for e in kept.events if e.alarm == "recorder:write"]
    assert raised and raised[0].state.value == "unacknowledged" and raised[0].kind == "quality"
    assert "recorder:write" in session.summary()["alarms_active"]


def test_unwritable_recording_directory_is_refused_with_its_name_and_reason(tmp_path: Path) -> None:
    import pytest
    from monitor.config import load_config
    from monitor.errors import UsageError
    from monitor.outputs import build_outputs

    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    config = load_config(None)
    with pytest.raises(UsageError) as err:
        build_outputs(config, source_name="s", record=str(blocker / "shots"))
    assert str(err.value) == f"--record {blocker / 'shots'}: cannot record there: Not a directory"
    toml = tmp_path / "envelope.toml"
    toml.write_text(f"[recording]\ndirectory = {json.dumps(str(blocker))}\n")
    with pytest.raises(UsageError) as err:
        build_outputs(load_config(str(toml)), source_name="s")
    assert str(err.value).startswith(f"[recording] directory {blocker}: cannot record there:")


def test_watch_refuses_an_unwritable_record_directory_before_any_reading(tmp_path: Path) -> None:
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    cmd = [sys.executable, "-m", "monitor", "watch", "sim:steady?speed=max&duration=2", "--headless", "--json",
           "--record", str(blocker / "shots")]
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert out.returncode == 2, out.stderr
    assert out.stderr.strip() == f"regime watch: --record {blocker / 'shots'}: cannot record there: Not a directory"
    assert out.stdout == ""              # no status line, no summary: no reading was taken


# the real file-size limit makes the disk refuse writes (EFBIG), as tests/recording/test_disk_full.py does
_LIMITED = r"""
import resource, signal, subprocess, sys
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
resource.setrlimit(resource.RLIMIT_FSIZE, (60_000, 60_000))
sys.exit(subprocess.run(sys.argv[1:]).returncode)
"""


def test_write_failure_mid_run_is_an_alarm_in_the_output_and_exit_4(tmp_path: Path) -> None:
    shots = tmp_path / "shots"
    cmd = [sys.executable, "-c", _LIMITED, sys.executable, "-m", "monitor", "watch",
           "sim:steady?speed=max&duration=5", "--headless", "--json", "--record", str(shots)]
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=120, env={**os.environ, "PYTHONDONTWRITEBYTECODE": "1"})
    lines = [json.loads(line) for line in out.stdout.splitlines() if line.startswith("{")]
    assert out.returncode == 4, out.stderr
    raised = [x for x in lines if x["type"] == "alarm" and x["alarm"] == "recorder:write"]
    assert raised and raised[0]["state"] == "unacknowledged" and "File too large" in raised[0]["message"]
    summary = lines[-1]
    assert summary["type"] == "summary" and summary["alarm_events"] >= 1
    rec = summary["recorder"]
    assert rec["complete"] is False and rec["dropped"] > 0
    assert rec["rows_written"] + rec["dropped"] + rec["outside_shots_not_recorded"] == summary["accepted"] == 5000
    assert "regime watch: the recording is incomplete" in out.stderr


def test_alarm_publisher_off_loopback_needs_the_opt_in(tmp_path: Path) -> None:
    """The decision only: nothing binds beyond loopback here (192.0.2.1 is TEST-NET-1, RFC 5737)."""
    import pytest
    from monitor.config import load_config
    from monitor.errors import UsageError
    from monitor.outputs import build_outputs, publisher_endpoint

    plain = load_config(None)
    toml = tmp_path / "remote.toml"
    toml.write_text("[sources]\nallow_remote = true\n")
    opted = load_config(str(toml))
    remote = "tcp://192.0.2.1:5581"
    with pytest.raises(UsageError) as err:
        publisher_endpoint(remote, plain)
    assert "not loopback" in str(err.value) and "--allow-remote" in str(err.value)
    assert publisher_endpoint(remote, plain, allow_remote=True) == (remote, True)     # --allow-remote
    assert publisher_endpoint(remote, opted) == (remote, True)                        # [sources] allow_remote
    assert publisher_endpoint("5581", plain) == ("tcp://127.0.0.1:5581", False)
    with pytest.raises(UsageError):                   # build_outputs refuses before any socket is bound
        build_outputs(plain, source_name="s", alarm_pub=remote)
    out = build_outputs(opted, source_name="s", alarm_pub="tcp://127.0.0.1:*")        # loopback still binds
    try:
        (pub,) = out.sinks
        assert pub.endpoint.startswith("tcp://127.0.0.1:")
    finally:
        for sink in out.sinks:
            sink.close()


def test_watch_alarm_pub_off_loopback_exits_2_and_names_the_opt_in() -> None:
    cmd = [sys.executable, "-m", "monitor", "watch", "sim:steady?speed=max&duration=1", "--headless",
           "--alarm-pub", "tcp://192.0.2.1:5581"]
    out = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    assert out.returncode == 2 and out.stdout == ""
    assert "not loopback" in out.stderr and "--allow-remote" in out.stderr
    help_text = subprocess.run([sys.executable, "-m", "monitor", "watch", "--help"], capture_output=True,
                               text=True, timeout=120).stdout
    assert "--allow-remote" in help_text


def test_replay_with_a_recorder_reports_it_and_exits_4_when_the_recording_is_incomplete(tmp_path: Path) -> None:
    # replay --record: the recorder in the status lines and the summary, its readings accounted for
    shot = Path(__file__).resolve().parents[2] / "replay_data" / "argon_rf_excursion.csv"
    base = [sys.executable, "-m", "monitor", "replay", str(shot), "--headless", "--json", "--quiet"]
    ok = subprocess.run(base + ["--record", str(tmp_path / "again")], capture_output=True, text=True, timeout=120)
    assert ok.returncode == 0, ok.stderr
    lines = [json.loads(line) for line in ok.stdout.splitlines() if line.startswith("{")]
    assert any(x["type"] == "status" and "recorder" in x for x in lines)
    summary = lines[-1]
    rec = summary["recorder"]
    assert rec["complete"] is True and rec["dropped"] == 0 and rec["rows_written"] > 0
    assert rec["rows_written"] + rec["outside_shots_not_recorded"] + rec["dropped"] == summary["accepted"]
    # the same under a file-size limit: the disk refuses, the alarm is in the output, exit 4
    full = subprocess.run([sys.executable, "-c", _LIMITED] + base + ["--record", str(tmp_path / "full")],
                          capture_output=True, text=True, timeout=120)
    assert full.returncode == 4, full.stderr
    lines = [json.loads(line) for line in full.stdout.splitlines() if line.startswith("{")]
    assert any(x["type"] == "alarm" and x["alarm"] == "recorder:write" for x in lines)
    rec = lines[-1]["recorder"]
    assert rec["complete"] is False and rec["dropped"] > 0
    assert "the recording is incomplete" in full.stderr
