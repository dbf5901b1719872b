"""`regime calc`: the table, the --json contract, and clear exit-2 errors (installed script and in process)."""

from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

from monitor.cli import main
from monitor.physics import REQUIRES
from monitor.quantities import ALL, DERIVED

SCRIPT = Path(sys.executable).with_name("regime")
FULL_ARGS = ["ne=5e16m-3", "Te=3eV±10%", "Ti=0.05eV", "L=0.3m", "f=2.45GHz", "B=0.05T", "p0=2Pa"]


def _calc_json(capsys: pytest.CaptureFixture[str], *args: str) -> dict:
    assert main(["calc", "--json", *args]) == 0
    return json.loads(capsys.readouterr().out)


def test_installed_script_prints_the_table() -> None:
    out = subprocess.run([str(SCRIPT), "calc", *FULL_ARGS], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    for q in DERIVED:
        assert q.name in out.stdout
    assert "quasi-neutral: L/lambda_D" in out.stdout
    assert "many particles per Debye sphere" in out.stdout
    assert "under cutoff" in out.stdout and "electrons magnetised" in out.stdout
    assert "± " in out.stdout and "not a safety interlock" in out.stdout


def test_installed_script_json_is_the_contract() -> None:
    out = subprocess.run([str(SCRIPT), "calc", "--json", *FULL_ARGS], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    assert set(data) == {q.name for q in DERIVED} | {"notes"}
    # p0 given without sigma_en: the default's note travels in the JSON itself
    assert {"code": "sigma_en_default",
            "text": "sigma_en default 1e-19 m^2 is an order-of-magnitude value (common practice)"} in data.pop("notes")
    for name, entry in data.items():
        assert set(entry) - {"flags"} == {"value", "unit", "sigma"}
        assert isinstance(entry["value"], float) and math.isfinite(entry["value"])
        assert entry["unit"] == ALL[name].unit
        assert entry["sigma"] is None or (isinstance(entry["sigma"], float) and entry["sigma"] >= 0)
    # Te carries 10 %: lambda_D ~ Te^1/2 gets 5 %
    assert data["debye_length"]["sigma"] == pytest.approx(0.05 * data["debye_length"]["value"])
    assert data["electron_cyclotron_frequency"]["sigma"] is None      # B given exactly


@pytest.mark.parametrize("args", [
    ["ne=1e17", "Te=2"], ["ne=1e17cm-3", "Te=2eV", "B=0.1T"], ["B=875G"], ["f=2.45GHz"],
    ["Te=5eV", "p0=10mTorr"], ["ne=1e17", "Te=2", "Ti=0.1", "B=0.1", "L=10cm", "A=4.0026", "Z=1"],
])
def test_json_gives_every_quantity_its_inputs_allow(capsys: pytest.CaptureFixture[str], args: list[str]) -> None:
    data = _calc_json(capsys, *args)
    have = {a.split("=")[0] for a in args}
    assert isinstance(data.pop("notes"), list)
    assert set(data) == {name for name, needs in REQUIRES.items() if set(needs) <= have}


def test_json_values_match_the_nrl_formulary(capsys: pytest.CaptureFixture[str]) -> None:
    data = _calc_json(capsys, "ne=1e10cm-3", "Te=2eV", "B=1000G")
    # NRL Plasma Formulary: lambda_D = 7.43e2 Te^1/2 ne^-1/2 cm; omega_ce = 1.76e7 B rad/s (B in gauss)
    assert data["debye_length"]["value"] == pytest.approx(7.43e2 * math.sqrt(2 / 1e10) * 1e-2, rel=5e-3)
    assert data["electron_cyclotron_frequency"]["value"] == pytest.approx(1.76e7 * 1000, rel=5e-3)


def test_device_uncertainties_propagate(capsys: pytest.CaptureFixture[str]) -> None:
    data = _calc_json(capsys, "ne=5e16", "Te=3", "L=0.3m±1cm", "f=2.45GHz±1%")
    assert data["debye_ratio"]["sigma"] == pytest.approx(data["debye_ratio"]["value"] / 30)
    assert data["cutoff_density"]["sigma"] == pytest.approx(0.02 * data["cutoff_density"]["value"])


def test_table_says_beta_is_electrons_only_without_ti(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["calc", "ne=5e16", "Te=3", "B=0.05"]) == 0
    out = capsys.readouterr().out
    assert "electrons only: Ti not given" in out
    assert "ion_gyroradius [Ti]" in out


def test_table_shows_a_failed_criterion(capsys: pytest.CaptureFixture[str]) -> None:
    # a dense, cold, atmospheric-pressure case: collision-dominated and over the 2.45 GHz cutoff
    assert main(["calc", "ne=1e19", "Te=0.5", "p0=1000mbar", "f=2.45GHz", "L=0.1"]) == 0
    out = capsys.readouterr().out
    assert "NO  collision-dominated" in out
    assert "NO  over cutoff" in out


@pytest.mark.parametrize(("args", "message"), [
    (["ne=-5", "Te=3"], "ne = -5 m^-3 is outside its physical range 1 to 1e+33 m^-3"),
    (["ne=nan", "Te=3"], "ne = nan m^-3 is outside its physical range"),
    (["ne=1e17", "Te=1e9"], "Te = 1e+09 eV is outside its physical range 0.0001 to 1e+07 eV"),
    (["ne=5e16", "Te=3furlong"], "unknown unit 'furlong'"),
    (["foo=3"], "unknown key 'foo'"),
    (["ne"], "expected KEY=VALUE"),
    (["ne=1e17", "ne=2e17"], "ne given twice"),
    (["ne=1e17", "Te=3", "L=0m"], "L = 0 m is outside its physical range"),
    (["ne=1e17", "Te=3", "Z=1±0.1"], "Z takes no uncertainty"),
    ([], "nothing to derive"),
])
def test_bad_arguments_exit_2_with_a_clear_message(capsys: pytest.CaptureFixture[str], args: list[str],
                                                   message: str) -> None:
    assert main(["calc", *args]) == 2
    err = capsys.readouterr().err
    assert message in err and err.startswith("regime calc: ")


def test_installed_script_exit_code_on_bad_input() -> None:
    out = subprocess.run([str(SCRIPT), "calc", "ne=-1", "Te=3"], capture_output=True, text=True, timeout=60)
    assert out.returncode == 2
    assert "ne = -1 m^-3 is outside its physical range" in out.stderr and out.stdout == ""


def _strict_json(text: str) -> dict:
    """json.loads that refuses the NaN/Infinity tokens Python's json would otherwise accept."""
    def refuse(token: str) -> None:
        raise AssertionError(f"non-JSON token {token} in calc --json output")
    return json.loads(text, parse_constant=refuse)


def test_json_at_zero_field_says_why_a_value_is_missing(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["calc", "--json", "ne=5e16", "Te=3eV±10%", "Ti=0.05", "B=0"]) == 0
    data = _strict_json(capsys.readouterr().out)
    # r = v_perp / omega_c and beta = 2 mu0 p / B^2 divide by B (NRL Plasma Formulary): unbounded at B = 0
    for name in ("electron_gyroradius", "ion_gyroradius", "plasma_beta"):
        assert data[name]["value"] is None and data[name]["sigma"] is None
        assert data[name]["reason"].startswith("not defined at B = 0 (no magnetic field")
    # omega_c = q B / m is simply 0 at B = 0, and the Hall parameter with it: real values, no reason
    for name in ("electron_cyclotron_frequency", "ion_cyclotron_frequency", "hall_parameter"):
        assert data[name]["value"] == 0.0 and "reason" not in data[name]
    data.pop("notes")
    assert all("reason" not in e for n, e in data.items() if n not in ("electron_gyroradius", "ion_gyroradius",
                                                                        "plasma_beta"))


def test_json_says_why_a_sigma_is_missing_at_zero_field(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["calc", "--json", "ne=5e16", "Te=3", "B=0±0.01"]) == 0
    data = _strict_json(capsys.readouterr().out)
    entry = data["electron_cyclotron_frequency"]
    assert entry["value"] == 0.0 and entry["sigma"] is None
    assert entry["reason"].startswith("sigma not defined at B = 0")


def test_a_value_that_overflows_says_so() -> None:
    # calc refuses B = 1e-200 T now (outside its physical range); derive() itself still takes it, and
    # beta ~ 1e20 * 3 eV / B^2 is ~1e400, beyond the float64 range (IEEE 754 max ~1.8e308)
    from monitor.commands.calc import compute, reasons

    values = {"ne": 1e20, "Te": 3.0, "B": 1e-200}
    _, derived = compute(values, {})
    why = reasons(values, {}, derived)
    assert why["plasma_beta"].startswith("beyond the float range")
    assert "electron_gyroradius" not in why                     # ~4e194 m: absurd but a finite number


def test_table_at_zero_field_gives_the_reason_not_inf(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["calc", "ne=5e16", "Te=3", "Ti=0.05", "B=0"]) == 0
    out = capsys.readouterr().out
    rows = {line.split()[0]: line for line in out.splitlines() if line.strip()}
    for name in ("electron_gyroradius", "ion_gyroradius", "plasma_beta"):
        assert "not defined at B = 0" in rows[name] and "inf" not in rows[name].split()
    assert "not defined" not in rows["electron_cyclotron_frequency"]
