"""The relay from the command line: `regime watch SOURCE --relay ipc://...` owns the run, and
`regime watch relay+ipc://...` (a real second process) shows it with the owner's counts."""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _lines(text: str) -> list[dict]:
    return [json.loads(x) for x in text.splitlines() if x.startswith("{")]


def test_an_owner_and_a_console_as_two_commands(tmp_path: Path) -> None:
    endpoint = f"ipc://{tmp_path}/relay"
    owner = subprocess.Popen([sys.executable, "-m", "monitor", "watch", "sim:steady?rate=1000&duration=4",
                              "--headless", "--json", "--relay", endpoint],
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        deadline = time.monotonic() + 20
        while not (tmp_path / "relay").exists():          # the owner has bound its relay
            assert owner.poll() is None and time.monotonic() < deadline, owner.stderr.read() if owner.stderr else ""
            time.sleep(0.05)
        console = subprocess.run([sys.executable, "-m", "monitor", "watch", f"relay+{endpoint}", "--headless",
                                  "--json", "--duration", "30"], capture_output=True, text=True, timeout=60,
                                 cwd=ROOT)
        out, err = owner.communicate(timeout=60)
    finally:
        if owner.poll() is None:
            owner.kill()
    assert owner.returncode == 0, err
    assert console.returncode == 0, console.stderr
    mine, theirs = _lines(out)[-1], _lines(console.stdout)[-1]
    # no outside reference: the same run seen twice (4 s of the simulator at 1 kHz)
    assert mine["type"] == theirs["type"] == "summary"
    assert theirs["accepted"] == mine["accepted"] == 4000
    assert theirs["source"] == mine["source"]


def test_relay_options_without_relay_are_refused() -> None:
    out = subprocess.run([sys.executable, "-m", "monitor", "watch", "sim:steady", "--headless",
                          "--operator-keys", "keys.txt"], capture_output=True, text=True, timeout=60, cwd=ROOT)
    assert out.returncode == 2 and "need --relay" in out.stderr
