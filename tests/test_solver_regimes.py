"""The closed-form solver at the boundaries of its regimes, and regressions for inputs that once gave
NaN, a hang or a wrong number (each within the allowed ranges of the scenario schema)."""

from __future__ import annotations

import tracemalloc
from dataclasses import replace

import numpy as np
import pytest
from conftest import anderson_example_6_7, general_cases
from scipy.integrate import quad

from landrisk.errors import SolveError
from landrisk.io import load_scenario
from landrisk.model import solve_landings, solve_one, solver
from landrisk.model.solver import GL_ROOT_LIMIT, RUNAWAY_SPEED, _integrals, _riccati
from landrisk.testing.reference import reference_braking_quad, reference_free_roll, reference_ground_roll


def _piece(lo, hi, a, b, c, w):
    arr = [np.array([x], dtype=float) for x in (lo, hi, a, b, c)]
    d, t, _ = _integrals(*arr, np.array([w], dtype=float))
    return float(d[0]), float(t[0])


def _quad(lo, hi, a, b, c, w):
    # scipy.integrate.quad (QUADPACK QAGS), the reference for one smooth piece.
    q = lambda v: a + v * (b + v * c)  # noqa: E731
    opts = {"epsabs": 0.0, "epsrel": 1e-13, "limit": 500}
    return (quad(lambda v: (v - w) / -q(v), lo, hi, **opts)[0], quad(lambda v: 1 / -q(v), lo, hi, **opts)[0])


# --- regime boundaries of the closed form, each against scipy.integrate.quad --------------------------
@pytest.mark.parametrize("rel", [0.0, 1e-12, -1e-12, 1e-8, -1e-8])
@pytest.mark.parametrize("c", [-2e-4, 3e-4])
def test_discriminant_near_zero(rel: float, c: float) -> None:
    # q = c (V - r)^2 (1 + rel): discriminant b^2 - 4 a c within rel b^2 of zero; the double root r
    # outside [0, 70] (below it for c < 0 so that q < 0 on the piece; for c > 0 q < 0 needs a shift).
    r = -150.0
    if c > 0:
        a, b = c * r * r * (1 + rel) - 3.0, -2 * c * r
    else:
        a, b = c * r * r * (1 + rel), -2 * c * r
    got = _piece(0.0, 70.0, a, b, c, -2.0)
    ref = _quad(0.0, 70.0, a, b, c, -2.0)
    assert got == pytest.approx(ref, rel=1e-11)


@pytest.mark.parametrize("b", [0.0, -0.03, 0.02, -1e-9])
def test_quadratic_term_exactly_zero(b: float) -> None:
    # C = 0: a linear (or constant) deceleration; the integrals are then logarithms (or polynomials).
    for lo, hi, w in ((0.0, 70.0, 0.0), (5.0, 60.0, 5.0), (-8.0, 0.0, -8.0)):
        assert _piece(lo, hi, -3.0, b, 0.0, w) == pytest.approx(_quad(lo, hi, -3.0, b, 0.0, w), rel=1e-12)


def test_constant_deceleration_is_kinematics() -> None:
    # a = -d constant: S = (V - w)^2 / (2 d), t = (V - w) / d (uniform deceleration).
    d, t = _piece(4.0, 64.0, -2.5, 0.0, 0.0, 4.0)
    assert d == pytest.approx(60.0**2 / 5.0, rel=1e-14)
    assert t == pytest.approx(60.0 / 2.5, rel=1e-14)


@pytest.mark.parametrize("margin", [1e-3, 1e-6, 1e-9])
def test_deceleration_nearly_vanishing_at_the_stop(margin: float) -> None:
    # a(w) = -margin: the time grows like ln(1/margin) while the distance stays finite.
    w, c, b = 3.0, -1e-4, -0.05  # a decreasing in V: a < 0 above w
    a = -margin - b * w - c * w * w
    got = _piece(w, 60.0, a, b, c, w)
    assert got == pytest.approx(_quad(w, 60.0, a, b, c, w), rel=1e-9)


