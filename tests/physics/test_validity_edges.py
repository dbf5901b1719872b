"""Where the formulas stop holding: strong coupling, degeneracy, relativistic electrons, lnLambda < 2, speeds at c."""

from __future__ import annotations

import json
import math
import warnings

import astropy.units as u
import numpy as np
import pytest
import scipy.constants as sc
from plasmapy.formulary import quantum as pp_quantum
from plasmapy.formulary.collisions import dimensionless as pp_coll_dimensionless

from monitor.cli import main
from monitor.model import Device
from monitor.physics import derive
from monitor.physics.tables import AFFECTS, WARNINGS, WITHHELD, flags_of, sample_withheld
from monitor.physics.validity import coupling_parameter, fermi_energy, relativistic_fraction

COLLISIONAL = ("electron_ion_collision_frequency", "electron_mean_free_path", "knudsen_number",
               "collectivity", "hall_parameter")
SPEEDS = ("electron_most_probable_speed", "electron_mean_speed", "electron_rms_speed", "electron_thermal_speed")


def _calc_json(capsys: pytest.CaptureFixture[str], *args: str) -> dict:
    assert main(["calc", "--json", *args]) == 0
    return json.loads(capsys.readouterr().out)


# --- issue 12 point 13: no negative rates -----------------------------------------------------

def test_dense_cold_case_gives_no_negative_rate_but_a_reason(capsys: pytest.CaptureFixture[str]) -> None:
    data = _calc_json(capsys, "ne=1e28", "Te=1eV", "B=1T")
    # NRL Plasma Formulary lnLambda = 23 - ln(ne_cm^1/2 Te^-3/2) = 23 - ln(1e11) = -2.33: below its validity
    assert data["coulomb_logarithm"]["value"] == pytest.approx(23 - math.log(1e22**0.5), rel=1e-9)
    assert "coulomb_logarithm_small" in data["coulomb_logarithm"]["flags"]
    for name in ("electron_ion_collision_frequency", "electron_mean_free_path", "collectivity", "hall_parameter"):
        assert data[name]["value"] is None and data[name]["sigma"] is None, name
        assert data[name]["reason"].startswith("withheld: strongly coupled (lnLambda < 2)"), name
    # every number printed is non-negative, but the flagged logarithm that explains the rest
    numbers = [e["value"] for n, e in data.items()
               if n not in ("notes", "coulomb_logarithm") and e["value"] is not None]
    assert numbers and all(v >= 0 for v in numbers)
    codes = {n["code"] for n in data["notes"]}
    assert {"coulomb_logarithm_small", "electrons_strongly_coupled", "electrons_degenerate"} <= codes


def test_dense_cold_case_criteria_say_not_judged(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["calc", "ne=1e28", "Te=1eV", "B=1T"]) == 0
    out = capsys.readouterr().out
    assert "?   collective? not judged: strongly coupled (lnLambda < 2)" in out
    assert "?   electrons magnetised? not judged: strongly coupled" in out
    assert "short by xinf" not in out and "-6.78e" not in out
    row = next(line for line in out.splitlines() if line.startswith("coulomb_logarithm "))
    assert "[below 2: outside its validity]" in row


@pytest.mark.parametrize("n", [3, 40])        # the per-sample Python pass and the numpy pass
def test_withheld_rates_are_per_sample_in_both_paths(n: int) -> None:
    ne = np.full(n, 5e16)
    ne[1] = 1e28
    te = np.full(n, 3.0)
    te[1] = 1.0
    d = derive({"ne": ne, "Te": te, "B": np.full(n, 0.1), "p0": np.full(n, 1.0)}, Device(length=0.3))
    small = d.warnings["coulomb_logarithm_small"]
    assert small.tolist() == [i == 1 for i in range(n)]
    for name in COLLISIONAL:
        assert math.isnan(d.values[name][1]) and np.isfinite(d.values[name][np.arange(n) != 1]).all(), name
    assert np.isfinite(d.values["electron_neutral_collision_frequency"]).all()   # not built on nu_ei
    assert set(sample_withheld(d.warnings, d.values, 1)) == set(COLLISIONAL)
    assert sample_withheld(d.warnings, d.values, 0) == {}


# --- point 14: strong coupling, degeneracy, relativistic electrons, speeds at c ---------------

def _pp_gamma(ne: float, te: float, species: tuple[str, str], z: float = math.nan) -> float:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        g = pp_coll_dimensionless.coupling_parameter(te * u.eV, ne * u.m**-3, species, z_mean=z)
    return float(g.to_value(u.dimensionless_unscaled))


@pytest.mark.parametrize(("ne", "te"), [(1e19, 3.0), (1e26, 0.5), (1e28, 1.0), (3e30, 50.0)])
def test_electron_coupling_parameter_against_plasmapy(ne: float, te: float) -> None:
    # PlasmaPy's coupling_parameter (method "classical"): Z1 Z2 e^2 / (4 pi eps0 a k T), a the Wigner-Seitz radius
    assert float(coupling_parameter(ne, te)) == pytest.approx(_pp_gamma(ne, te, ("e-", "e-")), rel=1e-6)


def test_ion_coupling_parameter_against_plasmapy() -> None:
    # ions of charge Z at n_i = ne / Z: PlasmaPy with z_mean = Z uses (Z e)^2 and n_e / z_mean
    ne, ti = 1e24, 0.05
    assert float(coupling_parameter(ne / 2.0, ti, 2.0)) == pytest.approx(
        _pp_gamma(ne, ti, ("He 2+", "He 2+"), 2.0), rel=1e-6)


