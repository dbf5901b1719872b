"""The screen's own exit codes, in a real terminal: `regime watch` without --headless on a pseudo-terminal
(os.openpty), quitting by itself after --duration; exit 4 when the recording is incomplete (a real EFBIG from
the file-size limit), 0 when it is whole."""

from __future__ import annotations

import fcntl
import os
import struct
import subprocess
import sys
import termios
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

# the real file-size limit makes the disk refuse writes (EFBIG), as tests/recording/test_disk_full.py does
_LIMITED = r"""
import resource, signal, subprocess, sys
signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
resource.setrlimit(resource.RLIMIT_FSIZE, (60_000, 60_000))
sys.exit(subprocess.run(sys.argv[1:]).returncode)
"""


def _screen_run(args: list[str], limited: bool) -> tuple[int | None, bytes]:
    """Run on a 100x30 pty (Textual draws on stderr, so both go to the terminal, drained as it runs)."""
    master, slave = os.openpty()
    fcntl.ioctl(slave, termios.TIOCSWINSZ, struct.pack("HHHH", 30, 100, 0, 0))
    cmd = [sys.executable, "-m", "monitor", *args]
    if limited:
        cmd = [sys.executable, "-c", _LIMITED, *cmd]
    env = {**os.environ, "TERM": "xterm-256color", "PYTHONDONTWRITEBYTECODE": "1"}
    proc = subprocess.Popen(cmd, stdin=slave, stdout=slave, stderr=slave, cwd=ROOT, env=env, close_fds=True)
    os.close(slave)
    os.set_blocking(master, False)
    drawn = b""
    deadline = time.monotonic() + 90
    while time.monotonic() < deadline:
        try:
            chunk = os.read(master, 65536)
        except BlockingIOError:
            chunk = None
        except OSError:                                # EIO: every writer has closed the terminal
            break
        if chunk:
            drawn += chunk
        elif proc.poll() is not None:
            break
        else:
            time.sleep(0.02)
    if proc.poll() is None:
        proc.kill()
    code = proc.wait(timeout=10)
    os.close(master)
    return code, drawn


def test_screen_exits_4_when_the_recording_is_incomplete_and_0_when_whole(tmp_path: Path) -> None:
    run = ["watch", "sim:steady?speed=20", "--config", "monitor/demo/envelope.toml", "--duration", "3",
           "--record"]
    code, drawn = _screen_run(run + [str(tmp_path / "full")], limited=True)
    assert code == 4, drawn[-2000:]
    assert b"RECORDING INCOMPLETE" in drawn                         # the summary printed after the screen
    code, drawn = _screen_run(run + [str(tmp_path / "whole")], limited=False)
    assert code == 0, drawn[-2000:]
    assert b"RECORDING INCOMPLETE" not in drawn and list((tmp_path / "whole").rglob("shot-*.csv"))