def test_tailwind_piece_below_zero_airspeed() -> None:
    # Negative airspeed: drag pushes forward (c > 0 in a = A + B V + C V^2), w < V < 0.
    assert _piece(-12.0, 0.0, -3.5, 0.01, 1.5e-3, -12.0) == pytest.approx(
        _quad(-12.0, 0.0, -3.5, 0.01, 1.5e-3, -12.0), rel=1e-12)


def test_lift_equal_to_weight_at_touchdown(anderson) -> None:
    # L/W = (V_TD/V_S)^2 C_L,ground / C_Lmax = 1 exactly: the break point sits at the touchdown speed.
    cl = anderson.cl_max / anderson.touchdown_speed_ratio**2
    for f in (1.0 - 1e-12, 1.0, 1.0 + 1e-12):
        case = replace(anderson, g=9.80665, cl_ground=cl * f, reaction_time=2.0)
        res = solve_landings(case)
        ref = reference_ground_roll(case)
        assert res.braking_m[0] == pytest.approx(ref["braking_m"], rel=1e-8)
        assert res.free_roll_m[0] == pytest.approx(ref["free_roll_m"], rel=1e-8)
        b = reference_braking_quad(case, float(res.brake_speed[0]))
        assert res.braking_m[0] == pytest.approx(b["braking_m"], rel=1e-9)


@pytest.mark.parametrize("gap", [1e-3, 1e-7])
def test_headwind_equal_to_the_touchdown_speed_less_a_little(anderson, gap: float) -> None:
    # A headwind just below the touchdown airspeed: ground speed ~ gap; every phase tiny but exact.
    base = replace(anderson, g=9.80665)
    w = float(solve_landings(base).touchdown_speed[0]) - gap
    case = replace(base, headwind=w, reaction_time=0.0, touchdown_given=True,
                   touchdown_distance=100.0)
    res = solve_landings(case)
    b = reference_braking_quad(case, float(res.brake_speed[0]))
    assert res.braking_m[0] == pytest.approx(b["braking_m"], rel=1e-9)
    assert res.time_to_stop_s[0] == pytest.approx(b["braking_s"], rel=1e-9)


def test_closed_form_against_the_earlier_quadrature() -> None:
    # The earlier solver (Gauss-Legendre, RK4) stays callable; on plausible cases both agree closely.
    for case in general_cases(10, seed=5):
        new = solve_landings(case)
        old = solve_landings(case, method="quadrature")
        assert new.braking_m[0] == pytest.approx(old.braking_m[0], rel=1e-6)
        assert new.total_m[0] == pytest.approx(old.total_m[0], rel=1e-6)
    with pytest.raises(ValueError, match="unknown method"):
        solve_landings(anderson_example_6_7(), method="euler")


# --- the Gauss-Legendre path of the piece integrals, at the edge of where it is used ------------------
def _piece_with_roots(u1: complex, u2: complex, m: float = 40.0, h: float = 30.0, qm: float = -3.0):
    # q(V) = qm p(x), x = (V - m)/h, p(x) = (1 - u1 x)(1 - u2 x) = 1 + beta x + gamma x^2 (real for a
    # real pair or a conjugate pair): the coefficients a, b, c of q in V, and the piece [m - h, m + h].
    beta, gamma = -(u1 + u2).real, (u1 * u2).real
    c = qm * gamma / h**2
    b = qm * beta / h - 2.0 * c * m
    a = qm - qm * beta * m / h + qm * gamma * m * m / h**2
    return m - h, m + h, a, b, c


