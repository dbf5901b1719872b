"""The simulated quadrature interferometer: its physics against the monitor's, determinism in any chunking, the demo file, the source."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import numpy as np
import pytest

from adapters import sim_interferometer as sim
from adapters.base import LinkState
from adapters.batch import Batch
from monitor.diagnostics.interferometer import phase_shift_exact
from monitor.diagnostics.interferometer_source import InterferometerSource, simulator_config
from monitor.diagnostics.interferometer_stage import InterferometerStage
from monitor.physics import constants as C

ROOT = Path(__file__).resolve().parents[2]


def test_simulator_constants_and_forward_phase_are_the_monitors() -> None:
    # adapters may not import monitor: the simulator keeps its own copy of CODATA 2022 values
    assert (sim._E, sim._ME, sim._EPS0, sim._C) == (C.ELEMENTARY_CHARGE, C.ELECTRON_MASS, C.EPSILON_0,
                                                    C.SPEED_OF_LIGHT)
    n = np.linspace(0, 5e19, 7)
    sc = sim.SCENARIO
    np.testing.assert_allclose(sim.phase_of_density(n), phase_shift_exact(n, sc.frequency, sc.passes * sc.path_length),
                               rtol=1e-14)


def test_generate_is_the_same_in_any_chunking() -> None:
    whole = sim.generate_samples(3, 1000.0, 0, 5000)
    parts = [sim.generate_samples(3, 1000.0, a, b) for a, b in ((0, 1), (1, 8191), (8191, 8193), (8193, 9000))]
    for key in ("I_q", "Q_q", "discharge"):
        np.testing.assert_array_equal(np.concatenate([p.columns[key] for p in parts])[:5000], whole.columns[key])
    assert len(whole) == 5000 and whole.seq is not None and whole.seq[-1] == 4999
    assert len(sim.generate_samples(3, 1000.0, 4990, 6000)) == 10                  # ends with the scenario
    assert len(sim.generate_samples(3, 1000.0, 4990, 6000, loop=True)) == 1010
    other = sim.generate_samples(4, 1000.0, 0, 5000)
    assert not np.array_equal(other.columns["I_q"], whole.columns["I_q"])


def test_scenario_through_the_stage_loses_one_fringe_at_the_step() -> None:
    b = sim.generate(seed=1, rate=2000.0)
    out = InterferometerStage(simulator_config()).process(b)
    ok, t = out.columns["fringe_ok"], b.t
    k = int(np.argmax(ok == 0))
    assert t[k] == pytest.approx(sim.SCENARIO.step_at, abs=1 / 2000.0)
    assert out.columns["fringe_jumps"][-1] == 1
    steady = (t > 1.6) & (t < 2.49)
    np.testing.assert_allclose(out.columns["ne"][steady], sim.density_at(t[steady]), rtol=0.03)
    # noise: I and Q at 0.01 each on an amplitude of 1, a phase noise of 0.01 rad (common practice: s / A)
    sc = sim.SCENARIO
    truth = sim.phase_of_density(sim.density_at(t)) + sc.offset + sc.drift * t
    resid = np.angle(np.exp(1j * (np.arctan2(b.columns["Q_q"], b.columns["I_q"]) - truth)))
    quiet = (t < sc.step_at) | (t > sc.step_at + 0.01)
    assert np.std(resid[quiet]) == pytest.approx(sc.iq_noise, rel=0.05)


def test_source_at_full_speed_and_wrapped() -> None:
    src = InterferometerSource(sim.InterferometerSimSource(speed=None, epoch=100.0), simulator_config())
    src.open()
    batches: list[Batch] = []
    for _ in range(100):
        polled = src.poll(0.01)
        batches.extend(polled.batches)
        if polled.status is not None and polled.status.state is LinkState.ENDED:
            break
    src.close()
    t = np.concatenate([b.t for b in batches])
    assert len(t) == 5000 and t[0] == 100.0 and src.counts.fringe_jumps == 1
    assert "1 fringe jump" in src.status().message
    with pytest.raises(Exception, match="unknown interferometer scenario"):
        sim.InterferometerSimSource("steady")


def test_demo_file_is_what_its_script_writes(tmp_path: Path) -> None:
    spec = importlib.util.spec_from_file_location("make_interferometer_demo", ROOT / "replay_data" /
                                                  "make_interferometer_demo.py")
    assert spec is not None and spec.loader is not None
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    size = mod.write(tmp_path / "demo.csv")
    shipped = ROOT / "replay_data" / "interferometer_iq.csv"
    assert (tmp_path / "demo.csv").read_bytes() == shipped.read_bytes()
    assert size < 300_000


def test_a_large_batch_is_analysed_in_blocks_with_the_same_result() -> None:
    b = sim.generate(seed=2, rate=60_000.0)                    # 300,000 samples: cut into blocks by the stage
    whole = InterferometerStage(simulator_config()).process(b)
    stage = InterferometerStage(simulator_config())
    parts = [stage.process(Batch(source=b.source, t=b.t[k:k + 29_999], columns={c: v[k:k + 29_999] for c, v in
                                                                              b.columns.items()}))
             for k in range(0, len(b), 29_999)]
    # the zero is a mean taken in other sums when cut elsewhere: equal to rounding (1e6 m^-3 in 4e18)
    for key, atol in (("ne", 1e6), ("fringe_ok", 0), ("fringe_jumps", 0), ("phase_shift", 1e-9)):
        np.testing.assert_allclose(np.concatenate([p.columns[key] for p in parts]), whole.columns[key],
                                   rtol=1e-9, atol=atol, err_msg=key)
    assert whole.columns["fringe_jumps"][-1] == 1 and len(whole.columns["ne"]) == 300_000
