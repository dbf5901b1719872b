"""Helpers of the recording tests (a uniquely named module, so it never collides with another folder's conftest): frames by hand, a deadline poll, the regime command and a tiny envelope."""

from __future__ import annotations

import os
import sys
import time
from pathlib import Path
from typing import Callable

import numpy as np

from monitor.model import Frame

ROOT = Path(__file__).resolve().parents[2]
REGIME = [sys.executable, "-m", "monitor"]

ENVELOPE = """
[device]
length = "0.3m"
A = 39.948
wave_frequency = "2.45GHz"

[discharge]
on_above = "1e15m^-3"

[[limit]]
name = "ne_high"
quantity = "ne"
high = "1.5e17m^-3"
deadband = "5%"
on_delay = "0.3s"
priority = "high"

[[limit]]
name = "Te_band"
quantity = "Te"
low = "1.2eV"
high = "6eV"
on_delay = "1s"
priority = "advisory"
"""


def frame(t: np.ndarray, *, source: str = "test", seq: np.ndarray | None = None, **values: np.ndarray) -> Frame:
    """A frame as the pipeline hands it on: values and raw alike (no hold)."""
    vals = {k: np.asarray(v, dtype=np.float64) for k, v in values.items()}
    return Frame(source=source, t=np.asarray(t, dtype=np.float64), values=vals, seq=seq, raw=dict(vals))


def wait_for(cond: Callable[[], bool], timeout: float = 20.0, every: float = 0.02) -> bool:
    """Poll ``cond`` until it holds or the deadline passes."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if cond():
            return True
        time.sleep(every)
    return cond()


def env() -> dict[str, str]:
    e = dict(os.environ)
    e["PYTHONPATH"] = str(ROOT) + os.pathsep + e.get("PYTHONPATH", "")
    return e


def data_rows(path: Path) -> list[str]:
    """The data lines of a recording (not the header row, not the # lines)."""
    lines = path.read_text(encoding="utf-8").splitlines()
    return [ln for ln in lines[1:] if ln and not ln.startswith("#")]
