"""The solver against worked examples, closed forms and an independent solve_ivp integration."""

from dataclasses import replace

import numpy as np
import pytest
from conftest import FT, anderson_example_6_7, general_cases

from landrisk.errors import SolveError
from landrisk.model import solve_landings, solve_one
from landrisk.physics import aspect_ratio, ground_effect_factor, induced_drag_factor
from landrisk.testing.reference import reference_ground_roll


def _one(case, name):
    return float(getattr(solve_landings(case), name)[0])


# --- Anderson, Aircraft Performance and Design, 1999, §6.8, Example 6.7 -------------------------------
# Printed: V_stall 164.5 ft/s; V_TD 189.2 ft/s; approach 788 ft; flare 333 ft; free roll N V_TD 568 ft
# (at constant speed in the book's method); braking 1 401 ft; ground roll 1 969 ft; total 3 090 ft
# (unrounded about 3 088). The printed figures are rounded: tolerance 0.3 %.
def test_anderson_example_6_7_every_printed_value(anderson) -> None:
    # The book rolls at constant speed for N seconds, then brakes from V_TD: our braking roll from V_TD
    # is the solver with no reaction time; the free roll is N x V_TD.
    braking_case = replace(anderson, reaction_time=0.0)
    res = solve_landings(braking_case)
    rel = 3e-3
    assert res.stall_speed[0] / FT == pytest.approx(164.5, rel=rel)
    assert res.touchdown_speed[0] / FT == pytest.approx(189.2, rel=rel)
    assert res.approach_m[0] / FT == pytest.approx(788, rel=rel)
    assert res.flare_m[0] / FT == pytest.approx(333, rel=rel)
    assert res.braking_m[0] / FT == pytest.approx(1_401, rel=rel)
    free_roll = 3.0 * res.touchdown_speed[0]
    assert free_roll / FT == pytest.approx(568, rel=rel)
    assert (free_roll + res.braking_m[0]) / FT == pytest.approx(1_969, rel=rel)
    total = res.air_distance_m[0] + free_roll + res.braking_m[0]
    assert total / FT == pytest.approx(3_088, rel=rel)


def test_free_roll_at_constant_speed_without_deceleration(anderson) -> None:
    # With no force along the runway the free roll is (V_TD - V_w) t: uniform motion, x = v t (kinematics).
    for wind in (-5.0, 0.0, 12.0):
        case = replace(anderson, cd0=0.0, cl_ground=0.0, rolling_mu=0.0, headwind=wind, reaction_time=2.5)
        res = solve_landings(case)
        assert res.free_roll_m[0] == pytest.approx((res.touchdown_speed[0] - wind) * 2.5, rel=1e-13)


# --- Raymer, Aircraft Design: A Conceptual Approach, 6th ed., 2018, §17.8-17.9, eqs. 17.100-17.104 ----
def _raymer_braking(case) -> float:
    """S_G = 1/(2 g K_A) ln((K_T + K_A V_f^2)/(K_T + K_A V_i^2)), K_T = T/W - mu,
    K_A = rho/(2 W/S) (mu C_L - C_D0 - K C_L^2), K with the ground-effect factor; V_f = 0."""
    c = case
    w = c.mass * c.g
    k = induced_drag_factor(aspect_ratio(c.wing_span, c.wing_area), c.oswald) * ground_effect_factor(
        c.wing_height, c.wing_span
    )
    thrust = c.reverse_t0 if c.use_reverse else c.idle_t0
    k_t = thrust / w - c.braking_mu
    k_a = c.density / (2 * w / c.wing_area) * (c.braking_mu * c.cl_ground - c.cd0 - k * c.cl_ground**2)
    v_i = float(solve_landings(c).touchdown_speed[0])
    if k_a == 0:
        return v_i**2 / (2 * c.g * abs(k_t))  # the K_A -> 0 limit
    return float(1 / (2 * c.g * k_a) * np.log(k_t / (k_t + k_a * v_i**2)))


