"""Command hooks: real subprocesses, no shell, a timeout that kills, failures logged, never blocking."""

from __future__ import annotations

import logging
import os
import sys
import time
from pathlib import Path

import pytest

from alarm_helpers import engine, frame
from monitor.alarms.envelope import parse_alarm_options
from monitor.alarms.hooks import HookRunner, expand
from monitor.errors import ConfigError

WRITE = "import sys, pathlib; pathlib.Path(sys.argv[1]).write_text(sys.argv[2] + '|' + sys.stdin.read())"
HANG = "import os, sys, time, pathlib; pathlib.Path(sys.argv[1]).write_text(str(os.getpid())); time.sleep(60)"


def _raise_event(priority: str = "urgent"):
    eng = engine([{"name": "hot", "quantity": "Te", "high": 5.0, "priority": priority}])
    return [e for e in eng.process(frame([0.0, 1.0], Te=[3.0, 9.0])) if e.state.value == "unacknowledged"][0]


def _wait_for(cond, timeout: float = 10.0) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if cond():
            return True
        time.sleep(0.02)
    return False


def test_hook_runs_the_argument_list_with_the_event_on_stdin(tmp_path: Path) -> None:
    out = tmp_path / "out.txt"
    opts = parse_alarm_options({"hooks": {"urgent": [sys.executable, "-c", WRITE, str(out), "{alarm}:{state}"]}},
                               "t.toml")
    runner = HookRunner(opts.hooks)
    event = _raise_event()
    runner.on_alarm(event)
    assert runner.wait(1, 20.0)
    assert runner.results[0].returncode == 0
    arg, stdin = out.read_text().split("|", 1)
    assert arg == "hot:unacknowledged"
    assert '"alarm": "hot"' in stdin and '"type": "alarm"' in stdin
    runner.close()


def test_hooks_only_for_their_priority_and_states(tmp_path: Path) -> None:
    opts = parse_alarm_options({"hooks": {"urgent": [sys.executable, "-c", "pass"]}}, "t.toml")
    runner = HookRunner(opts.hooks)
    runner.on_alarm(_raise_event("high"))
    assert runner._thread is None and runner.results == []     # nothing queued: no worker was even started
    runner.close()


def test_hanging_hook_is_killed_after_its_timeout_and_never_blocks(tmp_path: Path, caplog) -> None:
    pid_file = tmp_path / "pid"
    opts = parse_alarm_options({"hooks": {"urgent": {"command": [sys.executable, "-c", HANG, str(pid_file)],
                                                     "timeout": "1s"}}}, "t.toml")
    runner = HookRunner(opts.hooks)
    caplog.set_level(logging.WARNING, logger="monitor.alarms.hooks")
    runner.on_alarm(_raise_event())
    assert runner.results == []          # on_alarm returned while the command still runs
    assert _wait_for(pid_file.exists) and _wait_for(lambda: pid_file.read_text() != "")
    pid = int(pid_file.read_text())
    assert runner.wait(1, 20.0)
    (result,) = runner.results
    assert result.returncode is None and "timeout" in result.error
    with pytest.raises(ProcessLookupError):
        os.kill(pid, 0)                  # killed and reaped
    assert any("killed after" in r.getMessage() for r in caplog.records)
    runner.close()


def test_failing_and_missing_commands_are_logged(tmp_path: Path, caplog) -> None:
    caplog.set_level(logging.WARNING, logger="monitor.alarms.hooks")
    opts = parse_alarm_options({"hooks": {"urgent": [sys.executable, "-c", "import sys; sys.exit(3)"],
                                          "high": [str(tmp_path / "no-such-program")]}}, "t.toml")
    runner = HookRunner(opts.hooks)
    runner.on_alarm(_raise_event("urgent"))
    runner.on_alarm(_raise_event("high"))
    assert runner.wait(2, 20.0)
    codes = sorted((r.returncode is None, r.returncode) for r in runner.results)
    assert codes == [(False, 3), (True, None)]
    messages = " ".join(r.getMessage() for r in caplog.records)
    assert "exited 3" in messages and "could not start" in messages
    runner.close()