_AT_LIMIT = GL_ROOT_LIMIT * (1.0 - 1e-6)
_ROOTS = {
    "double real root at the upper end": (_AT_LIMIT, _AT_LIMIT),
    "double real root at the lower end": (-_AT_LIMIT, -_AT_LIMIT),
    "two real roots": (_AT_LIMIT, -0.5 * _AT_LIMIT),
    "complex pair": (_AT_LIMIT * np.exp(0.4j * np.pi), _AT_LIMIT * np.exp(-0.4j * np.pi)),
    "complex pair near the axis": (_AT_LIMIT * np.exp(0.05j * np.pi), _AT_LIMIT * np.exp(-0.05j * np.pi)),
}


@pytest.mark.parametrize("roots", list(_ROOTS), ids=list(_ROOTS))
def test_gauss_legendre_path_at_its_root_limit_against_quad(roots: str, monkeypatch) -> None:
    # The largest reciprocal roots the quadrature path accepts: its error bound (Trefethen, Approximation
    # Theory and Approximation Practice, SIAM 2013, Theorem 19.3) is below 1e-12 of the integrals here;
    # scipy.integrate.quad (QUADPACK) is the reference. The closed form must not be called.
    def no_closed_form(*args, **kwargs):
        raise AssertionError("the closed form was used inside the Gauss-Legendre limit")

    monkeypatch.setattr(solver, "_slow_integrals", no_closed_form)
    lo, hi, a, b, c = _piece_with_roots(*_ROOTS[roots])
    for w in (lo, lo - 7.0):
        arr = [np.array([x], dtype=float) for x in (lo, hi, a, b, c, w)]
        d, t, ok = _integrals(*arr)
        assert ok[0]
        assert (d[0], t[0]) == pytest.approx(_quad(lo, hi, a, b, c, w), rel=1e-12)


@pytest.mark.parametrize("roots", list(_ROOTS), ids=list(_ROOTS))
def test_just_beyond_the_root_limit_the_closed_form_takes_over(roots: str) -> None:
    # 1 % past the limit: the closed form (Gradshteyn & Ryzhik 2.172, 2.175.1), against scipy quad.
    u1, u2 = (complex(u) * 1.01 / (1.0 - 1e-6) for u in _ROOTS[roots])
    lo, hi, a, b, c = _piece_with_roots(u1, u2)
    calls = []
    original = solver._slow_integrals

    def spy(*args):
        calls.append(1)
        return original(*args)

    solver._slow_integrals = spy
    try:
        d, t, ok = _integrals(*(np.array([x], dtype=float) for x in (lo, hi, a, b, c, lo - 3.0)))
    finally:
        solver._slow_integrals = original
    assert calls and ok[0]
    assert (d[0], t[0]) == pytest.approx(_quad(lo, hi, a, b, c, lo - 3.0), rel=1e-11)


@pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")  # quad at its rounding floor
def test_gauss_legendre_error_over_the_accepted_roots_is_within_its_bound() -> None:
    # 400 random root pairs with max |u| <= the limit, real or complex, on the normalised piece [-1, 1]:
    # I0 = int dx/p and I1 = int x dx/p against scipy.integrate.quad (QUADPACK, epsrel 1e-13). The bound
    # (Trefethen 2013, Theorem 19.3, with the ellipse of semi-major axis 3.5) is 2.5e-13 on I0 >= 1.28 and
    # 8.8e-13 on I1; the tolerances add rounding.
    rng = np.random.default_rng(11)
    err0, err1 = [], []
    for _ in range(400):
        r = GL_ROOT_LIMIT * np.sqrt(rng.uniform(0.0, 1.0))
        if rng.random() < 0.5:
            u1, u2 = complex(r * rng.choice([-1.0, 1.0])), complex(r * rng.uniform(-1.0, 1.0))
        else:
            u1 = r * np.exp(1j * rng.uniform(0.0, np.pi))
            u2 = np.conj(u1)
        lo, hi, a, b, c = _piece_with_roots(u1, u2, m=0.0, h=1.0, qm=-1.0)
        d, t, _ = _integrals(*(np.array([x], dtype=float) for x in (lo, hi, a, b, c, -1.0)))
        beta, gamma = -(u1 + u2).real, (u1 * u2).real
        i0 = quad(lambda x, p=(1, beta, gamma): 1 / (p[0] + p[1] * x + p[2] * x * x), -1, 1, epsabs=0,
                  epsrel=1e-13)[0]
        i1 = quad(lambda x, p=(1, beta, gamma): x / (p[0] + p[1] * x + p[2] * x * x), -1, 1, epsabs=0,
                  epsrel=1e-13)[0]
        err0.append(abs(t[0] - i0) / i0)  # T = I0 with h = -q(m) = 1
        err1.append(abs((d[0] - t[0]) - i1))  # S = (m - w) I0 + h I1 = I0 + I1 with w = -1
    assert max(err0) < 1e-12
    assert max(err1) < 2e-12


