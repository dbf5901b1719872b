"""The post-shot report against a hand-computed synthetic shot; Markdown, JSON, the figure; no screen imported."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from monitor.report import build_report, to_json, to_markdown
from monitor.report.summary import limit_summary, sample_durations

from recording_helpers import REGIME, ROOT, env

CONFIG = """
[device]
length = "0.3m"
[discharge]
on_above = 1e15
[[limit]]
name = "ne_high"
quantity = "ne"
high = 1.5e17
priority = "high"
"""


def _shot(tmp_path: Path) -> tuple[Path, Path]:
    """t = 0.0 .. 10.0 s every 0.1 s; ne off (1e14) for t < 1 and at t = 10, 5e16 on, and 2e17
    for 4.0 <= t < 5.0 with a 3e17 peak at t = 4.5; Te 3 eV throughout."""
    t = np.round(np.arange(101) * 0.1, 10)
    ne = np.full(101, 5e16)
    ne[t < 1.0] = 1e14
    ne[100] = 1e14
    ne[(t >= 4.0) & (t < 5.0)] = 2e17
    ne[45] = 3e17
    rows = "".join(f"{a!r},{b!r},3.0\n" for a, b in zip(t.tolist(), ne.tolist()))
    csv = tmp_path / "synthetic.csv"
    csv.write_text("t,ne,Te\n" + rows)
    cfg = tmp_path / "env.toml"
    cfg.write_text(CONFIG)
    return csv, cfg


def test_report_numbers_against_hand_computation(tmp_path: Path) -> None:
    csv, cfg = _shot(tmp_path)
    r = build_report(csv, config_path=str(cfg))
    # by hand: 101 samples over 10 s; each sample holds 0.1 s until the next; on at t = 1.0 .. 9.9
    assert r.samples == 101 and r.duration == pytest.approx(10.0)
    assert r.discharge_on_s == pytest.approx(9.0)
    (lim,) = r.limits
    assert lim.evaluated_s == pytest.approx(9.0) and lim.inside_s == pytest.approx(8.0)
    assert lim.fraction == pytest.approx(8.0 / 9.0)
    (exc,) = lim.excursions
    assert (exc.side, exc.start, exc.end, exc.peak) == ("high", 4.0, 5.0, 3e17)
    assert exc.duration == pytest.approx(1.0)
    q = {s.name: s for s in r.quantities}
    assert (q["ne"].min, q["ne"].median, q["ne"].max, q["ne"].n) == (1e14, 5e16, 3e17, 101)
    assert (q["Te"].min, q["Te"].median, q["Te"].max) == (3.0, 3.0, 3.0)
    # NRL Plasma Formulary: lambda_D = 7.43e2 Te^1/2 ne^-1/2 cm (Te in eV, ne in cm^-3);
    # ne = 5e10 cm^-3, Te = 3 eV -> 5.755e-3 cm (the formulary's 3-digit coefficient)
    assert q["debye_length"].median == pytest.approx(5.755e-5, rel=2e-3)
    states = [(a["alarm"], a["state"], a["time"]) for a in r.alarms if a["alarm"] == "ne_high"]
    assert ("ne_high", "unacknowledged", 4.0) in states
    assert ("ne_high", "returned_unacknowledged", 5.0) in states
    assert r.alarm_origin.startswith("alarm engine")
    names = {v["name"] for v in r.verdicts}
    assert "quasi_neutral" in names and all(v["holds"] for v in r.verdicts if v["name"] == "quasi_neutral")
    md = to_markdown(r)
    assert "| ne_high | ne | - | 1.5e+17 | 9.000 | 8.000 | 88.9 % | 1 |" in md
    assert "| ne_high | high | 4.000 | 5.000 | 1.000 | 3e+17 | 1.5e+17 |" in md
    js = to_json(r)
    assert js["limits"][0]["inside_fraction"] == pytest.approx(8 / 9)
    json.dumps(js, allow_nan=False)


HELD_CONFIG = """
[device]
length = "0.3m"
[discharge]
on_above = 1e15
[sources]
max_age = { default = "250ms", Te = "0.5s" }
"""


def test_te_count_is_the_readings_not_the_held_samples(tmp_path: Path) -> None:
    """ne every 0.1 s (101 rows); Te only every 5th row (t = 0.0, 0.5, ..., 10.0: 21 readings, 2, 3, 4, 2, ...
    eV), `nan` in the rows between; Te is held 0.5 s, so every one of the 101 samples carries a Te."""
    t = np.round(np.arange(101) * 0.1, 10)
    ne = np.full(101, 5e16)
    ne[t < 1.0] = 1e14
    te = np.full(101, np.nan)
    te[::5] = [2.0 + i % 3 for i in range(21)]
    csv = tmp_path / "held.csv"
    csv.write_text("t,ne,Te\n" + "".join(f"{a!r},{b!r},{c!r}\n" for a, b, c in zip(t.tolist(), ne.tolist(),
                                                                                      te.tolist())))
    cfg = tmp_path / "held.toml"
    cfg.write_text(HELD_CONFIG)
    r = build_report(csv, config_path=str(cfg))
    q = {s.name: s for s in r.quantities}
    # by hand: 21 Te readings (7 each of 2, 3 and 4 eV), held onto all 101 samples; ne read in every row
    assert q["Te"].n == 21
    assert q["Te"].held == 101
    assert (q["Te"].min, q["Te"].median, q["Te"].max) == (2.0, 3.0, 4.0)
    assert (q["ne"].n, q["ne"].held) == (101, 101)
    assert r.samples_by_quantity["Te"] == 21
    assert q["debye_length"].n == 101 and q["debye_length"].held is None     # derived: per sample
    md = to_markdown(r)
    assert "| Te | eV | 21 (held onto 101 samples) | 2 | 3 | 4 |" in md
    assert "| ne | m^-3 | 101 | 1e+14 | 5e+16 | 5e+16 |" in md
    js = to_json(r)["quantities"]
    assert (js["Te"]["n"], js["Te"]["held_samples"]) == (21, 101)
    assert "held_samples" not in js["debye_length"]


def test_deadband_hysteresis_and_unknown_samples_in_excursions() -> None:
    class Spec:
        name, quantity, high, low, off_delay, only_when_on = "x", "ne", 10.0, None, 0.0, True

        @staticmethod
        def band(limit: float) -> float:
            return 1.0

    t = np.arange(8, dtype=float)
    v = np.array([5, 11, 9.5, np.nan, 12, 8, 11, 5], dtype=float)
    on = np.ones(8, dtype=bool)
    s = limit_summary(Spec(), t, v, on, sample_durations(t, 10.0))
    # 11 enters; 9.5 is inside the 1.0 deadband (stays out); NaN neither ends nor counts; 8 ends it
    assert [(e.start, e.end, e.peak) for e in s.excursions] == [(1.0, 5.0, 12.0), (6.0, 7.0, 11.0)]
    assert s.evaluated_s == 6.0 and s.inside_s == 3.0     # samples 0, 2 (9.5 <= 10), 5 count inside


def test_report_command_json_plot_and_no_screen(tmp_path: Path) -> None:
    csv, cfg = _shot(tmp_path)
    png = tmp_path / "shot.png"
    code = (
        "import sys\n"
        "from monitor.cli import main\n"
        f"rc = main(['report', {str(csv)!r}, '--config', {str(cfg)!r}, '--json', '--plot', {str(png)!r}])\n"
        "print('TEXTUAL', 'textual' in sys.modules, rc)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    lines = out.stdout.splitlines()
    assert lines[-1] == "TEXTUAL False 0"
    report = json.loads(lines[0])
    assert report["type"] == "report" and report["limits"][0]["excursions"][0]["peak"] == 3e17
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and png.stat().st_size > 20000


def _limit_lines(ax: object, y: float) -> list[object]:
    """The horizontal straight lines of ``ax`` at height ``y`` (what axhline draws)."""
    return [ln for ln in ax.get_lines() if len(ln.get_ydata()) == 2 and all(float(v) == y for v in ln.get_ydata())]


def test_figure_draws_both_te_limits_inside_the_view(tmp_path: Path) -> None:
    pytest.importorskip("matplotlib")
    from monitor.report.plot import draw_report

    csv, cfg = _shot(tmp_path)           # Te 3 eV throughout: both band limits lie outside the data's range
    cfg.write_text(CONFIG + '[[limit]]\nname = "Te_band"\nquantity = "Te"\nlow = 1.0\nhigh = 5.0\n')
    fig = draw_report(build_report(csv, config_path=str(cfg)))
    try:
        (trace,) = [ax for ax in fig.axes if ax.get_ylabel().startswith("Te\n")]
        (plane,) = [ax for ax in fig.axes if ax.get_ylabel() == "Te [eV]"]
        for ax in (trace, plane):
            lo, hi = ax.get_ylim()
            for bound in (1.0, 5.0):
                assert _limit_lines(ax, bound), f"no line at Te = {bound} on {ax.get_ylabel()!r}"
                assert lo < bound < hi, f"Te = {bound} outside the view {lo:g}..{hi:g} of {ax.get_ylabel()!r}"
        assert max(trace.get_lines()[0].get_ydata()) == 3.0        # the trace itself is the data
    finally:
        import matplotlib.pyplot as plt
        plt.close(fig)


def test_headless_replay_never_imports_the_screen(tmp_path: Path) -> None:
    csv, cfg = _shot(tmp_path)
    code = (
        "import sys\n"
        "from monitor.cli import main\n"
        f"rc = main(['replay', {str(csv)!r}, '--config', {str(cfg)!r}, '--headless', '--json', '--quiet'])\n"
        "print('TEXTUAL', 'textual' in sys.modules, rc)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, cwd=ROOT, env=env())
    assert out.returncode == 0, out.stderr
    assert out.stdout.splitlines()[-1] == "TEXTUAL False 0"
    alarms = [json.loads(x) for x in out.stdout.splitlines() if x.startswith('{"type":"alarm"')]
    seen = [(a["alarm"], a["state"], a["time"]) for a in alarms]
    assert seen[:2] == [("ne_high", "normal", 1.0), ("ne_high", "unacknowledged", 4.0)]


def test_report_without_matplotlib_says_so(tmp_path: Path) -> None:
    csv, cfg = _shot(tmp_path)
    code = (
        "import sys\n"
        "sys.modules['matplotlib'] = None\n"       # as if the optional extra were not installed
        "from monitor.cli import main\n"
        f"rc = main(['report', {str(csv)!r}, '--plot', {str(tmp_path / 'x.png')!r}])\n"
        "print('RC', rc)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120, cwd=ROOT, env=env())
    assert "RC 2" in out.stdout and "matplotlib" in out.stderr


def test_report_gives_the_monte_carlo_interval_and_the_flags(tmp_path: Path) -> None:
    # the synthetic shot with ne +-20 % and Te +-10 % from the channel map: at these sigmas the mean free
    # path's linear sigma is flagged, and the report puts our own Monte Carlo's percentiles beside it
    # (GUM Supplement 1, JCGM 101:2008, propagation of distributions)
    csv, cfg = _shot(tmp_path)
    cfg.write_text(CONFIG + '[channels]\nne = {quantity = "ne", uncertainty = "20%"}\n'
                   'Te = {quantity = "Te", uncertainty = "10%"}\n')
    r = build_report(csv, config_path=str(cfg))
    assert r.operating_point["inputs"] == {"ne": 5e16, "Te": 3.0}        # medians while on
    assert r.operating_point["sigma"] == pytest.approx({"ne": 1e16, "Te": 0.3})
    rows = {row["name"]: row for row in r.uncertainty}
    mfp = rows["electron_mean_free_path"]
    assert mfp["nonlinear"] and mfp["p16"] < mfp["value"] < mfp["p84"]
    assert mfp["p84"] - mfp["value"] > mfp["value"] - mfp["p16"]          # skewed upward (~Te^2 / ne)
    assert not rows["electron_plasma_frequency"]["nonlinear"]
    # every discharge-on sample carries the flag (the pipeline's per-sample warnings)
    assert r.flag_shares["nonlinear_sigma:electron_mean_free_path"] == pytest.approx(1.0)
    data = to_json(r)
    assert data["uncertainty"]["quantities"]["electron_mean_free_path"]["nonlinear"] is True
    text = to_markdown(r)
    assert "## Uncertainty at the median operating point" in text
    assert "| electron_mean_free_path | m |" in text and "| no |" in text
    assert "## Validity flags" in text


def test_report_without_sigmas_says_nothing_to_propagate(tmp_path: Path) -> None:
    csv, cfg = _shot(tmp_path)
    r = build_report(csv, config_path=str(cfg))
    assert r.uncertainty == ()
    assert "No reading carried an uncertainty" in to_markdown(r)


def test_report_does_not_judge_what_the_formulas_do_not_cover(tmp_path: Path) -> None:
    # a dense cold shot (ne 1e28 m^-3, Te 1 eV): the NRL Coulomb logarithm is -2.3 there, below its
    # validity, so the collision rates are withheld and "collective" is not judged (no negative rate)
    t = np.arange(20) * 0.1
    csv = tmp_path / "dense.csv"
    csv.write_text("t,ne,Te\n" + "".join(f"{a!r},1e28,1.0\n" for a in t.tolist()))
    r = build_report(csv)
    verdicts = {v["name"]: v for v in r.verdicts}
    assert verdicts["collective"]["holds"] is None
    assert "not judged: strongly coupled (lnLambda < 2)" in verdicts["collective"]["text"]
    assert r.flag_shares["coulomb_logarithm_small"] == pytest.approx(1.0)
    assert r.flag_shares["electrons_strongly_coupled"] == pytest.approx(1.0)
    assert "not judged: strongly coupled" in to_markdown(r)
