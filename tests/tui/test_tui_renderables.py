"""The plain renderables: braille canvas dots, trend cells, map guide densities and number formatting."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.constants as sc

from monitor.tui.formatting import fmt_number, fmt_value, show
from monitor.tui.renderables.braille import BrailleCanvas
from monitor.tui.renderables.regime_map import (MapData, RegimeMap, cutoff_density, density_at_debye_length,
                                                density_at_debye_number)
from monitor.tui.renderables.trend import trend_cells


def test_braille_dots_land_in_the_right_cell_and_bit() -> None:
    cv = BrailleCanvas(2, 1)                       # 4 x 4 dots
    cv.dots(np.array([0.0]), np.array([3.0]), layer=1)   # top-left dot
    cv.dots(np.array([3.0]), np.array([0.0]), layer=2)   # bottom-right dot
    rows = cv.lines()
    text = "".join(seg.text for seg in rows[0])
    assert text == chr(0x2801) + chr(0x2880)       # Unicode braille: dot 1 and dot 8
    cv.dots(np.array([np.nan, -1.0, 99.0]), np.array([0.0, 0.0, 0.0]), layer=3)   # ignored
    assert "".join(seg.text for seg in cv.lines()[0]) == text


def test_trend_cells_scale_min_to_max_and_blank_nan() -> None:
    assert trend_cells(np.array([0.0, 1.0, 2.0, 3.0]), 4) == "▁▃▆█"
    assert trend_cells(np.array([np.nan, np.nan]), 3) == "   "
    assert trend_cells(np.array([5.0, 5.0]), 2) == "▄▄"
    assert len(trend_cells(np.linspace(1, 2, 1000), 10)) == 10


def test_debye_length_guide_inverts_the_debye_length() -> None:
    # lambda_D = sqrt(eps0 k Te / (ne e^2)), constants from CODATA via scipy.constants
    te = np.array([0.5, 3.0, 100.0])
    ne = density_at_debye_length(te, 1e-4)
    lam = np.sqrt(sc.epsilon_0 * te * sc.e / (ne * sc.e ** 2))
    assert lam == pytest.approx(1e-4, rel=1e-9)


def test_debye_number_guide_inverts_n_d() -> None:
    te = np.array([1.0, 10.0])
    ne = density_at_debye_number(te, 1e3)
    lam = np.sqrt(sc.epsilon_0 * te * sc.e / (ne * sc.e ** 2))
    # CODATA via scipy.constants; the map takes monitor.physics.constants (CODATA 2022, as scipy 1.17)
    assert 4.0 / 3.0 * math.pi * ne * lam ** 3 == pytest.approx(1e3, rel=1e-9)


def test_cutoff_density_matches_the_formulary() -> None:
    # NRL Plasma Formulary: f_pe = 8.98e3 sqrt(ne[cm^-3]) Hz, so n_c = (f / 8980)^2 cm^-3
    f = 2.45e9
    assert cutoff_density(f) * 1e-6 == pytest.approx((f / 8.98e3) ** 2, rel=2e-3)   # 3 digits of 8.98e3
    # n_c = eps0 m_e (2 pi f)^2 / e^2 with CODATA via scipy.constants
    assert cutoff_density(f) == pytest.approx(sc.epsilon_0 * sc.m_e * (2 * math.pi * f) ** 2 / sc.e ** 2, rel=1e-9)


def test_map_marks_a_point_outside_the_box_with_a_glyph_and_words() -> None:
    inside = MapData(np.array([5e16]), np.array([3.0]), (5e16, 3.0), length=0.3, box=(1e16, 1.5e17, 1.2, 6.0))
    outside = MapData(np.array([3e17]), np.array([2.2]), (3e17, 2.2), length=0.3, box=(1e16, 1.5e17, 1.2, 6.0))
    text_in = "\n".join("".join(s.text for s in row) for row in RegimeMap(inside, 60, 16).build(60, 16))
    text_out = "\n".join("".join(s.text for s in row) for row in RegimeMap(outside, 60, 16).build(60, 16))
    assert "◆" in text_in and "✖" not in text_in
    assert "✖" in text_out and "OUTSIDE" in text_out
    assert "λD" in text_in or "L/" in text_in        # Debye-length guides are labelled


def test_units_switch_factors() -> None:
    assert show("m^-3", 1e17, "practical").factor == 1e-6
    assert show("eV", 1.0, "SI").factor == pytest.approx(sc.e / sc.k)   # 11604.5 K per eV (CODATA)
    # 1 T = 1e4 G: common practice
    assert show("T", 0.01, "practical").unit == "G" and show("T", 0.01, "practical").factor == 1e4
    ghz = show("rad/s", 2 * math.pi * 2.45e9, "practical")
    assert ghz.unit == "GHz" and 2 * math.pi * 2.45e9 * ghz.factor == pytest.approx(2.45)


def test_fmt_value_gives_relative_uncertainty() -> None:
    assert fmt_value(2.0e17, 8.0e15, "m^-3", "practical") == ("2.00e11", "±4.0%", "cm⁻³")
    assert fmt_value(float("nan"), None, "eV", "practical")[0] == "—"
    assert fmt_number(0.000123) == "1.23e-4" and fmt_number(42.0) == "42.0"
