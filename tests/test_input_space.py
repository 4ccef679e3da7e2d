"""The solver over the whole allowed input space: every scenario key between its schema bounds.

Hypothesis draws every scalar key of ``landrisk.model.schema.KEYS`` inside its allowed range (thrust laws,
reverse, slope, wind, friction, flare and touchdown inputs included) and checks what must hold for any
input: a finite result or an explicit flag, phases that add up and are not negative, and the monotone
effects of friction, wind and mass that follow from the equation of motion (Anderson, *Aircraft
Performance and Design*, 1999, eq. 6.100: a larger retarding force at every speed means a shorter
stop). The default run uses a fixed seed and a few hundred examples; ``-m slow`` runs many more.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from landrisk.model import KEYS, case_from_values, solve_landings
from landrisk.model.solver import _extremes, _integrals
from landrisk.testing.reference import reference_braking_quad, reference_free_roll

#: Scalar keys the solver reads, drawn in every example (runway.resa_length only matters downstream).
_SKIP = {"runway.condition_code", "conditions.temperature", "runway.resa_length", "procedure.use_reverse",
         "procedure.touchdown_distance", "procedure.flare_speed_ratio"}
_DRAWN = [k for k in KEYS.values() if k.kind == "quantity" and k.name not in _SKIP]


def _within(key, lo=None, hi=None) -> st.SearchStrategy[float]:
    """Floats inside the key's allowed range (open ends excluded), optionally narrowed."""
    a = key.lo if lo is None else max(lo, key.lo)
    b = key.hi if hi is None else min(hi, key.hi)
    return st.floats(a, b, exclude_min=key.lo_open and a == key.lo, exclude_max=key.hi_open and b == key.hi,
                     allow_nan=False)


@st.composite
def scenario_values(draw, realistic_idle: bool = False) -> dict[str, float | bool | None]:
    """Every scalar key inside its schema bounds. ``realistic_idle``: forward idle thrust at most 2 % of
    the weight and under half the net friction (friction less downhill slope), no reverse thrust, a
    retarding quadratic term, a
    linear term small enough that it adds less than 1 % of the weight at the largest tailwind airspeed
    (-40 m/s; t1 V > 0 there),
    braking friction at least 0.08, lift below weight at touchdown (held up by lift, a light aircraft
    has no friction to stop with).
    Beyond that physics reverses the mass effect: with a distance ~ m^2 / (mu g m - T), a heavier aircraft
    stops shorter once the forward thrust T/m exceeds mu g / 2. No tailwind either: below zero airspeed
    drag pushes forward, more so per unit mass on a light aircraft (100 kg, 178 m^2, C_D0 0.5, tailwind
    3 m/s, braking mu 0.5: it cannot stop, 1.5 times the mass can), and the approach path, fixed in the
    air mass, drifts less for the faster, heavier aircraft."""
    v: dict[str, float | bool | None] = {k.name: draw(_within(k)) for k in _DRAWN}
    v["procedure.use_reverse"] = draw(st.booleans())
    v["conditions.temperature"] = None
    v["runway.condition_code"] = None
    v["procedure.flare_speed_ratio"] = draw(st.none() | _within(KEYS["procedure.flare_speed_ratio"]))
    v["procedure.touchdown_distance"] = draw(st.none() | _within(KEYS["procedure.touchdown_distance"]))
    if realistic_idle:
        weight = float(v["aircraft.mass"]) * 9.80665
        v["runway.braking_mu"] = draw(_within(KEYS["runway.braking_mu"], lo=0.08))
        # Below half the net friction of each phase too, the reversal below holding with mu the rolling
        # or braking mu less the downhill slope's share of the weight (100 kg, t0 = 15.3 N = 2 % of the
        # weight, rolling mu 0.0156, 14 s free roll: 1.25 times the mass stops 0.3 mm shorter; braking mu
        # 0.094 on a 7 % downhill slope with t0 = 1.5 % of the weight: 1.5 times the mass 5 % shorter).
        theta = math.atan(float(v["runway.slope"]) / 100.0)
        mu = min(float(v["runway.rolling_mu"]), float(v["runway.braking_mu"]))
        cap = max(0.0, min(0.02, 0.5 * (mu * math.cos(theta) + math.sin(theta))))
        v["aircraft.thrust.idle.t0"] = draw(st.floats(0.0, 1.0, exclude_max=True)) * cap * weight
        v["aircraft.thrust.idle.t1"] = -draw(st.floats(0.0, 2.5e-4)) * weight
        v["aircraft.thrust.idle.t2"] = draw(_within(KEYS["aircraft.thrust.idle.t2"], hi=0.0))
        v["conditions.headwind"] = draw(_within(KEYS["conditions.headwind"], lo=0.0))
        # L/W at touchdown = (V_TD/V_S)^2 C_L,ground / C_Lmax (definitions of V_S and L): below 0.9.
        ratio = float(v["procedure.touchdown_speed_ratio"])
        v["aircraft.cl_ground"] = min(float(v["aircraft.cl_ground"]),
                                      0.9 * float(v["aircraft.cl_max"]) / ratio**2)
        # No reverse: with a cut-off fixed in airspeed, a light (slower) aircraft brakes a larger share
        # of its speed range without it (100 kg, reverse t2 = -3422, cut-off 8 m/s: 1.5 times the mass
        # stops 0.4 m shorter).
        v["procedure.use_reverse"] = False
    return v


