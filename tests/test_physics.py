"""Closed forms of the physics layer against their published printed values."""

import numpy as np
import pytest

from landrisk.physics import (
    CONDITION_CODE_TABLE,
    air_distance_flare,
    drag_force,
    flare_height,
    flare_radius,
    friction_from_condition_code,
    ground_effect_factor,
    lift_force,
    stall_speed,
)

FT = 0.3048
G_BOOK = 32.2 * FT  # Anderson's g


def test_mccormick_ground_effect_printed_value() -> None:
    # Anderson 1999, eq. 6.77 after McCormick: h = 5.6 ft, b = 75 ft -> phi = 0.588 (p. 366).
    assert ground_effect_factor(5.6, 75.0) == pytest.approx(0.588, abs=5e-4)


def test_ground_effect_limits() -> None:
    assert ground_effect_factor(0.0, 30.0) == 0.0
    assert ground_effect_factor(100.0, 30.0) == pytest.approx(1.0, abs=1e-3)


def test_stall_speed_anderson_example_6_7() -> None:
    # Anderson 1999, Example 6.7: W/S = 76.84 lb/ft^2, rho = 0.002377 slug/ft^3, C_Lmax = 2.39
    # -> V_stall = 164.5 ft/s. In US units (lbf, slug) the formula is sqrt(2 W / (rho S C_Lmax)).
    weight_lbf, area_ft2 = 73_000.0, 950.0
    v = stall_speed(weight_lbf / 32.2, 0.002377, area_ft2, 2.39, g=32.2)
    assert v == pytest.approx(164.5, rel=3e-3)


def test_flare_geometry_anderson_example_6_7() -> None:
    # Anderson 1999, Example 6.7: V_f = 1.23 x 164.5 ft/s, n = 1.2 -> R = 6 354.9 ft, h_f = 8.71 ft,
    # approach 788 ft, flare 333 ft (printed, rounded; tolerance 0.3 %).
    vs = 164.47 * FT
    r = flare_radius(1.23 * vs, 1.2, g=G_BOOK)
    assert r / FT == pytest.approx(6_354.9, rel=3e-3)
    assert flare_height(r, np.radians(3.0)) / FT == pytest.approx(8.71, rel=3e-3)
    approach, flare = air_distance_flare(50 * FT, np.radians(3.0), 1.3 * vs, 1.23 * vs, 1.2, 0.0, G_BOOK)
    assert approach / FT == pytest.approx(788, rel=3e-3)
    assert flare / FT == pytest.approx(333, rel=3e-3)


def test_flare_above_screen_height() -> None:
    # Anderson, Aircraft Performance and Design (1999), eqs. 6.106-6.109 and the arc geometry: when
    # h_f > h_screen the arc starts above the screen,
    # S = sqrt(R^2 - (R - h)^2) and there is no straight approach.
    r = float(flare_radius(80.0, 1.1))
    approach, flare = air_distance_flare(15.24, np.radians(8.0), 85.0, 80.0, 1.1)
    assert float(flare_height(r, np.radians(8.0))) > 15.24
    assert approach == 0.0
    assert flare == pytest.approx(np.sqrt(r**2 - (r - 15.24) ** 2), rel=1e-12)


def test_air_distance_with_wind_is_air_distance_minus_wind_times_time() -> None:
    # A headwind shortens the ground distance by V_w x time in the air (kinematics, no source needed).
    vs, gam = 60.0, np.radians(3.0)
    still = np.add(*air_distance_flare(15.24, gam, 1.3 * vs, 1.23 * vs, 1.2, 0.0))
    windy = np.add(*air_distance_flare(15.24, gam, 1.3 * vs, 1.23 * vs, 1.2, 10.0))
    r = float(flare_radius(1.23 * vs, 1.2))
    hf = r * (1 - np.cos(gam))
    t_air = (15.24 - hf) / np.sin(gam) / (1.3 * vs) + r * gam / (1.23 * vs)
    assert still - windy == pytest.approx(10.0 * t_air, rel=1e-12)


def test_signed_aerodynamic_forces_reverse_with_the_airflow() -> None:
    # Forces use V|V| so that air from behind (a tailwind at the end of the roll) pushes the aircraft
    # forward: drag acts along the relative airflow (Anderson 1999, §2.9; sign convention of this model).
    args = (1.2, 100.0, 0.05, 0.04, 0.5, 0.3)
    assert drag_force(-10.0, *args) == -drag_force(10.0, *args)
    assert lift_force(-10.0, 1.2, 100.0, 0.5) < 0 < lift_force(10.0, 1.2, 100.0, 0.5)


def test_condition_code_table_is_monotone_and_in_raymer_ranges() -> None:
    codes = np.arange(7)
    rolling, braking = friction_from_condition_code(codes)
    assert np.all(np.diff(braking) > 0)  # better code, more braking friction (ICAO GRF ordering)
    # Raymer 2018, Table 17.1: dry brakes-on 0.3-0.5; icy brakes-on 0.06-0.10.
    assert 0.3 <= CONDITION_CODE_TABLE[6][2] <= 0.5
    assert 0.06 <= CONDITION_CODE_TABLE[1][2] <= 0.10
    assert np.all((rolling >= 0.02) & (rolling <= 0.05))
    with pytest.raises(ValueError):
        friction_from_condition_code(7)
    with pytest.raises(ValueError):
        friction_from_condition_code(2.5)
