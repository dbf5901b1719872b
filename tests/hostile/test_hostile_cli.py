"""Hostile command lines through real `regime` subprocesses: clear messages and exit codes, never a hang."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


def regime(*args: str, timeout: float = 30) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "monitor", *args], capture_output=True, text=True, cwd=ROOT,
                          timeout=timeout, env={**os.environ, "PYTHONPATH": str(ROOT)})


def _clear(p: subprocess.CompletedProcess[str], code: int, words: str) -> None:
    assert p.returncode == code, (p.returncode, p.stderr[-800:])
    assert "Traceback" not in p.stderr and words in p.stderr, p.stderr[-800:]


# point 9
def test_simulate_negative_send_queue_is_a_usage_error() -> None:
    _clear(regime("simulate", "tcp://127.0.0.1:*", "--sndhwm", "-1", "--quiet"), 2, "--sndhwm -1")


def test_simulate_rate_over_the_ceiling_is_a_usage_error() -> None:
    _clear(regime("simulate", "tcp://127.0.0.1:*", "--rate", "1e12", "--quiet"), 2, "ceiling")


@pytest.mark.parametrize("spec, words", [("tcp://127.0.0.1:99999", "port '99999'"),
                                         ("serial:/dev/x@abc", "baud rate 'abc'")])
def test_watch_spec_that_can_never_work_exits_2_at_once(spec: str, words: str) -> None:
    _clear(regime("watch", spec, "--headless", "--duration", "5", timeout=20), 2, words)


def test_report_of_a_device_says_what_it_is() -> None:
    _clear(regime("report", "/dev/null"), 3, "not a regular file")


# point 6
def test_check_dev_zero_returns_with_a_bound() -> None:
    _clear(regime("check", "/dev/zero", timeout=20), 2, "larger than")


def test_simulator_rate_ceiling_is_a_usage_error() -> None:
    _clear(regime("watch", "sim:demo?rate=1e12", "--headless", "--duration", "1", timeout=20), 2, "ceiling")