@pytest.mark.parametrize("thrust", [0.0, 4_000.0, -40_000.0])
@pytest.mark.parametrize("cl", [0.0, 0.1, 0.6])
def test_braking_matches_raymer_closed_form(anderson, thrust: float, cl: float) -> None:
    case = replace(anderson, g=9.80665, reaction_time=0.0, cl_ground=cl, idle_t0=max(thrust, 0.0),
                   use_reverse=thrust < 0, reverse_t0=min(thrust, 0.0), reverse_cutoff_speed=0.0)
    assert _one(case, "braking_m") == pytest.approx(_raymer_braking(case), rel=1e-9)


def test_raymer_limit_without_aerodynamic_force(anderson) -> None:
    # Raymer 2018, eqs. 17.100-17.104, in the limit K_A -> 0 (ln(1 + x) ~ x): S = V^2 / (2 g |K_T|);
    # V = 70 m/s, mu = 0.4, g = 9.80665 m/s^2 -> 70^2 / (2 x 9.80665 x 0.4) = 624.58 m (computed here).
    case = replace(anderson, g=9.80665, reaction_time=0.0, cl_ground=0.0, cd0=0.0)
    vs = float(solve_landings(case).stall_speed[0])
    case = replace(case, touchdown_speed_ratio=70.0 / vs)
    assert _one(case, "braking_m") == pytest.approx(624.58, abs=0.005)
    assert _one(case, "braking_m") == pytest.approx(70.0**2 / (2 * 9.80665 * 0.4), rel=1e-12)


# --- Independent time integration (scipy.integrate.solve_ivp, DOP853, rtol 1e-12) ------------------
@pytest.mark.parametrize("case", general_cases(25, seed=7))
def test_solver_matches_solve_ivp(case) -> None:
    ref = reference_ground_roll(case)
    res = solve_landings(case)
    for name in ("free_roll_m", "braking_m", "time_to_stop_s"):
        assert float(getattr(res, name)[0]) == pytest.approx(ref[name], rel=1e-6), name


def test_tailwind_reverser_and_slope_case_against_solve_ivp(anderson) -> None:
    # A strong tailwind makes the airspeed negative before the stop (drag then pushes forward).
    case = replace(anderson, g=9.80665, headwind=-10.0, slope_angle=np.arctan(-0.02), use_reverse=True,
                   reverse_t0=-50_000.0, reverse_t1=-100.0, reverse_cutoff_speed=30.0, idle_t0=5_000.0,
                   rolling_mu=0.03, braking_mu=0.15, cl_ground=0.3, reaction_time=2.0)
    ref = reference_ground_roll(case)
    res = solve_landings(case)
    assert res.brake_speed[0] > 30.0 > 0 > case.headwind
    assert res.braking_m[0] == pytest.approx(ref["braking_m"], rel=1e-6)
    assert res.time_to_stop_s[0] == pytest.approx(ref["time_to_stop_s"], rel=1e-6)


def test_overrun_speed_and_distance_beyond_end() -> None:
    cases = general_cases(12, seed=3)
    for case in cases:
        full = solve_landings(case)
        # Put the runway end inside the braking roll, then inside the free roll.
        for end in (full.air_distance_m[0] + full.free_roll_m[0] + 0.4 * full.braking_m[0],
                    full.air_distance_m[0] + 0.5 * full.free_roll_m[0]):
            short = replace(case, lda=end)
            res = solve_landings(short)
            ref = reference_ground_roll(short, position=end - float(res.air_distance_m[0]))
            assert res.overrun[0]
            assert res.beyond_end_m[0] == pytest.approx(full.total_m[0] - end, rel=1e-12)
            assert res.runway_end_ground_speed[0] == pytest.approx(ref["ground_speed_at"], rel=1e-6)


def test_touchdown_beyond_runway_end_reports_touchdown_ground_speed(anderson) -> None:
    res = solve_landings(replace(anderson, lda=100.0))
    assert res.overrun[0]
    assert res.runway_end_ground_speed[0] == pytest.approx(res.touchdown_ground_speed[0])


