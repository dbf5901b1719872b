"""InterferometerStage: wrapped, accumulated and I/Q inputs agree; fringe jumps flagged at once and counted once; the zero re-established at discharge-off."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from adapters.batch import Batch
from monitor.diagnostics.interferometer import REASON_CODES, off_run_mean, phase_shift_exact, phase_shift_linear, unwrap
from monitor.diagnostics.interferometer_config import InterferometerConfig
from monitor.diagnostics.interferometer_stage import FLOOR, InterferometerStage
from monitor.physics.densities import cutoff_density

F, L, P = 100e9, 0.2, 2
LAM = sc.c / F
RATE = 1000.0


def config(**kw: object) -> InterferometerConfig:
    base: dict[str, object] = dict(frequency=F, path_length=L, passes=P, discharge_column="discharge",
                                   method="linear", phase_sigma=0.01, floor_nonpositive=False)
    base.update(kw)
    return InterferometerConfig(**base)  # type: ignore[arg-type]


def shot(n_off: int = 300, n_on: int = 1400, peak: float = 3e18, offset: float = 0.4) -> tuple[np.ndarray, ...]:
    """Noise-free density, its phase (linear relation, checked against CODATA elsewhere) and the discharge flag."""
    s = np.linspace(0.0, 1.0, n_on)
    ne_on = peak * np.sin(np.pi * s) ** 2
    ne = np.concatenate([np.zeros(n_off), ne_on, np.zeros(n_off)])
    phase = phase_shift_linear(ne * L * P, LAM) + offset
    discharge = np.concatenate([np.zeros(n_off), np.ones(n_on), np.zeros(n_off)])
    return ne, phase, discharge


def batch(columns: dict[str, np.ndarray], t0: float = 0.0) -> Batch:
    n = len(next(iter(columns.values())))
    return Batch(source="test", t=t0 + np.arange(n) / RATE, columns=columns, seq=np.arange(n))


def wrap(phase: np.ndarray) -> np.ndarray:
    return np.angle(np.exp(1j * phase))


def run_chunks(stage: InterferometerStage, b: Batch, cuts: list[int]) -> dict[str, np.ndarray]:
    edges = [0, *cuts, len(b)]
    parts = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        part = Batch(source=b.source, t=b.t[lo:hi], columns={k: v[lo:hi] for k, v in b.columns.items()},
                     seq=None if b.seq is None else b.seq[lo:hi])
        parts.append(stage.process(part))
    keys = set(parts[0].columns) | {"sigma_ne"}
    out = {k: np.concatenate([p.columns[k] for p in parts]) for k in keys if k != "sigma_ne"}
    out["sigma_ne"] = np.concatenate([p.sigma["ne"] for p in parts])
    return out


def test_unwrap_matches_numpy_unwrap_across_batches() -> None:
    rng = np.random.default_rng(1)
    truth = np.cumsum(rng.uniform(-2.5, 2.5, 5000))            # steps below pi: recoverable
    w = wrap(truth)
    ref = np.unwrap(w)                                          # numpy.unwrap, the reference implementation
    pieces, last_w, last_u = [], math.nan, math.nan
    for chunk in np.array_split(w, [1, 7, 1000, 1001, 4000]):
        u, _ = unwrap(chunk, last_w, last_u)
        pieces.append(u)
        last_w, last_u = float(chunk[-1]), float(u[-1])
    np.testing.assert_allclose(np.concatenate(pieces), ref, rtol=0, atol=1e-9)
    np.testing.assert_allclose(ref - truth, (ref - truth)[0], atol=1e-9)       # off by one constant only


def test_wrapped_accumulated_and_iq_inputs_give_the_same_density() -> None:
    ne, phase, discharge = shot()
    wrapped = batch({"phase": wrap(phase), "discharge": discharge})
    acc = batch({"phase": phase, "discharge": discharge})
    amp = 3.7
    iq = batch({"I_q": amp * np.cos(phase), "Q_q": amp * np.sin(phase), "discharge": discharge})
    a = InterferometerStage(config()).process(wrapped).columns["ne"]
    b = InterferometerStage(config(accumulated=True)).process(acc).columns["ne"]
    out = InterferometerStage(config()).process(iq)
    c = out.columns["ne"]
    scale = 3e18
    np.testing.assert_allclose(a, ne, rtol=0, atol=1e-9 * scale)
    np.testing.assert_allclose(b, ne, rtol=0, atol=1e-9 * scale)
    np.testing.assert_allclose(c, ne, rtol=0, atol=1e-9 * scale)
    np.testing.assert_allclose(out.columns["iq_amplitude"], amp, rtol=1e-12)
    assert out.columns["fringe_ok"].min() == 1.0 and out.columns["fringe_jumps"][-1] == 0
    assert (phase.max() - phase.min()) > 3 * math.pi         # more than a fringe and a half unwrapped


def test_result_does_not_depend_on_where_the_stream_is_cut() -> None:
    ne, phase, discharge = shot()
    rng = np.random.default_rng(3)
    noisy = phase + 0.02 * rng.standard_normal(len(phase))
    noisy[900:] += 1.3 * math.pi                               # a lost fringe
    b = batch({"I_q": np.cos(noisy), "Q_q": np.sin(noisy), "discharge": discharge})
    cfg = config(phase_sigma=None, amplitude_min=0.5, amplitude_relative=True)
    whole = run_chunks(InterferometerStage(cfg), b, [])
    for cuts in ([1, 2, 3], [299, 300, 301, 899, 900, 901], sorted(rng.choice(np.arange(1, len(b)), 40, replace=False))):
        cut = run_chunks(InterferometerStage(cfg), b, [int(c) for c in cuts])
        for key in ("fringe_ok", "fringe_reason", "fringe_jumps", "ne_exact"):
            np.testing.assert_array_equal(cut[key], whole[key], err_msg=key)
        np.testing.assert_allclose(cut["ne"], whole["ne"], rtol=1e-9, atol=1e6)
        np.testing.assert_allclose(cut["sigma_ne"], whole["sigma_ne"], rtol=1e-9)


def test_injected_fringe_jump_is_flagged_at_its_sample_counted_once_and_cleared_by_the_off_rezero() -> None:
    ne, phase, discharge = shot()
    k = 1000
    jumped = phase.copy()
    jumped[k:] += 1.3 * math.pi                                 # looks like -0.7 pi to continuity unwrapping
    stage = InterferometerStage(config())
    out = stage.process(batch({"phase": wrap(jumped), "discharge": discharge}))
    ok, reason, jumps = out.columns["fringe_ok"], out.columns["fringe_reason"], out.columns["fringe_jumps"]
    first_off = 300 + 1400
    assert ok[:k].min() == 1 and ok[k] == 0                      # flagged at the very sample of the step
    assert ok[k:first_off].max() == 0 and ok[first_off:].min() == 1
    assert set(reason[k:first_off]) == {REASON_CODES["phase_step"]}
    assert jumps[k - 1] == 0 and jumps[k:].min() == 1 and jumps[-1] == 1
    assert stage.counts.fringe_jumps == 1 and stage.counts.by_reason == {"phase_step": 1}
    assert stage.counts.last_event_t == pytest.approx(k / RATE)
    # the unwrapped phase lost 2 pi: the density is off by one fringe until the off period re-zeroes it
    per_rad = 1 / (sc.physical_constants["classical electron radius"][0] * LAM * P * L)   # CODATA r_e
    fringe = 2 * math.pi * per_rad
    truth = ne[k:first_off] + 1.3 * math.pi * per_rad
    np.testing.assert_allclose(out.columns["ne"][k:first_off] - truth, -fringe, rtol=1e-9)
    np.testing.assert_allclose(out.columns["ne"][first_off + 1:], 0.0, atol=1e-6 * fringe)


def test_zero_is_reestablished_at_each_discharge_off_and_a_fixed_reference_is_not() -> None:
    ne1, phase1, d1 = shot(offset=0.4)
    ne2, phase2, d2 = shot(offset=0.4 + 0.9)                    # the bench phase moved between shots
    cols = {"phase": wrap(np.concatenate([phase1, phase2])), "discharge": np.concatenate([d1, d2])}
    b = batch(cols)
    truth = np.concatenate([ne1, ne2])
    jump_at = len(ne1)                                          # the offset steps by 0.9 rad (< pi/2) while off
    out = InterferometerStage(config(jump_threshold=0.3, zero_samples=200)).process(b)
    # from the second discharge on (the zero: the last 200 off samples, all after the move)
    on2 = jump_at + 300
    np.testing.assert_allclose(out.columns["ne"][on2:], truth[on2:], atol=1e-6 * 3e18)
    assert abs(out.columns["ne"][on2 - 250] - truth[on2 - 250]) > 1e17      # mid-move the zero was still settling
    # off-period steps are absorbed by the re-zero: no fringe jump counted
    assert out.columns["fringe_jumps"][-1] == 0
    fixed = InterferometerStage(config(reference=0.4)).process(b)
    bias = fixed.columns["ne"][jump_at + 400] - truth[jump_at + 400]
    per_rad = 1 / (sc.physical_constants["classical electron radius"][0] * LAM * P * L)
    assert bias == pytest.approx(0.9 * per_rad, rel=1e-6)


def test_amplitude_drop_and_near_cutoff_make_the_data_doubtful() -> None:
    ne, phase, discharge = shot()
    amp = np.ones(len(phase))
    amp[1200:1203] = 0.1
    out = InterferometerStage(config(amplitude_min=0.3)).process(
        batch({"I_q": amp * np.cos(phase), "Q_q": amp * np.sin(phase), "discharge": discharge}))
    assert out.columns["fringe_ok"][1199] == 1 and out.columns["fringe_ok"][1200] == 0
    assert out.columns["fringe_reason"][1500] == REASON_CODES["amplitude_drop"]
    assert out.columns["fringe_jumps"][-1] == 1
    # a density climbing to 0.95 of the cutoff, exact form
    nc = float(cutoff_density(F))
    ne_c, _, discharge_c = shot(n_on=20_000, peak=0.95 * nc)
    stage = InterferometerStage(config(method="auto", cutoff_margin=0.9))
    exact_phase = phase_shift_exact(ne_c, F, P * L) + 0.4        # checked against omega/c at cutoff elsewhere
    res = stage.process(batch({"phase": wrap(exact_phase), "discharge": discharge_c}))
    exact = res.columns["ne_exact"] == 1
    np.testing.assert_allclose(res.columns["ne"][exact], ne_c[exact], rtol=1e-6)
    np.testing.assert_allclose(res.columns["ne"][~exact], ne_c[~exact], rtol=0.011, atol=1e-9 * nc)   # linear: < 1 %
    ratio = res.columns["ne"] / nc
    first = int(np.argmax(ratio >= 0.9))
    assert res.columns["fringe_ok"][first - 1] == 1 and res.columns["fringe_ok"][first] == 0
    assert res.columns["fringe_reason"][first] == REASON_CODES["near_cutoff"]
    assert res.columns["ne_exact"][first] == 1 and stage.counts.fringe_jumps == 1


def test_no_zero_until_the_first_off_period_and_rows_without_phase_pass_through() -> None:
    ne, phase, discharge = shot()
    n = len(phase)
    start = 350                                                 # the stream begins with the discharge on
    te = np.full(n, np.nan)
    te[::50] = 3.0
    ph = wrap(phase).copy()
    ph[::50] = np.nan                                           # slow-channel rows carry no phase
    b = batch({"phase": ph[start:], "discharge": discharge[start:], "Te": te[start:]})
    out = InterferometerStage(config()).process(b)
    rows = np.isfinite(ph[start:])
    assert np.isnan(out.columns["ne"][~rows]).all() and np.isnan(out.columns["fringe_ok"][~rows]).all()
    np.testing.assert_array_equal(out.columns["Te"], te[start:])
    reason = out.columns["fringe_reason"][rows]
    first_off = 300 + 1400 - start
    assert set(reason[: int(rows[:first_off].sum())]) == {REASON_CODES["no_zero"]}
    assert out.columns["fringe_ok"][first_off:][rows[first_off:]].min() == 1
    assert out.columns["fringe_jumps"][rows][-1] == 0
    plain = batch({"Te": te})
    stage = InterferometerStage(config())
    assert stage.process(plain) is plain


def test_phase_noise_estimated_from_the_off_periods_and_doubtful_data_withheld_on_request() -> None:
    ne, phase, discharge = shot(n_off=2000)
    rng = np.random.default_rng(11)
    s_iq = 0.02
    i = 2.0 * np.cos(phase) + s_iq * rng.standard_normal(len(phase))
    q = 2.0 * np.sin(phase) + s_iq * rng.standard_normal(len(phase))
    out = InterferometerStage(config(phase_sigma=None)).process(batch({"I_q": i, "Q_q": q, "discharge": discharge}))
    per_rad = 1 / (sc.physical_constants["classical electron radius"][0] * LAM * P * L)
    # the phase noise of I/Q with independent noise s on amplitude A is s / A (common practice)
    assert out.sigma["ne"][2500] / per_rad == pytest.approx(s_iq / 2.0, rel=0.1)
    assert np.std(out.columns["ne"][500:1999]) / per_rad == pytest.approx(s_iq / 2.0, rel=0.1)
    jumped = phase.copy()
    jumped[2500:] += 1.3 * math.pi
    held = InterferometerStage(config(withhold_doubtful=True)).process(
        batch({"phase": wrap(jumped), "discharge": discharge}))
    assert np.isnan(held.columns["ne"][2500:3400]).all() and np.isfinite(held.columns["ne"][:2500]).all()
    assert np.isfinite(held.columns["ne"][3400:]).all()


def test_discharge_from_the_density_when_no_discharge_column_and_a_negative_phase_sign() -> None:
    ne, phase, _ = shot(offset=0.0)
    b = batch({"phase": wrap(-phase + 0.7)})                   # the instrument counts the phase the other way
    out = InterferometerStage(config(discharge_column=None, phase_sign=-1.0), on_above=1e16).process(b)
    # the discharge is judged from the density itself (on above 1e16, off below 0.9e16), so the samples
    # of the ramps under that threshold take part in the zero: a bias of a fraction of the threshold
    on = ne > 1e17
    np.testing.assert_allclose(out.columns["ne"][on], ne[on], atol=1e15)
    assert np.abs(out.columns["ne"][-100:]).max() < 1e15           # off again, and re-zeroed
    assert out.columns["fringe_ok"].min() == 1


def test_densities_at_or_below_zero_are_floored_by_default_and_marked() -> None:
    ne, phase, discharge = shot()
    rng = np.random.default_rng(2)
    noisy = phase + 0.01 * rng.standard_normal(len(phase))
    b = batch({"phase": wrap(noisy), "discharge": discharge})
    kept = InterferometerStage(config()).process(b)
    floored = InterferometerStage(config(floor_nonpositive=True)).process(b)
    low = kept.columns["ne"] <= 0
    assert 100 < low.sum() < 600                                # about half of the off samples
    np.testing.assert_array_equal(floored.columns["ne"][low], FLOOR)
    np.testing.assert_array_equal(floored.columns["ne"][~low], kept.columns["ne"][~low])
    np.testing.assert_array_equal(floored.columns["ne_floored"], low.astype(float))
    np.testing.assert_array_equal(floored.sigma["ne"], kept.sigma["ne"])
    assert "ne_floored" not in kept.columns


@pytest.mark.parametrize("window", [1, 7, 10_000])
def test_off_run_mean_paths_agree_with_a_plain_loop(window: int) -> None:
    rng = np.random.default_rng(window)
    lengths = rng.integers(1, 40, 200)
    off = np.repeat(np.arange(200) % 2 == 0, lengths)
    x = rng.normal(size=len(off))
    # the definition, one sample at a time: the mean of the last `window` samples of the current off run,
    # held through the on samples that follow
    expected, run, held = np.empty(len(x)), [], math.nan
    for k in range(len(x)):
        if off[k]:
            run = (run if k and off[k - 1] else []) + [x[k]]
            held = float(np.mean(run[-window:]))
        expected[k] = held
    whole, _, _ = off_run_mean(x, off, np.empty(0), math.nan, 0.0, window)     # many changes: the array path
    np.testing.assert_allclose(whole, expected, rtol=1e-9, atol=1e-12)
    parts, tail, mean0, count0 = [], np.empty(0), math.nan, 0.0
    for lo in range(0, len(x), 37):                                              # few changes: the stretch path
        m, c, tail = off_run_mean(x[lo:lo + 37], off[lo:lo + 37], tail, mean0, count0, window)
        mean0, count0 = float(m[-1]), float(c[-1])
        parts.append(m)
    np.testing.assert_allclose(np.concatenate(parts), expected, rtol=1e-9, atol=1e-12)


def test_per_sample_phase_sigma_and_iq_noise_add_in_quadrature() -> None:
    ne, phase, discharge = shot()
    per_rad = 1 / (sc.physical_constants["classical electron radius"][0] * LAM * P * L)   # CODATA r_e
    given = np.full(len(phase), 0.03)
    b = Batch(source="test", t=np.arange(len(phase)) / RATE, columns={"phase": wrap(phase), "discharge": discharge},
              sigma={"phase": given})
    out = InterferometerStage(config(phase_sigma=0.04, reference=0.4)).process(b)
    np.testing.assert_allclose(out.sigma["ne"], 0.05 * per_rad, rtol=1e-9)          # hypot(0.04, 0.03)
    amp = 2.0
    iq = batch({"I_q": amp * np.cos(phase), "Q_q": amp * np.sin(phase), "discharge": discharge})
    out = InterferometerStage(config(phase_sigma=0.0, iq_noise=0.02, reference=0.4)).process(iq)
    np.testing.assert_allclose(out.sigma["ne"], 0.01 * per_rad, rtol=1e-9)          # s / A (common practice)
