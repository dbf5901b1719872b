"""Write replay_data/probe_sweeps.csv: an invented single-probe run from our forward model, with a few damaged sweeps.

Run: python replay_data/make_probe_sweeps.py  (deterministic; the file is < 300 KB)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from monitor.diagnostics.probe_model import SCENARIO_PROBE, scenario_sweeps  # noqa: E402

SWEEPS = 48
POINTS = 150
RATE = 0.8                 # sweeps per second: the file covers one 60 s cycle of the scenario
SPEC = SCENARIO_PROBE       # a 0.05 mm x 5 mm cylinder, as in probe_sweeps.toml


def main(out: Path) -> None:
    ids, t_mid, V, I = scenario_sweeps(0, SWEEPS, spec=SPEC, seed=7, points=POINTS, rate=RATE)
    t = t_mid[:, None] - 0.5 / RATE + np.arange(POINTS)[None, :] * (0.8 / RATE / POINTS)   # each sweep takes 80 % of its slot
    I[10, 40] = np.nan                                    # a dropped sample
    I[20, -6:] = I[20, -7]                                # amplifier clipped at its rail
    V[30, 70], V[30, 71] = V[30, 71], V[30, 70]           # two points out of order
    rows = []
    for s in range(SWEEPS):
        n = 12 if s == 40 else POINTS                     # a sweep cut short
        for j in range(n):
            rows.append(f"{ids[s]},{t[s, j]:.5f},{V[s, j]:.3f},{I[s, j]:.5e}")
    text = "# invented single-probe sweeps from our forward model; see make_probe_sweeps.py\nsweep,t,V,I\n"
    out.write_text(text + "\n".join(rows) + "\n")
    print(f"{out}: {SWEEPS} sweeps, {out.stat().st_size} bytes")


if __name__ == "__main__":
    main(Path(__file__).resolve().parent / "probe_sweeps.csv")
