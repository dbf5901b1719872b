"""Writes the invented quadrature-interferometer demo replay_data/interferometer_iq.csv (deterministic): run `python replay_data/make_interferometer_demo.py`."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from adapters.sim_interferometer import SCENARIO, generate  # noqa: E402

T0 = 1767265200.0          # data time of the start: 2026-01-01T11:00:00Z (an invented date)
RATE = 1000.0              # samples per second
SEED = 14


def write(path: Path) -> int:
    """Write the demo file; returns its size in bytes."""
    b = generate(seed=SEED, rate=RATE)
    seq = b.seq if b.seq is not None else np.arange(len(b))
    cols = np.column_stack([b.t + T0, seq, b.columns["I_q"], b.columns["Q_q"], b.columns["discharge"], b.columns["Te"]])
    lines = ["t,seq,I_q,Q_q,discharge,Te"]
    lines += [f"{t:.3f},{int(k)},{i:.5f},{q:.5f},{int(d)},{'nan' if np.isnan(te) else f'{te:.3f}'}"
              for t, k, i, q, d, te in cols]
    path.write_text("\n".join(lines) + "\n", encoding="ascii")
    return path.stat().st_size


if __name__ == "__main__":
    out = HERE / "interferometer_iq.csv"
    size = write(out)
    print(f"{out.name}: {int(SCENARIO.duration * RATE)} rows, {size} bytes")