# --- regressions (issue 16), built through the scenario so that unit syntax does not matter ------------
def _demo(**values):
    return load_scenario().with_values(**values).case()


def test_runaway_idle_thrust_is_flagged_not_nan() -> None:
    # idle t2 = 493 N s^2/m^2 on 64 t: thrust grows faster than drag, the speed runs away in the free roll.
    res = solve_landings(_demo(**{"aircraft.thrust.idle.t2": 493.0}))
    assert res.cannot_stop[0]
    for name in ("free_roll_m", "braking_m", "total_m", "time_to_stop_s"):
        assert np.isinf(getattr(res, name)[0]), name
    with pytest.raises(SolveError, match="cannot stop"):
        solve_one(_demo(**{"aircraft.thrust.idle.t2": 493.0}))


def test_light_aircraft_with_strong_quadratic_idle_term_is_not_nan() -> None:
    # 100 kg with idle t2 = -922: stiff free roll (time scale ~ 1 ms); demo idle t0 = 7 kN > weight.
    case = _demo(**{"aircraft.mass": 100.0, "aircraft.thrust.idle.t2": -922.0, "conditions.headwind": 0.0})
    res = solve_landings(case)
    assert res.cannot_stop[0] and np.isfinite(res.free_roll_m[0])
    ref = reference_free_roll(case, method="Radau")
    assert res.free_roll_m[0] == pytest.approx(ref["free_roll_m"], rel=1e-6)
    # Without the forward static thrust it stops; no NaN either way.
    case = _demo(**{"aircraft.mass": 100.0, "aircraft.thrust.idle.t2": -922.0, "conditions.headwind": 0.0,
                    "aircraft.thrust.idle.t0": 0.0})
    res = solve_landings(case)
    assert not res.cannot_stop[0] and np.isfinite(res.total_m[0])
    assert res.free_roll_m[0] == pytest.approx(reference_free_roll(case, method="Radau")["free_roll_m"],
                                               rel=1e-6)


@pytest.mark.parametrize("angle", [1e-308, 5e-324])
def test_vanishing_approach_angle_is_an_error(angle: float) -> None:
    with pytest.raises(ValueError, match="approach_angle"):
        solve_landings(_demo(**{"procedure.approach_angle": angle}))
    with pytest.raises(SolveError, match="approach_angle"):
        solve_one(_demo(**{"procedure.approach_angle": angle}))


def test_runaway_samples_finish_in_bounded_memory() -> None:
    # idle t2 = 200 over 2000 varied landings once bisected without a depth limit (memory exhausted).
    rng = np.random.default_rng(4)
    n = 2000
    case = load_scenario().with_values(**{"aircraft.thrust.idle.t2": 200.0}).case({
        "conditions.headwind": rng.uniform(-5, 15, n), "aircraft.mass": rng.uniform(40_000, 66_000, n),
        "runway.braking_mu": rng.uniform(0.05, 0.4, n)})
    tracemalloc.start()
    res = solve_landings(case)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 50e6  # well under 25 kB per landing
    assert not np.isnan(res.total_m).any()
    assert np.all(np.isfinite(res.total_m) | res.cannot_stop)


