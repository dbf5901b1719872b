"""Generates the invented demo shots of replay_data/ (deterministic): run `python replay_data/make_demo_shots.py`."""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

T0 = 1767261600.0          # data time of every shot's start: 2026-01-01T10:00:00Z (an invented date)


@dataclass(frozen=True)
class Knot:
    t: float               # s from the shot start
    ne: float              # m^-3
    Te: float              # eV


@dataclass(frozen=True)
class Shot:
    name: str
    envelope: str          # file name of its envelope in replay_data/
    seed: int
    rate: float            # ne samples per second
    te_every: int          # one Te reading per this many ne readings
    noise: float           # relative standard deviation of ne (Te: 1.5x this; p0 and B: none)
    p0: float              # Pa
    B: float | None        # T
    knots: tuple[Knot, ...]
    calibration: dict[str, float]   # relative calibration (systematic) standard uncertainty per channel


def sigma_rel(shot: Shot) -> dict[str, float]:
    """The relative standard uncertainty each reading carries: its noise and its calibration part in quadrature.

    The calibration part is stated, not realised: the invented instruments read the knots without bias.
    """
    noise = {"ne": shot.noise, "Te": 1.5 * shot.noise, "p0": 0.0, "B": 0.0}
    return {ch: float(np.hypot(noise[ch], cal)) for ch, cal in shot.calibration.items()}


# Calibration parts (from memory): a single Langmuir probe's absolute density is commonly quoted to 20-50 %
# and its Te to 10-20 % (we take the low ends); a microwave interferometer's line-averaged density to a few
# per cent, 5 % with the path length and profile assumed; capacitance diaphragm gauges to 0.25-0.5 % of
# reading; a calibrated Hall probe to about 1 % of reading.
PROBE = {"ne": 0.20, "Te": 0.10, "p0": 0.005}
INTERFEROMETER_AND_PROBE = {"ne": 0.05, "Te": 0.10, "p0": 0.005, "B": 0.01}


OFF_NE, OFF_TE = 2.0e14, 0.4

SHOTS = (
    # argon RF discharge in a 30 cm chamber, density and temperature from a Langmuir probe: ramp-up, steady, one density excursion, recovery, shutdown
    Shot("argon_rf_excursion", "argon_rf_envelope.toml", seed=11, rate=200.0, te_every=10, noise=0.02, p0=1.3, B=None,
         knots=(Knot(0.0, OFF_NE, OFF_TE), Knot(1.0, OFF_NE, OFF_TE), Knot(4.0, 8.0e16, 2.6),
                Knot(13.0, 8.0e16, 2.6), Knot(15.0, 2.4e17, 2.0), Knot(17.5, 2.4e17, 2.0),
                Knot(19.5, 8.0e16, 2.6), Knot(25.0, 8.0e16, 2.6), Knot(27.0, OFF_NE, OFF_TE),
                Knot(30.0, OFF_NE, OFF_TE)),
         calibration=PROBE),
    # helium microwave (2.45 GHz, ECR field 0.0875 T) source driven up to its cutoff density (~7.4e16 m^-3);
    # density from a microwave interferometer, Te from a Langmuir probe, B from a Hall probe
    Shot("helium_microwave_cutoff", "helium_microwave_envelope.toml", seed=23, rate=100.0, te_every=5, noise=0.008, p0=0.4,
         B=0.0875,
         knots=(Knot(0.0, OFF_NE, OFF_TE), Knot(1.0, OFF_NE, OFF_TE), Knot(5.0, 5.5e16, 6.0),
                Knot(14.0, 5.5e16, 6.0), Knot(22.0, 7.2e16, 5.2), Knot(25.0, 7.9e16, 4.9),
                Knot(28.0, 7.9e16, 4.9), Knot(31.0, 6.0e16, 5.8), Knot(36.0, 6.0e16, 5.8),
                Knot(38.0, OFF_NE, OFF_TE), Knot(40.0, OFF_NE, OFF_TE)),
         calibration=INTERFEROMETER_AND_PROBE),
)