def _solve(values: dict, **arrays):
    """Solve the landing ``values`` with some keys replaced by arrays; None if the model refuses it
    (headwind at or above the touchdown speed: an explicit error, not a result)."""
    try:
        return solve_landings(case_from_values({**values, **arrays}))
    except ValueError as exc:
        assert "headwind at or above the" in str(exc) or "approach_angle" in str(exc)
        return None


_FIELDS = ("approach_m", "flare_m", "air_distance_m", "free_roll_m", "braking_m", "total_m", "margin_m",
           "stall_speed", "touchdown_speed", "brake_speed", "time_to_stop_s", "runway_end_ground_speed",
           "beyond_end_m")
#: Outputs that are infinite exactly where the landing is flagged cannot_stop.
_INF_IF_CANNOT = {"braking_m", "total_m", "margin_m", "time_to_stop_s", "beyond_end_m",
                  "runway_end_ground_speed", "free_roll_m", "brake_speed"}


def check_result(r) -> None:
    for name in _FIELDS:
        x = getattr(r, name)
        assert not np.isnan(x).any(), name
        finite = np.isfinite(x)
        if name in _INF_IF_CANNOT:
            assert np.all(finite | r.cannot_stop), name
        else:
            assert finite.all(), name
    ok = ~r.cannot_stop
    assert np.all(np.isfinite(r.total_m[ok]))
    for name in ("air_distance_m", "free_roll_m", "braking_m", "time_to_stop_s", "beyond_end_m",
                 "runway_end_ground_speed"):
        assert np.all(getattr(r, name) >= 0), name
    assert np.array_equal(r.total_m, r.air_distance_m + r.free_roll_m + r.braking_m)
    assert np.array_equal(r.margin_m[ok], r.lda_m[ok] - r.total_m[ok])
    assert np.all(r.overrun == (r.total_m > r.lda_m))


def _not_longer(shorter: float, longer: float) -> bool:
    # Non-strict, with room for rounding: the two landings share every operation but one input.
    return shorter <= longer * (1.0 + 1e-12) + 1e-9 or (math.isinf(longer) and longer > 0)


