"""The catalogue row of each demo shot against a hand computation with numpy from the CSV, and against the report."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
import scipy.constants as sc

from monitor.archive.summary import shot_report, summarise
from monitor.report import build_report

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "replay_data"
STALE = 2.0          # [sources] stale_after of both demo envelopes (s)
F_WAVE = 2.45e9      # helium envelope's wave_frequency (Hz)


def _columns(path: Path) -> dict[str, np.ndarray]:
    names = path.read_text(encoding="utf-8").splitlines()[0].split(",")
    rows = np.loadtxt(path, delimiter=",", comments="#", skiprows=1)
    return {name: rows[:, i] for i, name in enumerate(names)}


def _held(t: np.ndarray, x: np.ndarray, age: float = STALE) -> np.ndarray:
    """The last reading held for at most ``age`` s (the pipeline's alignment rule, DESIGN.md), by hand."""
    idx = np.where(np.isfinite(x), np.arange(len(x)), -1)
    np.maximum.accumulate(idx, out=idx)
    out = np.where(idx >= 0, x[np.maximum(idx, 0)], np.nan)
    since = np.where(idx >= 0, t - t[np.maximum(idx, 0)], np.inf)
    out[since > age] = np.nan
    return out


def _hand_envelope(t: np.ndarray, q: dict[str, np.ndarray], on: np.ndarray, dt: np.ndarray,
                   limits: list[tuple[str, str, float, float, float]]) -> tuple[float, int]:
    """Time inside every limit and the excursion count, sample by sample: an excursion starts at a known
    sample beyond the bound and ends at the first known sample back inside by the deadband; runs closer
    than the limit's off_delay are one (the alarm's hysteresis, ANSI/ISA-18.2 deadband and off-delay)."""
    spans: list[list[float]] = []
    for quantity, side, bound, band, off_delay in limits:
        v = q[quantity]
        runs: list[list[float]] = []
        out, start, last = False, 0.0, 0
        for i in range(len(t)):
            if not (on[i] and math.isfinite(v[i])):
                continue
            beyond = v[i] > bound if side == "high" else v[i] < bound
            stay = v[i] > bound - band if side == "high" else v[i] < bound + band
            if not out and beyond:
                out, start = True, float(t[i])
            elif out and not stay:
                out = False
                runs.append([start, float(t[i])])
            last = i
        if out:
            runs.append([start, float(t[last] + dt[last])])
        merged: list[list[float]] = []
        for r in runs:
            if merged and r[0] - merged[-1][1] < off_delay:
                merged[-1][1] = r[1]
            else:
                merged.append(r)
        spans += merged
    outside = np.zeros(len(t), dtype=bool)
    for a, b in spans:
        outside |= (t >= a) & (t < b)
    return float(dt[on & ~outside].sum()), len(spans)


# the envelopes of replay_data/*.toml: (quantity, side, bound, deadband in the quantity's unit, off_delay s)
LIMITS = {
    "argon_rf_excursion": [("ne", "high", 1.6e17, 0.05 * 1.6e17, 0.5), ("ne", "low", 2e16, 0.0, 0.0),
                           ("Te", "low", 1.5, 0.05 * 1.5, 0.0), ("Te", "high", 5.0, 0.05 * 5.0, 0.0),
                           ("debye_length", "low", 25e-6, 0.05 * 25e-6, 0.0)],
    "helium_microwave_cutoff": [("cutoff_ratio", "high", 0.9, 0.03 * 0.9, 0.0),
                                ("cutoff_ratio", "high", 1.0, 0.03 * 1.0, 0.0),
                                ("Te", "low", 3.0, 0.05 * 3.0, 0.0), ("Te", "high", 9.0, 0.05 * 9.0, 0.0)],
}


@pytest.mark.parametrize("name", sorted(LIMITS))
def test_row_against_a_hand_computation_with_numpy(name: str) -> None:
    path = DEMO / f"{name}.csv"
    row = summarise(str(path))
    c = _columns(path)
    t, ne = c["t"], c["ne"]
    te, sigma_te = _held(t, c["Te"]), _held(t, c["sigma_Te"])
    assert row["status"] == "ok" and row["damage"] == ""
    assert row["shot"] == 1 and row["started"] == "2026-01-01T10:00:00.000000+00:00"
    assert row["duration"] == pytest.approx(t[-1] - t[0], rel=1e-12)
    assert row["accepted"] == len(t) and row["rejected"] == 0 and row["lost"] == 0
    for key in ("ne", "Te", "p0", "B"):
        if key not in c:
            assert row[f"{key}_median"] is None
            continue
        v = c[key][np.isfinite(c[key])]
        assert row[f"{key}_median"] == pytest.approx(np.median(v), rel=1e-12)
        assert row[f"{key}_min"] == pytest.approx(v.min(), rel=1e-12)
        assert row[f"{key}_max"] == pytest.approx(v.max(), rel=1e-12)
    assert row["ne_sigma"] == pytest.approx(np.nanmedian(c["sigma_ne"]), rel=1e-12)
    assert row["Te_sigma"] == pytest.approx(np.nanmedian(sigma_te), rel=1e-12)
    # electron Debye length sqrt(eps0 k Te / (ne e^2)) (NRL Plasma Formulary; constants CODATA via scipy.constants)
    debye = np.sqrt(sc.epsilon_0 * te * sc.e / (ne * sc.e ** 2))
    assert row["debye_length_median"] == pytest.approx(np.nanmedian(debye), rel=1e-9)
    assert row["debye_length_min"] == pytest.approx(np.nanmin(debye), rel=1e-9)
    # first-order propagation: sigma_lambda / lambda = 1/2 sqrt((sigma_ne/ne)^2 + (sigma_Te/Te)^2) (common practice)
    sigma_debye = debye * 0.5 * np.hypot(c["sigma_ne"] / ne, sigma_te / te)
    assert row["debye_length_sigma"] == pytest.approx(np.nanmedian(sigma_debye), rel=1e-9)
    # number in a Debye sphere (4/3) pi ne lambda_D^3 (NRL Plasma Formulary)
    assert row["debye_number_median"] == pytest.approx(np.nanmedian(4 / 3 * np.pi * ne * debye ** 3), rel=1e-9)
    on = ne >= 1e15                                   # [discharge] on_above of both envelopes
    dt = np.minimum(np.diff(t, append=t[-1]), STALE)  # sample and hold, capped at stale_after
    assert row["discharge_on"] == pytest.approx(dt[on].sum(), rel=1e-12)
    q = {"ne": ne, "Te": te, "debye_length": debye}
    if "B" in c:
        # cutoff density n_c = eps0 m_e omega^2 / e^2 (NRL Plasma Formulary; CODATA via scipy.constants)
        cutoff = ne / (sc.epsilon_0 * sc.m_e * (2 * np.pi * F_WAVE) ** 2 / sc.e ** 2)
        q["cutoff_ratio"] = cutoff
        assert row["cutoff_ratio_median"] == pytest.approx(np.median(cutoff), rel=1e-9)
        assert row["cutoff_ratio_max"] == pytest.approx(cutoff.max(), rel=1e-9)
        # the report judges the criteria on 200 evenly spaced discharge-on samples: within 1 % of all of them
        held = row["held_under_cutoff"]
        assert isinstance(held, float) and held == pytest.approx(np.mean(cutoff[on] <= 1.0), abs=0.01)
        # plasma beta 2 mu0 ne k Te / B^2 (NRL Plasma Formulary; Ti not recorded)
        beta = 2 * sc.mu_0 * ne * te * sc.e / _held(t, c["B"]) ** 2
        assert row["plasma_beta_median"] == pytest.approx(np.nanmedian(beta), rel=1e-9)
    else:
        assert row["cutoff_ratio_median"] is None and row["plasma_beta_median"] is None
    inside, count = _hand_envelope(t, q, on, dt, LIMITS[name])
    assert row["time_in_envelope"] == pytest.approx(inside, rel=1e-9)
    assert row["excursions"] == count
    journal = [json.loads(line) for line in (DEMO / f"{name}.alarms.jsonl").read_text().splitlines() if line]
    raises = [e for e in journal if e["state"] == "unacknowledged" and e["action"] is None]
    assert row["alarms_raised"] == len(raises)
    assert set(str(row["alarm_names"]).replace(";", " ").split()) == {
        f"{n}={sum(e['alarm'] == n for e in raises)}" for n in {e["alarm"] for e in raises}}
    rank = {"advisory": 1, "high": 2, "urgent": 3}
    assert row["priority_max"] == max((e["priority"] for e in raises), key=rank.__getitem__)


@pytest.mark.parametrize("name", sorted(LIMITS))
def test_the_summary_is_the_report(name: str) -> None:
    """The archive's report of a shot equals `regime report`'s in every field (traces apart: not decimated)."""
    path = DEMO / f"{name}.csv"
    mine = shot_report(path).report
    theirs = build_report(path)
    for field in ("shot", "source", "start", "config_origin", "duration", "discharge_on_s", "samples",
                  "samples_by_quantity", "rejected", "lost", "damage", "limits", "alarm_origin", "alarms",
                  "verdicts", "on_above"):
        assert getattr(mine, field) == getattr(theirs, field), field
    assert [q.name for q in mine.quantities] == [q.name for q in theirs.quantities]
    for a, b in zip(mine.quantities, theirs.quantities):
        assert (a.n, a.held) == (b.n, b.held)
        np.testing.assert_array_equal([a.min, a.median, a.max], [b.min, b.median, b.max])