def _levels(shot: Shot, t: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Smooth (cosine) steps between the knots; densities interpolated in log."""
    kt = np.array([k.t for k in shot.knots])
    lne = np.log(np.array([k.ne for k in shot.knots]))
    te = np.array([k.Te for k in shot.knots])
    i = np.clip(np.searchsorted(kt, t, side="right") - 1, 0, len(kt) - 2)
    span = kt[i + 1] - kt[i]
    x = np.where(span > 0, (t - kt[i]) / np.where(span > 0, span, 1.0), 0.0)
    w = 0.5 - 0.5 * np.cos(np.pi * np.clip(x, 0.0, 1.0))
    return np.exp(lne[i] + w * (lne[i + 1] - lne[i])), te[i] + w * (te[i + 1] - te[i])


def _two_digits(x: np.ndarray) -> np.ndarray:
    """Round to two significant digits (NaN stays NaN): an uncertainty is stated to two digits (common practice)."""
    out = np.full(len(x), np.nan)
    ok = np.isfinite(x) & (x > 0)
    e = np.floor(np.log10(x[ok])) - 1
    up = 10.0 ** np.abs(e)                   # an exact power of ten: divide or multiply by it, never by 10^-k
    out[ok] = np.where(e < 0, np.round(x[ok] * up) / up, np.round(x[ok] / up) * up)
    out[np.isfinite(x) & (x == 0)] = 0.0
    return out


def plain_csv(shot: Shot, path: Path) -> None:
    """The instrument readings as a plain CSV (canonical columns): ne every sample, Te, p0, B slower,
    and a sigma_X column of standard uncertainties beside each."""
    rng = np.random.default_rng(shot.seed)
    n = int(round(shot.knots[-1].t * shot.rate)) + 1
    t = np.round(np.arange(n) / shot.rate, 6)
    ne, te = _levels(shot, t)
    ne = ne * (1 + shot.noise * rng.standard_normal(n))
    te = te * (1 + 1.5 * shot.noise * rng.standard_normal(n))
    te[np.arange(n) % shot.te_every != 0] = np.nan
    p0 = np.full(n, np.nan)
    p0[:: int(shot.rate // 5)] = shot.p0         # 5 Hz: inside the 0.25 s alignment hold
    cols = {"t": T0 + t, "seq": np.arange(n, dtype=float), "ne": np.round(ne, -11), "Te": np.round(te, 3), "p0": p0}
    if shot.B is not None:
        b = np.full(n, np.nan)
        b[:: int(shot.rate // 5)] = shot.B
        cols["B"] = b
    rel = sigma_rel(shot)
    for ch in [c for c in ("ne", "Te", "p0", "B") if c in cols]:
        cols[f"sigma_{ch}"] = _two_digits(np.abs(cols[ch]) * rel[ch])
    arr = np.column_stack(list(cols.values()))
    fmt = ",".join("%d" if c == "seq" else "%r" for c in cols) + "\n"
    body = (fmt * n) % tuple(arr.ravel().tolist())
    path.write_text(",".join(cols) + "\n" + body)


def record(shot: Shot, out: Path) -> Path:
    """Run the plain readings through the real pipeline and alarm engine into the recorder."""
    from adapters.csv_file import CsvSource
    from monitor.config import load_config
    from monitor.recording import Recorder, RecordingOptions
    from monitor.session import Session, make_engine

    os.chdir(HERE)                       # the header names the envelope file relative to replay_data/
    config = load_config(shot.envelope)
    tmp = Path(tempfile.mkdtemp())
    try:
        plain = tmp / f"{shot.name}.plain.csv"
        plain_csv(shot, plain)
        rec_dir = tmp / "rec"
        fixed = lambda: T0                                         # noqa: E731 - deterministic wall stamps
        recorder = Recorder(rec_dir, config, source_name=f"demo:{shot.name}", clock=fixed,
                            options=RecordingOptions(split="none", sigma=True))
        engine = make_engine(config)
        if engine is not None:
            engine = type(engine).from_config(config, clock=fixed)
        session = Session(CsvSource(plain, name=f"demo:{shot.name}"), config, [recorder], engine=engine,
                          live=False, wall=fixed)
        session.run()
        session.close()
        (csv,) = rec_dir.glob("shot-*.csv")
        stem = csv.name[:-4]
        for suffix in (".csv", ".alarms.jsonl", ".rejects.jsonl"):
            shutil.copyfile(rec_dir / f"{stem}{suffix}", out / f"{shot.name}{suffix}")
        return out / f"{shot.name}.csv"
    finally:
        shutil.rmtree(tmp, ignore_errors=True)


def main() -> int:
    os.environ["TZ"] = "UTC"
    time.tzset()
    for shot in SHOTS:
        path = record(shot, HERE)
        print(f"{path.name}: {path.stat().st_size} bytes")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
