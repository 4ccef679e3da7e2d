"""Physical monotonicity of the solver (property tests over a broad, plausible input space)."""

from dataclasses import replace

import numpy as np
from conftest import anderson_example_6_7
from hypothesis import given, settings
from hypothesis import strategies as st

from landrisk.model import LandingCase, solve_landings

BASE = replace(anderson_example_6_7(), g=9.80665)


@st.composite
def landings(draw) -> LandingCase:
    """Landings with thrust, reverse, wind, slope and friction drawn over plausible ranges.

    Idle thrust stays below 2 % of the weight and braking friction above 0.08, so forward thrust is
    less than half the braking friction. Beyond that, physics reverses the mass effect: with distance
    ~ m^2 / (mu g m - T), a heavier aircraft stops shorter when T/m > mu g / 2.
    """
    rolling = draw(st.floats(0.01, 0.08))
    reverse = draw(st.booleans())
    mass = BASE.mass * draw(st.floats(0.5, 1.3))
    return replace(
        BASE,
        mass=mass,
        density=draw(st.floats(0.9, 1.3)),
        headwind=draw(st.floats(-10.0, 15.0)),
        slope_angle=np.arctan(draw(st.floats(-0.02, 0.02))),
        rolling_mu=rolling,
        braking_mu=draw(st.floats(max(rolling + 0.03, 0.08), 0.6)),  # brakes add friction
        reaction_time=draw(st.floats(0.0, 4.0)),
        cl_ground=draw(st.floats(0.0, 0.5)),
        idle_t0=draw(st.floats(0.0, 0.02)) * mass * BASE.g,
        idle_t1=-draw(st.floats(0.0, 20.0)),
        use_reverse=reverse,
        reverse_t0=-draw(st.floats(0.0, 50_000.0)),
        reverse_cutoff_speed=draw(st.floats(0.0, 35.0)),
        touchdown_speed_ratio=draw(st.floats(1.1, 1.35)),
    )


def total(case: LandingCase) -> float:
    return float(solve_landings(case).total_m[0])


common = settings(max_examples=60, deadline=None)


@common
@given(landings(), st.floats(1.01, 1.3))
def test_heavier_is_longer(case, factor) -> None:
    assert total(replace(case, mass=case.mass * factor)) > total(case)


@common
@given(landings(), st.floats(0.5, 0.99))
def test_less_braking_friction_is_longer(case, factor) -> None:
    lower = max(case.braking_mu * factor, case.rolling_mu)
    if lower < case.braking_mu:
        assert total(replace(case, braking_mu=lower)) > total(case)


@common
@given(landings(), st.floats(0.5, 8.0))
def test_more_tailwind_is_longer(case, delta) -> None:
    assert total(replace(case, headwind=case.headwind - delta)) > total(case)


@common
@given(landings(), st.floats(0.001, 0.02))
def test_downhill_is_longer(case, delta) -> None:
    assert total(replace(case, slope_angle=case.slope_angle - delta)) > total(case)


@common
@given(landings(), st.floats(0.1, 3.0))
def test_longer_reaction_time_is_longer(case, delta) -> None:
    assert total(replace(case, reaction_time=case.reaction_time + delta)) > total(case)


@common
@given(landings(), st.floats(0.7, 0.99))
def test_thinner_air_is_longer(case, factor) -> None:
    # Higher density altitude = lower density at the same indicated (stall-ratio) speeds.
    assert total(replace(case, density=case.density * factor)) > total(case)


@common
@given(landings())
def test_phases_are_positive_and_add_up(case) -> None:
    r = solve_landings(case)
    for name in ("air_distance_m", "free_roll_m", "braking_m", "time_to_stop_s"):
        assert getattr(r, name)[0] >= 0
    assert r.total_m[0] == r.air_distance_m[0] + r.free_roll_m[0] + r.braking_m[0]
    assert r.margin_m[0] == r.lda_m[0] - r.total_m[0]
    assert np.isfinite(r.total_m[0])