def test_stop_during_free_roll(anderson) -> None:
    # A gale-force headwind: the ground speed reaches zero before the brakes are applied.
    vs = _one(anderson, "stall_speed")
    case = replace(anderson, g=9.80665, headwind=1.15 * vs - 2.0, rolling_mu=0.3, reaction_time=10.0)
    res = solve_landings(case)
    ref = reference_ground_roll(case)
    assert res.stopped_in_free_roll[0]
    assert res.braking_m[0] == 0.0
    assert res.free_roll_m[0] == pytest.approx(ref["free_roll_m"], rel=1e-6)
    assert res.time_to_stop_s[0] == pytest.approx(ref["time_to_stop_s"], rel=1e-6)


def test_given_touchdown_point_replaces_flare_model(anderson) -> None:
    res = solve_landings(replace(anderson, touchdown_given=True, touchdown_distance=450.0, headwind=8.0))
    assert res.air_distance_m[0] == 450.0
    assert res.approach_m[0] == res.flare_m[0] == 0.0


def test_phases_add_up_and_margin(anderson) -> None:
    res = solve_landings(replace(anderson, reaction_time=2.0))
    assert res.total_m[0] == pytest.approx(res.air_distance_m[0] + res.free_roll_m[0] + res.braking_m[0])
    assert res.margin_m[0] == pytest.approx(res.lda_m[0] - res.total_m[0])


def test_lift_above_weight_is_flagged_in_arrays_and_refused_alone(anderson) -> None:
    # L/W at touchdown = (V_TD/V_S)^2 C_L,ground / C_Lmax (from the definitions of V_S and L).
    lifted = replace(anderson, cl_ground=2.0)
    res = solve_landings(replace(lifted, braking_mu=np.array([0.3, 0.4])))
    assert res.lift_exceeds_weight.all()
    assert res.flag_counts()["lift_exceeds_weight"] == 2
    assert np.all(np.isfinite(res.total_m))
    assert np.all(res.braking_m > 0)
    # The normal force is held at zero while lift carries the weight: compare with solve_ivp.
    single = replace(lifted, g=9.80665)
    assert _one(single, "braking_m") == pytest.approx(reference_ground_roll(single)["braking_m"], rel=1e-6)
    with pytest.raises(SolveError, match="lift exceeds weight"):
        solve_one(lifted)


def test_cannot_stop_is_flagged_in_arrays_and_refused_alone(anderson) -> None:
    # Idle thrust above the braking friction: the aircraft never stops.
    hot = replace(anderson, idle_t0=np.array([0.0, 0.5 * anderson.mass * anderson.g]))
    res = solve_landings(hot)
    assert list(res.cannot_stop) == [False, True]
    assert res.flag_counts() == {"overrun": 1, "lift_exceeds_weight": 0, "cannot_stop": 1,
                                 "stopped_in_free_roll": 0}
    assert np.isinf(res.braking_m[1]) and res.overrun[1]
    with pytest.raises(SolveError, match="cannot stop"):
        solve_one(replace(anderson, idle_t0=0.5 * anderson.mass * anderson.g))


def test_headwind_at_touchdown_speed_raises(anderson) -> None:
    with pytest.raises(ValueError, match="headwind"):
        solve_landings(replace(anderson, headwind=200.0))


def test_one_landing_alone_equals_the_same_landing_in_a_large_batch() -> None:
    rng = np.random.default_rng(11)
    base = anderson_example_6_7()
    n = 100_000
    batch = replace(base, headwind=rng.uniform(-8, 15, n), braking_mu=rng.uniform(0.1, 0.5, n),
                    reaction_time=rng.uniform(0.5, 4, n), use_reverse=rng.random(n) < 0.5,
                    reverse_t0=-30_000.0, reverse_cutoff_speed=25.0, lda=rng.uniform(600, 1500, n))
    res = solve_landings(batch)
    for i in rng.choice(n, size=20, replace=False):
        one = solve_landings(batch.broadcast().take(slice(i, i + 1)))
        for name in ("total_m", "braking_m", "time_to_stop_s", "runway_end_ground_speed"):
            assert getattr(one, name)[0] == getattr(res, name)[i], name
