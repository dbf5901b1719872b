"""The simulator's per-sample uncertainties: present, deterministic, consistent with its noise, and what they do to the demo."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy import stats

from adapters import scenarios as sc
from adapters.simulated import SCENARIOS, SimSource, generate, generate_samples, scenario_length

CHANNELS = ("ne", "Te", "p0", "B")


def test_every_channel_carries_a_sigma_where_it_carries_a_value() -> None:
    b = generate("demo", seed=4, rate=500.0)
    assert set(b.sigma) == set(b.columns) == set(CHANNELS)
    for ch in CHANNELS:
        v, s = b.columns[ch], b.sigma[ch]
        assert np.array_equal(np.isnan(v), np.isnan(s)), ch
        have = np.isfinite(v)
        assert have.sum() > 100 and np.all(s[have] > 0), ch
        rel = SCENARIOS["demo"].instruments.of(ch).sigma_rel
        np.testing.assert_allclose(s[have] / np.abs(v[have]), rel, rtol=1e-12)


def test_stated_sigma_is_the_quadrature_sum_of_random_and_calibration_parts() -> None:
    for name, scen in SCENARIOS.items():
        for ch in CHANNELS:
            inst = scen.instruments.of(ch)
            assert inst.sigma_rel == pytest.approx(math.sqrt(inst.random ** 2 + inst.calibration ** 2)), (name, ch)
            assert inst.sigma_rel >= inst.random > 0, (name, ch)


def test_sigma_is_deterministic_and_independent_of_chunking() -> None:
    n = scenario_length("dropout", 400.0)
    whole = generate_samples("dropout", 9, 400.0, 0, n)
    again = generate_samples("dropout", 9, 400.0, 0, n)
    cuts = [0, 1, 777, 3001, 3002, 9999, n]
    parts = [generate_samples("dropout", 9, 400.0, a, b) for a, b in zip(cuts, cuts[1:])]
    for ch in CHANNELS:
        assert np.array_equal(whole.sigma[ch], again.sigma[ch], equal_nan=True)
        assert np.array_equal(np.concatenate([p.sigma[ch] for p in parts]), whole.sigma[ch], equal_nan=True)


def test_silent_probe_has_no_value_and_no_sigma() -> None:
    b = generate("dropout", seed=1, rate=1000.0)
    silent = (b.t >= 10.0) & (b.t < 13.0)
    assert np.all(np.isnan(b.columns["Te"][silent])) and np.all(np.isnan(b.sigma["Te"][silent]))
    assert np.isfinite(b.sigma["ne"][silent]).all()


@pytest.mark.parametrize("ch, level", [("ne", sc.NE_STEADY), ("Te", sc.TE_STEADY), ("p0", sc.P0), ("B", sc.B)])
def test_steady_scatter_agrees_with_the_random_part_of_the_stated_sigma(ch: str, level: float) -> None:
    """The relative scatter about the known level is the instrument's random part (chi-square bound, p = 1e-6
    each side; scipy.stats.chi2), and the readings' deviations divided by their stated sigma scatter by
    random / sigma_rel: the stated sigma covers the scatter and adds the calibration part on top."""
    b = generate("steady", seed=12, rate=1000.0)
    v = b.columns[ch]
    have = np.isfinite(v)
    x, s = v[have], b.sigma[ch][have]
    n = len(x)
    inst = SCENARIOS["steady"].instruments.of(ch)
    var_rel = np.sum((x / level - 1.0) ** 2) / n                     # the true level is known: n degrees of freedom
    lo, hi = stats.chi2.ppf(1e-6, n) / n, stats.chi2.ppf(1 - 1e-6, n) / n
    assert lo < var_rel / inst.random ** 2 < hi, (ch, n, math.sqrt(var_rel))
    z = (x - level) / s                                              # s is relative to the reading, not the level:
    ratio = np.sqrt(np.mean(z ** 2)) / (inst.random / inst.sigma_rel)  # a second-order effect, < 1 % at these sizes
    assert math.sqrt(lo) * 0.99 < ratio < math.sqrt(hi) * 1.01, (ch, ratio)
    assert np.std(z) < 1.0                                           # the stated sigma never understates the scatter


def test_pacing_source_keeps_the_sigma_when_it_shifts_time() -> None:
    src = SimSource("steady", seed=2, rate=1000.0, speed=None, duration=2.0, epoch=1.0e9)
    src.open()
    got = []
    while True:
        p = src.poll(1.0)
        got += p.batches
        if p.status.state.name == "ENDED":
            break
    assert sum(len(b) for b in got) == 2000
    ref = generate("steady", seed=2, rate=1000.0, t0=0.0, t1=2.0)
    for ch in CHANNELS:
        joined = np.concatenate([b.sigma[ch] for b in got])
        assert np.array_equal(joined, ref.sigma[ch], equal_nan=True)
    assert got[0].t[0] == pytest.approx(1.0e9)


# -- the demo through the real pipeline and alarm engine ------------------------------------------------

class _Collect:
    def __init__(self) -> None:
        self.events: list[Any] = []
        self.frames: list[Any] = []

    def on_frame(self, frame: Any) -> None:
        self.frames.append(frame)

    def on_rejections(self, rejections: list[Any]) -> None:
        pass

    def on_status(self, status: Any) -> None:
        pass

    def on_alarm(self, event: Any) -> None:
        self.events.append(event)

    def close(self) -> None:
        pass


def _demo_envelope_text() -> str:
    from monitor.commands.demo import envelope_path

    return Path(envelope_path()).read_text()


def _run_demo(config_path: Path | str, seed: int = 0) -> _Collect:
    from monitor.config import load_config
    from monitor.session import Session, make_engine

    config = load_config(config_path)
    sink = _Collect()
    session = Session(SimSource("demo", seed=seed, rate=1000.0, speed=None, epoch=0.0), config, [sink],
                      engine=make_engine(config), live=False)
    session.run()
    session.close()
    return sink


def _raised(sink: _Collect) -> list[tuple[str, float]]:
    return [(e.alarm, e.time) for e in sink.events if e.state.name == "UNACKNOWLEDGED" and e.action is None]


def _with_modes(tmp_path: Path, modes: dict[str, str]) -> Path:
    """The demo envelope with ``uncertainty``/``k`` lines added to the named limits."""
    text = _demo_envelope_text()
    for name, lines in modes.items():
        head = f'name = "{name}"\n'
        assert text.count(head) == 1
        text = text.replace(head, head + lines)
    path = tmp_path / "envelope.toml"
    path.write_text(text)
    return path


@pytest.mark.parametrize("seed", [0, 7])
def test_demo_readings_show_sigma_and_its_alarms_stay_those_of_the_excursion(seed: int) -> None:
    from monitor.commands.demo import envelope_path

    sink = _run_demo(envelope_path(), seed)
    steady = [f for f in sink.frames if len(f.t) and 10.0 <= f.t[0] < 24.0]
    assert steady
    for name in ("ne", "Te", "cutoff_ratio", "debye_length"):
        s = np.concatenate([f.sigma[name] for f in steady])
        v = np.concatenate([f.values[name] for f in steady])
        ok = np.isfinite(v)
        assert np.isfinite(s[ok]).all() and np.all(s[ok] > 0), name
    ne_rel = SCENARIOS["demo"].instruments.ne.sigma_rel
    ratio = np.concatenate([f.values["cutoff_ratio"] for f in steady])
    ratio_s = np.concatenate([f.sigma["cutoff_ratio"] for f in steady])
    np.testing.assert_allclose(ratio_s / ratio, ne_rel, rtol=1e-6)       # cutoff ratio is proportional to ne
    raised = _raised(sink)
    names = {a for a, _ in raised if not a.endswith(":predict")}
    assert names == {"ne_high", "over_cutoff"}, raised
    assert all(25.0 <= t < 33.0 for _, t in raised), raised          # the rise and hold of the excursion


def test_uncertainty_aware_limits_on_the_demo_still_see_the_excursion_only(tmp_path: Path) -> None:
    """With k = 2 both ways the stated sigma is small enough that the excursion (6x steady) is raised,
    and large enough to move the raise time: 'possible' raises earlier, 'certain' later than plain."""
    from monitor.commands.demo import envelope_path

    plain = dict(_raised(_run_demo(envelope_path())))
    possible = dict(_raised(_run_demo(_with_modes(tmp_path, {
        "ne_high": 'uncertainty = "possible"\nk = 2\n', "over_cutoff": 'uncertainty = "possible"\nk = 2\n'}))))
    (tmp_path / "c").mkdir()
    certain = dict(_raised(_run_demo(_with_modes(tmp_path / "c", {
        "ne_high": 'uncertainty = "certain"\nk = 2\n', "over_cutoff": 'uncertainty = "certain"\nk = 2\n'}))))
    for name in ("ne_high", "over_cutoff"):
        assert 25.0 <= possible[name] < plain[name] < certain[name] < 33.0, (name, possible, plain, certain)
    for run in (possible, certain):
        assert {a for a in run if not a.endswith(":predict")} == {"ne_high", "over_cutoff"}, run