def test_strong_retarding_idle_thrust_free_roll() -> None:
    # idle t1 = -1e5 N s/m, t0 = 0: the earlier fixed-step RK4 gave -2.2 m on 25 t; solve_ivp 7.5 m.
    retard = {"aircraft.thrust.idle.t1": -1e5, "aircraft.thrust.idle.t0": 0.0}
    light = _demo(**{"aircraft.mass": 25_000.0, **retard})
    heavy = _demo(**{"aircraft.mass": 64_000.0, **retard})
    r_light, r_heavy = solve_landings(light), solve_landings(heavy)
    for case, res in ((light, r_light), (heavy, r_heavy)):
        assert res.free_roll_m[0] >= 0
        ref = reference_ground_roll(case)
        assert res.free_roll_m[0] == pytest.approx(ref["free_roll_m"], rel=1e-9)
        assert res.time_to_stop_s[0] == pytest.approx(ref["time_to_stop_s"], rel=1e-9)
    assert r_light.total_m[0] < r_heavy.total_m[0]


@pytest.mark.parametrize("b", [5.0, 20.0, 40.0])
def test_riccati_with_linear_force_law_is_the_exponential(b: float) -> None:
    # dV/dt = a + b V (c = 0): V(t) = r + (v0 - r) e^(b t), r = -a/b (the linear first-order ODE; e.g.
    # Boyce & DiPrima, *Elementary Differential Equations*, 10th ed. 2012, section 2.1). The earlier form
    # of the real-k branch cancelled 1 - g0/2k to rounding noise here (relative error ~ 1e-8 at b t = 20).
    a, v0, tau = -9.80665, 60.0, 1.0
    v, rate, blow = _riccati(*(np.array([x]) for x in (v0, tau, a, b, 0.0)))
    r = -a / b
    exact = r + (v0 - r) * np.exp(b * tau)
    assert not blow[0]
    assert v[0] == pytest.approx(exact, rel=1e-12)
    assert rate[0] == pytest.approx(a + b * exact, rel=1e-12)


def test_free_roll_speed_beyond_any_aircraft_is_a_runaway_not_nan() -> None:
    # Found by the input-space fuzzing: 100 kg, idle t1 = 99 999 N s/m, no drag: the speed grows like
    # e^(1000 t) over a 1 s free roll and overflowed into NaN distances; with a drag coefficient of 5e-186
    # it settled at 3.5e190 m/s and braked "finitely" from there. Both are runaways past RUNAWAY_SPEED.
    base = {"aircraft.mass": 100.0, "aircraft.wing_area": 1.0, "aircraft.wing_span": 2.0,
            "aircraft.cl_max": 1.0, "aircraft.cl_ground": 0.0, "aircraft.thrust.idle.t0": 0.0,
            "aircraft.thrust.idle.t1": 99_999.0, "aircraft.thrust.idle.t2": 0.0,
            "runway.rolling_mu": 1.0, "runway.braking_mu": 1.0, "conditions.headwind": 0.0,
            "procedure.reaction_time": 1.0}
    for cd0 in (0.0, 4.7e-186):
        for method in ("closed", "quadrature"):
            res = solve_landings(_demo(**base, **{"aircraft.cd0": cd0}), method=method)
            assert res.cannot_stop[0], (cd0, method)
            assert np.isinf(res.free_roll_m[0]) and np.isinf(res.total_m[0]), (cd0, method)
    # A modest forward idle thrust that speeds the aircraft up in the free roll still brakes to a stop.
    res = solve_landings(_demo(**{"aircraft.thrust.idle.t0": 80_000.0}))
    assert not res.cannot_stop[0] and res.brake_speed[0] > res.touchdown_speed[0]
    assert res.brake_speed[0] < RUNAWAY_SPEED
