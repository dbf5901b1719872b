"""The hard-coded constants against CODATA (through scipy.constants) and facts of the trade."""

from __future__ import annotations


import pytest
import scipy.constants as sc

from monitor.physics import constants as C
from monitor.units import parse_value


@pytest.mark.parametrize(
    ("ours", "codata_name"),
    [
        (C.ELEMENTARY_CHARGE, "elementary charge"),
        (C.BOLTZMANN, "Boltzmann constant"),
        (C.SPEED_OF_LIGHT, "speed of light in vacuum"),
        (C.EPSILON_0, "vacuum electric permittivity"),
        (C.MU_0, "vacuum mag. permeability"),
        (C.ELECTRON_MASS, "electron mass"),
        (C.PROTON_MASS, "proton mass"),
        (C.ATOMIC_MASS, "atomic mass constant"),
    ],
)
def test_constants_match_codata(ours: float, codata_name: str) -> None:
    # CODATA via scipy.constants (CODATA 2022 in the installed scipy)
    assert ours == pytest.approx(sc.physical_constants[codata_name][0], rel=1e-12)


def test_derived_constants_match_codata() -> None:
    # CODATA via scipy.constants: electron volt-kelvin relationship, electron rest energy
    assert C.EV_IN_K == pytest.approx(sc.physical_constants["electron volt-kelvin relationship"][0], rel=1e-12)
    assert C.ELECTRON_REST_ENERGY_EV == pytest.approx(
        sc.physical_constants["electron mass energy equivalent in MeV"][0] * 1e6, rel=1e-9)


def test_room_temperature_is_about_0026_ev() -> None:
    # common practice: room temperature 300 K is about 0.026 eV
    value, _ = parse_value("300K", "temperature")
    assert value == pytest.approx(0.026, rel=1e-2)
    assert value == pytest.approx(0.025852, rel=1e-4)  # from 300 k / e with CODATA k and e


def test_one_ev_is_about_11600_kelvin() -> None:
    # common practice: 1 eV is about 11,600 K
    assert C.EV_IN_K == pytest.approx(11600.0, rel=1e-3)
    gas_k, _ = parse_value("1eV", "temperature_gas")
    assert gas_k == pytest.approx(11604.518, rel=1e-6)  # CODATA via scipy.constants, checked above


def test_physics_never_imports_scipy_on_the_calc_path() -> None:
    import subprocess
    import sys

    code = ("import sys, monitor.physics, monitor.criteria, monitor.commands.calc\n"
            "print(sorted(m for m in ('scipy', 'astropy', 'plasmapy', 'textual', 'zmq') if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "[]"


def test_neutral_density_against_loschmidt() -> None:
    from monitor.physics.densities import neutral_density

    # CODATA via scipy.constants: Loschmidt constant n0 at 273.15 K and 101.325 kPa
    loschmidt = sc.physical_constants["Loschmidt constant (273.15 K, 101.325 kPa)"][0]
    assert float(neutral_density(101325.0, 273.15)) == pytest.approx(loschmidt, rel=1e-9)
    # common practice: about 2.4e20 m^-3 per pascal at room temperature
    assert float(neutral_density(1.0)) == pytest.approx(2.4e20, rel=1e-2)