def test_placeholders_and_hook_config_errors() -> None:
    event = _raise_event()
    assert expand(("notify", "{alarm}", "{priority}", "{value}", "{nothing}"), event) == \
        ["notify", "hot", "urgent", "9.0", "{nothing}"]
    with pytest.raises(ConfigError, match="alarms.hooks.urgent: .*no shell"):
        parse_alarm_options({"hooks": {"urgent": "notify-send alarm"}}, "t.toml")
    with pytest.raises(ConfigError, match="alarms.hooks.loud"):
        parse_alarm_options({"hooks": {"loud": ["x"]}}, "t.toml")
    with pytest.raises(ConfigError, match="alarms.hooks.urgent.timeout"):
        parse_alarm_options({"hooks": {"urgent": {"command": ["x"], "timeout": 0}}}, "t.toml")


# issue 12 point 10: a hook never outlives the run, not even one started at shutdown
SPAWN = "/bin/sh"          # the hook runs a shell script as its command (the runner itself uses no shell)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:                                         # a zombie waiting for its parent is dead too
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(")")[-1].split()[0] != "Z"
    except OSError:
        return False


def _sleeper(tmp_path: Path, timeout: str = "30 s") -> tuple[HookRunner, Path]:
    pid_file = tmp_path / "pid"
    script = f"sleep 30 & echo $! > {pid_file}.child; echo $$ > {pid_file}; wait"
    opts = parse_alarm_options({"hooks": {"urgent": {"command": [SPAWN, "-c", script], "timeout": timeout}}}, "t.toml")
    return HookRunner(opts.hooks), pid_file


def test_hook_running_at_close_is_ended_with_what_it_started(tmp_path: Path) -> None:
    runner, pid_file = _sleeper(tmp_path)
    runner.on_alarm(_raise_event())
    assert _wait_for(lambda: Path(f"{pid_file}.child").exists() and pid_file.exists())
    pid, child = int(pid_file.read_text()), int(Path(f"{pid_file}.child").read_text())
    runner.close(timeout=0.2)
    assert _wait_for(lambda: not _alive(pid) and not _alive(child), timeout=5)
    assert runner.results and runner.results[-1].returncode is None


def test_hook_timeout_ends_its_whole_process_group(tmp_path: Path) -> None:
    runner, pid_file = _sleeper(tmp_path, timeout="0.5 s")
    runner.on_alarm(_raise_event())
    assert runner.wait(1, 10.0)
    child = int(Path(f"{pid_file}.child").read_text())
    assert _wait_for(lambda: not _alive(child), timeout=5)
    assert "timeout" in runner.results[0].error
    runner.close()


def test_hook_left_running_is_ended_when_the_interpreter_exits(tmp_path: Path) -> None:
    pid_file = tmp_path / "pid"
    code = (
        "import sys, time; sys.path.insert(0, sys.argv[2]); from pathlib import Path\n"
        "from alarm_helpers import engine, frame\n"
        "from monitor.alarms.envelope import parse_alarm_options\n"
        "from monitor.alarms.hooks import HookRunner\n"
        "p = Path(sys.argv[1])\n"
        "opts = parse_alarm_options({'hooks': {'urgent': {'command': ['/bin/sh', '-c', 'echo $$ > ' + str(p) + '; exec sleep 30'],"
        " 'timeout': '1 s'}}}, 't.toml')\n"
        "eng = engine([{'name': 'hot', 'quantity': 'Te', 'high': 5.0, 'priority': 'urgent'}])\n"
        "ev = [e for e in eng.process(frame([0.0, 1.0], Te=[3.0, 9.0])) if e.state.value == 'unacknowledged'][0]\n"
        "r = HookRunner(opts.hooks); r.on_alarm(ev)\n"
        "t = time.monotonic()\n"
        "while not p.exists() and time.monotonic() - t < 10: time.sleep(0.02)\n"
        "time.sleep(0.1)\n"                      # exit while the hook runs, without close()
    )
    import subprocess

    root = Path(__file__).resolve().parents[2]
    subprocess.run([sys.executable, "-c", code, str(pid_file), str(Path(__file__).parent)], check=True, timeout=30,
                   env={**os.environ, "PYTHONPATH": str(root)})
    pid = int(pid_file.read_text())
    assert _wait_for(lambda: not _alive(pid), timeout=5), "the hook outlived the run"
