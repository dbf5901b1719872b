"""Writes invented shots in the recording's own CSV format (header_block + RowFormatter), for the archive's tests and benchmark."""

from __future__ import annotations

import os
import time
from pathlib import Path

import numpy as np

from monitor.recording.csvformat import RowFormatter, header_block

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "replay_data"
T0 = 1798761600.0          # 2027-01-01T00:00:00Z, an invented campaign start

ENVELOPE = """[device]
length = "0.3m"
A = 39.948
Z = 1
gas_temperature = "300K"
wave_frequency = "2.45GHz"

[discharge]
on_above = "1e15m^-3"

[sources]
stale_after = "2s"

[[limit]]
name = "ne_high"
quantity = "ne"
high = "1.6e17m^-3"
deadband = "5%"
on_delay = "0.3s"
off_delay = "0.5s"
priority = "high"

[[limit]]
name = "Te_band"
quantity = "Te"
low = "1.5eV"
high = "5eV"
on_delay = "1s"
priority = "advisory"
"""

COLUMNS = ("t", "seq", "ne", "Te", "p0", "sigma_ne", "sigma_Te", "sigma_p0")


def shot_arrays(shot: int, seconds: float, rate: float, seed: int | None = None) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """An invented discharge: ramp up, steady ne near 8e16 m^-3 with a density bump whose height grows with
    the shot number, ramp down; Te every 10th row, p0 every 50th."""
    rng = np.random.default_rng(shot if seed is None else seed)
    n = int(seconds * rate)
    t = T0 + 3600.0 * shot + np.arange(n) / rate
    x = (t - t[0]) / seconds
    shape = np.clip(np.minimum(x / 0.1, (1.0 - x) / 0.1), 0.0, 1.0)
    bump = 1.0 + (0.5 + 0.1 * (shot % 15)) * np.exp(-((x - 0.5) / 0.08) ** 2)
    ne = np.maximum(8e16 * shape * bump, 2e14) * (1 + 0.02 * rng.standard_normal(n))
    te = (0.4 + 2.2 * shape) * (1 + 0.03 * rng.standard_normal(n))
    te[np.arange(n) % 10 != 0] = np.nan
    p0 = np.full(n, 1.3)
    p0[np.arange(n) % 50 != 0] = np.nan
    vals = {"ne": ne, "Te": te, "p0": p0, "sigma_ne": np.round(0.2 * ne, 3), "sigma_Te": 0.1 * te,
            "sigma_p0": 0.005 * p0}
    return t, vals


def write_shot(folder: Path, shot: int, seconds: float = 30.0, rate: float = 1000.0,
               envelope: str = ENVELOPE) -> Path:
    """Write shot ``shot`` as ``shot-NNNN.csv`` in ``folder`` (header, metadata with the envelope, rows)."""
    folder.mkdir(parents=True, exist_ok=True)
    t, vals = shot_arrays(shot, seconds, rate)
    head = header_block(COLUMNS, shot=shot, start_wall=float(t[0]), source="sim:archive_test", on_above=1e15,
                        config_toml=envelope)
    body = RowFormatter(COLUMNS).format(t, vals, np.arange(len(t)))
    path = folder / f"shot-{shot:04d}.csv"
    path.write_text(head + body, encoding="utf-8")
    return path


def settle(folder: Path, age: float = 120.0) -> None:
    """Date the files written in the last minute back by ``age`` s, so that none looks still being
    recorded (older files keep their time: a re-run must see them unchanged)."""
    now = time.time()
    for f in folder.rglob("*"):
        if f.is_file() and f.stat().st_mtime > now - 60:
            os.utime(f, (now - age, now - age))
