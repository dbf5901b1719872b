"""The [probe] table and `regime probe` as a real subprocess (sys.executable -m monitor probe ...)."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import pytest

from monitor.config import load_config
from monitor.diagnostics.probe_config import probe_spec
from monitor.errors import ConfigError

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "replay_data" / "probe_sweeps.csv"
DEMO_CONFIG = ROOT / "replay_data" / "probe_sweeps.toml"


def _write(tmp_path: Path, text: str) -> Path:
    p = tmp_path / "probe.toml"
    p.write_text(text)
    return p


def test_probe_table_with_units_and_device_ion(tmp_path: Path) -> None:
    spec = probe_spec(load_config(_write(tmp_path, '[device]\nA = 4.0026\nZ = 1\n[probe]\nkind = "single"\n'
                                         'geometry = "cylinder"\nradius = "0.1mm"\nlength = "5mm"\n'
                                         "current_sign = -1\n")))
    assert spec.radius == pytest.approx(1e-4) and spec.length == pytest.approx(5e-3)
    # a cylinder collects on its side, 2 pi r l, the end face neglected (common practice for probe tips)
    assert spec.collecting_area == pytest.approx(2 * math.pi * 1e-4 * 5e-3)
    assert spec.ion_mass_u == pytest.approx(4.0026) and spec.current_sign == -1.0
    plane = probe_spec(load_config(_write(tmp_path, '[probe]\ngeometry = "plane"\narea = "2cm^2"\n')))
    assert plane.collecting_area == pytest.approx(2e-4)


@pytest.mark.parametrize(("body", "key"), [
    ('[probe]\nkind = "triple"\n', "probe.kind"),
    ('[probe]\ngeometry = "plane"\n', "probe.area"),
    ('[probe]\nradius = "1 parsec"\nlength = "5mm"\n', "probe.radius"),
    ('[probe]\nradius = "-1mm"\nlength = "5mm"\n', "probe.radius"),
    ('[probe]\nradius = "1mm"\n', "probe.length"),
    ('[probe]\nradius = "1mm"\nlength = "5mm"\ncurrent_sign = 2\n', "probe.current_sign"),
    ('[probe]\nradius = "1mm"\nlength = "5mm"\nbias = 3\n', "probe.bias"),
])
def test_errors_name_the_file_and_key(tmp_path: Path, body: str, key: str) -> None:
    path = _write(tmp_path, body)
    with pytest.raises(ConfigError) as info:
        probe_spec(load_config(path))
    assert info.value.key == key and str(path) in str(info.value)


def _run(*args: str) -> subprocess.CompletedProcess[str]:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-m", "monitor", "probe", *args], capture_output=True, text=True,
                          env=env, cwd=ROOT, timeout=120)


def test_cli_json_one_object_per_sweep_then_summary() -> None:
    out = _run(str(DEMO), "--config", str(DEMO_CONFIG), "--json")
    assert out.returncode == 0, out.stderr
    objs = [json.loads(line) for line in out.stdout.splitlines()]
    sweeps = [o for o in objs if o["type"] == "sweep"]
    assert [o["sweep"] for o in sweeps] == list(range(48))
    fields = {"sweep", "t", "Te", "ne", "ni", "Vf", "Vp", "I_sat", "method", "quality", "reason"}
    assert all(fields | {f"sigma_{k}" for k in ("Te", "ne", "ni", "Vf", "Vp", "I_sat")} <= set(o) for o in sweeps)
    rejected = {o["sweep"]: o["reason"] for o in sweeps if o["quality"] == "rejected"}
    assert rejected == {10: "not_finite", 20: "saturated_rail", 30: "non_monotonic_bias", 40: "too_few_points"}
    good = [o for o in sweeps if o["quality"] != "rejected"]
    assert all(2.0 < o["Te"] < 5.5 and 1e15 < o["ne"] < 1e17 and o["sigma_Te"] > 0 for o in good)
    summary = objs[-1]
    assert summary["type"] == "summary" and summary["sweeps"] == 48 and summary["rejected"] == 4
    assert summary["rejected_by_reason"] == {"non_monotonic_bias": 1, "not_finite": 1, "saturated_rail": 1,
                                             "too_few_points": 1}


def test_cli_text_and_plot(tmp_path: Path) -> None:
    pytest.importorskip("matplotlib")
    png = tmp_path / "sweep.png"
    out = _run(str(DEMO), "--config", str(DEMO_CONFIG), "--plot", str(png), "--sweep", "5")
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert lines[0].startswith("sweep      0") and "Te=" in lines[0] and "[oml]" in lines[0]
    assert "rejected: saturated_rail" in lines[20]
    assert lines[-2].startswith("summary: 48 sweeps")
    assert png.stat().st_size > 10_000 and png.read_bytes()[:4] == b"\x89PNG"


def test_cli_bad_usage_exits_2(tmp_path: Path) -> None:
    assert _run(str(tmp_path / "absent.csv")).returncode == 2
    bad = _write(tmp_path, '[probe]\nkind = "triple"\n')
    out = _run(str(DEMO), "--config", str(bad))
    assert out.returncode == 2 and "probe.kind" in out.stderr


def test_cli_double_probe_reversed_sign_and_direction(tmp_path: Path) -> None:
    """A double probe swept downwards by an instrument reporting the other sign (current_sign = -1)."""
    import numpy as np

    from monitor.diagnostics.probe_model import double_probe_current, noisy
    from monitor.diagnostics.probe_spec import ProbeSpec

    spec = ProbeSpec(kind="double", radius=1e-4, length=5e-3)
    V = np.tile(np.linspace(40, -40, 200), (4, 1))                    # downwards
    I = -noisy(double_probe_current(V, 1e16, 4.0, spec), 0.0, 2e-7, 1)  # the other sign
    rows = [f"{s},{s + j * 1e-3},{float(V[s, j])!r},{float(I[s, j])!r}" for s in range(4) for j in range(200)]
    data = tmp_path / "double.csv"
    data.write_text("sweep,t,V,I\n" + "\n".join(rows) + "\n")
    cfg = _write(tmp_path, '[probe]\nkind = "double"\nradius = "0.1mm"\nlength = "5mm"\ncurrent_sign = -1\n')
    png = tmp_path / "double.png"
    args = [str(data), "--config", str(cfg), "--json"]
    out = _run(*args, *(["--plot", str(png)] if _has_matplotlib() else []))
    assert out.returncode == 0, out.stderr
    sweeps = [json.loads(x) for x in out.stdout.splitlines() if '"type":"sweep"' in x]
    assert [s["quality"] for s in sweeps] == ["accepted"] * 4
    assert all(abs(s["Te"] / 4.0 - 1) < 0.05 and abs(s["ne"] / 1e16 - 1) < 0.05 for s in sweeps)
    assert all(s["method"] == "double_bohm" and s["Vf"] is None for s in sweeps)


def _has_matplotlib() -> bool:
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return False
    return True