common = settings(max_examples=200, deadline=None, derandomize=True,
                  suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
# Derandomized so that CI is reproducible; explore further with --hypothesis-seed=N and derandomize off
# (seeds 1-9 of 5 000 examples each passed when this was written).
many = settings(max_examples=5_000, deadline=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


def _finite_flagged_and_monotone(values, f_mu, f_roll, d_wind) -> None:
    b_mu = float(values["runway.braking_mu"])
    r_mu = float(values["runway.rolling_mu"])
    w = float(values["conditions.headwind"])
    hi_b = min(b_mu * f_mu, KEYS["runway.braking_mu"].hi)
    hi_r = min(r_mu * f_roll, KEYS["runway.rolling_mu"].hi)
    w2 = min(w + d_wind, KEYS["conditions.headwind"].hi)
    r = _solve(values, **{"runway.braking_mu": np.array([b_mu, hi_b, b_mu, b_mu]),
                          "runway.rolling_mu": np.array([r_mu, r_mu, hi_r, r_mu]),
                          "conditions.headwind": np.array([w, w, w, w2])})
    if r is None:  # the larger headwind may reach the touchdown speed: try without it
        r = _solve(values, **{"runway.braking_mu": np.array([b_mu, hi_b, b_mu]),
                              "runway.rolling_mu": np.array([r_mu, r_mu, hi_r])})
    assume(r is not None)
    check_result(r)
    t = r.total_m
    assert _not_longer(t[1], t[0]), "more braking friction is not longer"
    assert _not_longer(t[2], t[0]), "more rolling friction is not longer"
    if t.size == 4:
        assert _not_longer(t[3], t[0]), "more headwind is not longer"


@common
@given(scenario_values(), st.floats(1.0, 3.0), st.floats(1.0, 3.0), st.floats(0.0, 10.0))
def test_whole_input_space_finite_or_flagged_and_monotone(values, f_mu, f_roll, d_wind) -> None:
    _finite_flagged_and_monotone(values, f_mu, f_roll, d_wind)


@pytest.mark.slow
@many
@given(scenario_values(), st.floats(1.0, 3.0), st.floats(1.0, 3.0), st.floats(0.0, 10.0))
def test_whole_input_space_many_examples(values, f_mu, f_roll, d_wind) -> None:
    _finite_flagged_and_monotone(values, f_mu, f_roll, d_wind)


def _heavier(values, factor) -> None:
    # A heavier aircraft lands faster (V_TD ~ sqrt(m)) with the same retarding force per unit mass at
    # the same speed ratio, so its ground roll is not shorter; nor is its air distance in still air or
    # a headwind (a larger flare radius, R ~ V^2). In a tailwind it can be (see scenario_values: e.g.
    # 100 kg, 1 m^2, tailwind 27 m/s, 1 deg, V_TD = 2 V_S: 1.5 times the mass lands 2 m shorter).
    m = float(values["aircraft.mass"])
    r = _solve(values, **{"aircraft.mass": np.array([m, min(m * factor, KEYS["aircraft.mass"].hi)])})
    assume(r is not None)
    check_result(r)
    assert _not_longer(r.free_roll_m[0] + r.braking_m[0], r.free_roll_m[1] + r.braking_m[1])
    assert _not_longer(r.total_m[0], r.total_m[1])


@settings(max_examples=100, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(scenario_values(realistic_idle=True), st.floats(1.0, 1.5))
def test_heavier_is_not_shorter_at_realistic_idle_thrust(values, factor) -> None:
    _heavier(values, factor)


@pytest.mark.slow
@many
@given(scenario_values(realistic_idle=True), st.floats(1.0, 1.5))
def test_heavier_is_not_shorter_many_examples(values, factor) -> None:
    _heavier(values, factor)


# --- closed form against scipy.integrate.quad over the input space ------------------------------------
@settings(max_examples=25, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@given(scenario_values())
def test_braking_closed_form_matches_quad(values) -> None:
    # scipy.integrate.quad (QUADPACK QAGS, epsrel 1e-13) on the braking integrals of the full force law.
    r = _solve(values)
    assume(r is not None and not r.cannot_stop[0] and not r.stopped_in_free_roll[0] and r.braking_m[0] > 0)
    ref = reference_braking_quad(case_from_values(values), float(r.brake_speed[0]))
    assert r.braking_m[0] == pytest.approx(ref["braking_m"], rel=1e-9)
    assert r.time_to_stop_s[0] - float(values["procedure.reaction_time"]) == pytest.approx(
        ref["braking_s"], rel=1e-9)


@settings(max_examples=200, deadline=None, derandomize=True)
@given(st.floats(-10.0, -1e-3), st.floats(-1.0, 1.0), st.floats(-1e-1, 1e-1), st.floats(-40.0, 60.0),
       st.floats(1e-3, 100.0), st.floats(0.0, 1.0), st.sampled_from([1.0, 1e-3, 1e-6, 0.0]))
def test_piece_integrals_match_quad(a, b, c, w, width, start, scale) -> None:
    # One smooth piece: q = a + b V + c V^2 < 0 on [lo, hi], lo >= w; against scipy.integrate.quad.
    from scipy.integrate import quad

    c *= scale
    lo = w + start * width
    hi = w + width
    ext = _extremes(*(np.array([x]) for x in (lo, hi, a, b, c)))
    assume(ext[3][0] < -1e-9 * abs(a))
    d, t, ok = _integrals(*(np.array([x]) for x in (lo, hi, a, b, c, w)))
    assert ok[0]
    q = lambda v: a + v * (b + v * c)  # noqa: E731
    d_ref = quad(lambda v: (v - w) / -q(v), lo, hi, epsabs=0, epsrel=1e-13, limit=500)[0]
    t_ref = quad(lambda v: 1 / -q(v), lo, hi, epsabs=0, epsrel=1e-13, limit=500)[0]
    assert d[0] == pytest.approx(d_ref, rel=1e-9, abs=1e-300)
    assert t[0] == pytest.approx(t_ref, rel=1e-9)


# --- free roll against scipy.integrate.solve_ivp across the allowed thrust range ----------------------
@settings(max_examples=10, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])
@pytest.mark.slow
@given(scenario_values())
def test_free_roll_matches_solve_ivp(values) -> None:
    # solve_ivp (Radau, implicit, for the stiff laws the thrust range allows; rtol 1e-12).
    # The reference cannot integrate over a span of a few denormal seconds (Radau's step-size control
    # divides by it); reaction times that short are checked by the free roll's own limit tests.
    assume(values["procedure.reaction_time"] >= 1e-6)
    r = _solve(values)
    assume(r is not None and np.isfinite(r.free_roll_m[0]))
    ref = reference_free_roll(case_from_values(values), method="Radau")
    if ref["stopped"]:
        assert r.stopped_in_free_roll[0]
    else:
        assert not r.stopped_in_free_roll[0]
        assert r.brake_speed[0] == pytest.approx(ref["brake_speed"], rel=1e-6, abs=1e-6)
    assert r.free_roll_m[0] == pytest.approx(ref["free_roll_m"], rel=1e-6, abs=1e-6)