def test_strong_coupling_flag_is_gamma_at_least_one() -> None:
    # a grid across Gamma_e = 1; the flag comes from N_D <= 3^-3/2 (Gamma_e = 1 / (3 N_D^(2/3)), exact)
    ne = np.logspace(24, 30, 41)
    te = np.full_like(ne, 2.0)
    d = derive({"ne": ne, "Te": te}, Device())
    expected = np.array([_pp_gamma(n, 2.0, ("e-", "e-")) >= 1.0 for n in ne])
    assert expected.any() and not expected.all()
    got = d.warnings.get("electrons_strongly_coupled", np.zeros(len(ne), dtype=bool))
    assert got.tolist() == expected.tolist()


def test_ion_strong_coupling_flag() -> None:
    ne = np.array([1e18, 1e24])
    d = derive({"ne": ne, "Te": np.full(2, 3.0), "Ti": np.full(2, 0.025)}, Device())
    expected = [_pp_gamma(n, 0.025, ("p+", "p+"), 1.0) >= 1.0 for n in ne]     # PlasmaPy, classical
    assert expected == [False, True]
    assert d.warnings["ions_strongly_coupled"].tolist() == expected


@pytest.mark.parametrize("ne", [1e20, 1e27, 1e30])
def test_fermi_energy_against_plasmapy(ne: float) -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ef = pp_quantum.Fermi_energy(ne * u.m**-3).to_value(u.eV)     # PlasmaPy's Fermi_energy
    assert float(fermi_energy(ne)) == pytest.approx(ef, rel=1e-6)


def test_degeneracy_flag_is_te_below_the_fermi_energy() -> None:
    ne = np.full(30, 1e29)
    ef = float(fermi_energy(1e29))                 # ~7.9 eV (checked against PlasmaPy above)
    te = np.linspace(0.5 * ef, 1.5 * ef, 30)
    d = derive({"ne": ne, "Te": te}, Device())
    got = d.warnings.get("electrons_degenerate", np.zeros(30, dtype=bool))
    assert got.tolist() == (te < ef).tolist()


def test_relativistic_flag_at_one_percent_of_the_rest_energy() -> None:
    rest_ev = sc.m_e * sc.c**2 / sc.e              # CODATA via scipy.constants: 510998.95 eV
    te = np.array([3.0, 0.0099 * rest_ev, 0.0101 * rest_ev, 2e4])
    d = derive({"ne": np.full(4, 1e19), "Te": te}, Device())
    assert d.warnings["relativistic_electrons"].tolist() == [False, False, True, True]
    assert float(relativistic_fraction(0.01 * rest_ev)) == pytest.approx(0.01, rel=1e-9)


def test_no_speed_is_ever_above_c() -> None:
    te = np.logspace(-4, 7, 200)                   # the whole accepted range of Te
    d = derive({"ne": np.full(200, 1e18), "Te": te, "B": np.full(200, 1.0)}, Device())
    for name in SPEEDS:
        v = d.values[name]
        assert np.all(v[np.isfinite(v)] < sc.c), name   # speed of light, CODATA via scipy.constants
    # withheld from where sqrt(3 k Te / me) would reach c: k Te = me c^2 / 3
    withheld = ~np.isfinite(d.values["electron_rms_speed"])
    assert withheld.tolist() == (te >= sc.m_e * sc.c**2 / sc.e / 3).tolist()
    assert d.warnings["speed_above_light"].tolist() == withheld.tolist()
    assert np.isnan(d.values["electron_gyroradius"][withheld]).all()
    assert np.isfinite(d.values["electron_ion_collision_frequency"][withheld]).all()   # no speed in it


def test_json_of_a_hot_case_says_why_speeds_are_missing(capsys: pytest.CaptureFixture[str]) -> None:
    data = _calc_json(capsys, "ne=1e19", "Te=300keV", "B=1T")
    for name in SPEEDS:
        assert data[name]["value"] is None and "relativistic" in data[name]["reason"]
        assert "speed_above_light" in data[name]["flags"]
    assert "electrons magnetised" not in json.dumps(data)        # criteria are not in the JSON
    assert data["electron_plasma_frequency"]["flags"] == ["relativistic_electrons"]


def test_every_warning_is_described_and_its_quantities_exist() -> None:
    from monitor.quantities import ALL

    for code, names in AFFECTS.items():
        assert code in WARNINGS and set(names) <= set(ALL), code
    for code, (names, why) in WITHHELD.items():
        assert set(names) <= set(AFFECTS[code]) and why
    assert flags_of("debye_length", ["electrons_degenerate", "nonlinear_sigma:debye_length",
                                     "nonlinear_sigma:debye_number"]) == ["electrons_degenerate", "nonlinear_sigma"]


# --- point 16: notes in the JSON, atm ----------------------------------------------------------

def test_json_carries_its_notes_and_accepts_atm(capsys: pytest.CaptureFixture[str]) -> None:
    data = _calc_json(capsys, "ne=1e17", "Te=2", "p0=1atm")
    # the standard atmosphere is 101325 Pa exactly (NIST SP 811); n0 = p / (k T) at 300 K
    assert data["neutral_density"]["value"] == pytest.approx(101325.0 / (sc.k * 300.0), rel=1e-9)
    assert data["notes"][0]["code"] == "sigma_en_default"
    no_neutrals = _calc_json(capsys, "ne=1e17", "Te=2", "p0=1atm", "sigma_en=2e-19m^2")
    assert all(n["code"] != "sigma_en_default" for n in no_neutrals["notes"])
