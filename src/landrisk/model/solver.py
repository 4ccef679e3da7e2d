"""The landing-distance solver: N landings in one call, each phase a separate distance.

Phases (the physics modules give the published source of each relation):

1. **Air distance** from the screen height to touchdown, by the flare model
   (:func:`landrisk.physics.air_distance_flare`) or the given touchdown point.
2. **Free roll** for the reaction time after touchdown, brakes off: idle thrust, drag, rolling friction
   and slope. In one regime of the force law dV/dt = A + B V + C V^2 is a Riccati equation with
   constant coefficients, solved exactly (:func:`_riccati`); across zero airspeed or the lift-off speed
   regime by regime, the time to each break point in closed form.
3. **Braking roll** from the end of the free roll to zero ground speed. With a the acceleration,
   distance and time are integrals in airspeed, S = int (V - V_w) / (-a(V)) dV and t = int dV / (-a(V)),
   split where the force law stops being smooth: at the reverser cut-off, at zero airspeed (tailwind)
   and where lift takes the whole weight. On each piece a is a quadratic in V and the integrals are taken
   by Gauss-Legendre quadrature where a varies little across the piece (its error then provably below
   1e-12, :func:`_integrals`), in closed form elsewhere (:func:`_closed_form`), and by high-order
   Gauss-Legendre quadrature where the closed form would lose digits.

``method="quadrature"`` keeps the earlier solver (8-point Gauss-Legendre braking, fixed-step RK4 free
roll) for comparison and benchmarking.

Where the deceleration is not negative over the whole braking range the aircraft cannot stop: its braking
distance is infinite and the landing is flagged ``cannot_stop`` (so is a landing whose speed runs away in
the free roll, thrust growing faster than drag, or passes :data:`RUNAWAY_SPEED` there: free roll, braking
and time infinite). Where lift
exceeds weight at touchdown
the normal force is held at zero until it returns (no friction meanwhile) and the landing is flagged
``lift_exceeds_weight``; :func:`solve_one` refuses both.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import pairwise
from typing import Any

import numpy as np
from numpy.typing import NDArray

from landrisk.errors import SolveError
from landrisk.model.case import LandingCase
from landrisk.physics import (
    acceleration,
    air_distance_flare,
    aspect_ratio,
    ground_effect_factor,
    induced_drag_factor,
    stall_speed,
)
from landrisk.physics.ground_roll import quadratic_acceleration_coefficients

__all__ = ["GAUSS_LEGENDRE_ORDER", "METHODS", "RK4_STEPS", "LandingResult", "solve_landings", "solve_one"]

#: Solution methods: ``"closed"`` (closed forms, the default) and ``"quadrature"`` (the earlier solver:
#: Gauss-Legendre on the braking roll, fixed-step Runge-Kutta on the free roll), kept for comparison.
METHODS = ("closed", "quadrature")
#: Gauss-Legendre nodes per smooth piece of the braking roll (``method="quadrature"``).
GAUSS_LEGENDRE_ORDER = 8
#: Nodes of the quadrature that replaces the closed form where the latter would lose digits.
FALLBACK_ORDER = 20
#: The closed form is used where its rounding error stays below this multiple of the unit round-off
#: (estimated per piece from the magnitude of the terms it subtracts); elsewhere the quadrature.
CONDITION_LIMIT = 1e3
#: Least number of Runge-Kutta steps over the free roll, and the longest step [s]. The count is set per
#: landing from its own reaction time, so a landing's result never depends on the others in the call.
RK4_STEPS = 3
RK4_MAX_STEP = 1.5
#: Step [s] for the rare free roll that crosses zero airspeed or the lift-off speed (a kink in the force).
RK4_KINK_STEP = 0.002
#: Landings evaluated together (keeps the temporaries in cache; results do not depend on it).
CHUNK = 1 << 15
#: Brake-application airspeed [m/s] above which the free roll counts as a runaway (``cannot_stop``):
#: 10 km/s, about 30 times the speed of sound at sea level, is beyond any aircraft, and beyond it the
#: force law is far outside its domain (and its squares near the floating-point range).
RUNAWAY_SPEED = 1.0e4

_GL = {n: np.polynomial.legendre.leggauss(n) for n in (GAUSS_LEGENDRE_ORDER, FALLBACK_ORDER)}

Array = NDArray[np.float64]
Thrust = tuple[Array, Array, Array]


@dataclass(frozen=True)
class LandingResult:
    """Per-landing results of :func:`solve_landings`, each an array of shape (N,).

    Distances in metres, speeds in m/s (true airspeed unless called ground speed), times in seconds.
    """

    approach_m: Array  #: ground distance of the straight approach below the screen height [m]
    flare_m: Array  #: ground distance of the flare [m]
    air_distance_m: Array  #: screen height to touchdown [m] (approach + flare, or the touchdown point)
    free_roll_m: Array  #: touchdown to brake application [m]
    braking_m: Array  #: brake application to stop [m] (inf where ``cannot_stop``)
    total_m: Array  #: air distance + free roll + braking [m]
    lda_m: Array  #: landing distance available [m]
    margin_m: Array  #: LDA - total [m], negative for an overrun
    stall_speed: Array  #: stall speed V_S, true airspeed [m/s]
    touchdown_speed: Array  #: touchdown true airspeed V_TD [m/s]
    touchdown_ground_speed: Array  #: V_TD - V_w [m/s]
    brake_speed: Array  #: true airspeed when the brakes are applied [m/s]
    time_to_stop_s: Array  #: touchdown to stop [s] (inf where ``cannot_stop``)
    overrun: NDArray[np.bool_]  #: total > LDA
    runway_end_ground_speed: Array  #: ground speed at the runway end, 0 where no overrun [m/s]
    beyond_end_m: Array  #: distance beyond the runway end, 0 where no overrun [m]
    lift_exceeds_weight: NDArray[np.bool_]  #: lift above weight at touchdown (normal force held at 0)
    cannot_stop: NDArray[np.bool_]  #: the braking deceleration is not negative down to the stop
    stopped_in_free_roll: NDArray[np.bool_]  #: the ground speed reached zero before brake application

    @property
    def size(self) -> int:
        """Number of landings."""
        return int(self.total_m.shape[0])

    def flag_counts(self) -> dict[str, int]:
        """How many landings carry each flag, and how many overrun."""
        names = ("overrun", "lift_exceeds_weight", "cannot_stop", "stopped_in_free_roll")
        return {n: int(np.count_nonzero(getattr(self, n))) for n in names}


@dataclass(frozen=True)
class _Forces:
    """Per-landing force coefficients divided by the mass (see physics.ground_roll)."""

    drag: Array  # 1/2 rho S C_D / m [1/m]
    lift: Array  # 1/2 rho S C_L / m [1/m]
    g_cos: Array
    g_sin: Array
    idle: Thrust
    braking_thrust: Thrust  # thrust above the switch speed on the braking roll
    switch: Array  # reverse above this airspeed (-inf without reverse)
    lift_off_speed: Array  # airspeed above which lift exceeds weight (inf if never)


def _forces(c: LandingCase, n: int) -> _Forces:
    """The force coefficients of the landings of ``c``, each broadcast to (n,) (a read-only view where
    the inputs are the same for every landing, so that those are computed once)."""
    q = 0.5 * c.density * c.wing_area / c.mass
    k = induced_drag_factor(aspect_ratio(c.wing_span, c.wing_area), c.oswald)
    phi = ground_effect_factor(c.wing_height, c.wing_span)
    cd = c.cd0 + phi * k * c.cl_ground**2
    lift = q * c.cl_ground
    g_cos = c.g * np.cos(c.slope_angle)
    idle = (c.idle_t0 / c.mass, c.idle_t1 / c.mass, c.idle_t2 / c.mass)
    rev = (c.reverse_t0 / c.mass, c.reverse_t1 / c.mass, c.reverse_t2 / c.mass)
    use = np.asarray(c.use_reverse)
    with np.errstate(divide="ignore", over="ignore"):
        if np.all(lift > 0):
            lift_off = np.sqrt(g_cos / lift)
        else:
            lift_off = np.where(lift > 0, np.sqrt(g_cos / np.where(lift > 0, lift, 1.0)), np.inf)
    braking: Any = rev if use.all() else idle if not use.any() else tuple(
        np.where(use, r, i) for r, i in zip(rev, idle, strict=True))
    return _Forces(
        drag=_full(q * cd, n),
        lift=_full(lift, n),
        g_cos=_full(g_cos, n),
        g_sin=_full(c.g * np.sin(c.slope_angle), n),
        idle=tuple(_full(x, n) for x in idle),  # type: ignore[arg-type]
        braking_thrust=tuple(_full(x, n) for x in braking),  # type: ignore[arg-type]
        switch=_full(np.where(use, c.reverse_cutoff_speed, -np.inf), n),
        lift_off_speed=_full(lift_off, n),
    )


def _full(x: Any, n: int) -> Array:
    """x as an array of shape (n,): itself if it has that shape, else a read-only broadcast view."""
    x = np.asarray(x)
    return x if x.shape == (n,) else np.broadcast_to(x, (n,))


def _accel(v: Array, f: _Forces, mu: Array, thrust: Thrust) -> Array:
    return acceleration(
        v, thrust_per_mass=thrust, drag_per_mass=f.drag, lift_per_mass=f.lift, mu=mu,
        g_cos=f.g_cos, g_sin=f.g_sin,
    )


def _braking_accel(v: Array, f: _Forces, mu: Array) -> Array:
    """Acceleration under brakes, reverse thrust above the cut-off where it is used."""
    thrust = tuple(np.where(v > f.switch, hi, lo) for hi, lo in zip(f.braking_thrust, f.idle, strict=True))
    return _accel(v, f, mu, thrust)  # type: ignore[arg-type]


@dataclass(frozen=True)
class _Piece:
    """A stretch of airspeed [lo, hi] on which a = a + b V + c V^2, for the landings ``rows`` only."""

    rows: NDArray[np.intp] | slice  # the landings concerned (a slice for all of them)
    used: NDArray[np.bool_]  # of those, the ones for which the piece has length
    lo: Array
    hi: Array
    a: Array
    b: Array
    c: Array


def _pieces(
    v_lo: Array, v_hi: Array, f: _Forces, mu: Array, thrust_hi: Thrust, switch: Array
) -> list[_Piece]:
    """Split [v_lo, v_hi] where the force law is not smooth, lowest piece first.

    ``thrust_hi`` acts above ``switch`` (>= 0, or -inf for thrust_hi throughout), idle thrust below.
    Break points: zero airspeed, the switch speed and the lift-off speed. Each piece holds only the
    landings for which it has length.
    """
    # Break points in increasing order: zero airspeed <= the switch speed (>= 0; without a switch, zero
    # again) and the lift-off speed (> 0), which may fall either side of the switch; then clipped.
    switch_break = np.where(np.isfinite(switch), switch, 0.0)
    first = switch_break <= f.lift_off_speed  # the switch comes before the lift-off speed

    def clip(x: Array) -> Array:
        return np.minimum(np.maximum(x, v_lo), v_hi)

    edges = [v_lo, clip(np.zeros(())), clip(np.where(first, switch_break, f.lift_off_speed)),
             clip(np.where(first, f.lift_off_speed, switch_break)), v_hi]
    # The regime of each piece above zero airspeed follows from the order of the break points: from 0 to
    # the first break wheels loaded and idle thrust; between the two breaks wheels loaded and thrust_hi
    # if the switch comes first, else lift carries the weight and the thrust is idle; above both, no
    # load on the wheels and thrust_hi. Below zero airspeed the regime is taken at the piece's middle.
    pieces = []
    for index, (lo, hi) in enumerate(pairwise(edges)):
        used = hi > lo
        count = int(np.count_nonzero(used))
        if count == 0:
            continue
        rows: NDArray[np.intp] | slice = slice(None)
        fr, mur, sw, th, first_r = f, mu, switch, thrust_hi, first
        if count < lo.size // 2:  # few landings: work on those only; otherwise on all, masked
            rows = np.flatnonzero(used)
            used = np.ones(count, dtype=bool)
            lo, hi = lo[rows], hi[rows]
            fr, mur, sw, first_r = _take_forces(f, rows), _at(mu, rows), switch[rows], first[rows]
            th = tuple(_at(x, rows) for x in thrust_hi)  # type: ignore[assignment]
        if index == 0:
            mid = 0.5 * (hi + lo)
            thrust = tuple(np.where(mid > sw, h, i) for h, i in zip(th, fr.idle, strict=True))
            a, b, c = _coefficients(mid, fr, mur, thrust)  # type: ignore[arg-type]
        elif index == 1:
            a, b, c = _regime(fr, mur, fr.idle, True)
        elif index == 2:
            thrust = tuple(np.where(first_r, h, i) for h, i in zip(th, fr.idle, strict=True))
            a, b, c = _regime(fr, mur, thrust, first_r)  # type: ignore[arg-type]
        else:
            a, b, c = _regime(fr, mur, th, False)
        pieces.append(_Piece(rows, used, lo, hi, a, b, c))
    return pieces


def _regime(
    f: _Forces, mu: Array, thrust: Thrust, loaded: bool | NDArray[np.bool_]
) -> tuple[Array, Array, Array]:
    """(A, B, C) of the force law at positive airspeed, wheels loaded or not."""
    return quadratic_acceleration_coefficients(
        airflow_sign=1.0, wheels_loaded=loaded, thrust_per_mass=thrust, drag_per_mass=f.drag,
        lift_per_mass=f.lift, mu=mu, g_cos=f.g_cos, g_sin=f.g_sin,
    )


def _coefficients(v: Array, f: _Forces, mu: Array, thrust: Thrust) -> tuple[Array, Array, Array]:
    """(A, B, C) of the quadratic force law of the regime at airspeed ``v`` (sign of V, wheels loaded)."""
    return quadratic_acceleration_coefficients(
        airflow_sign=np.where(v >= 0, 1.0, -1.0),
        wheels_loaded=f.g_cos - f.lift * v * np.abs(v) > 0,
        thrust_per_mass=thrust, drag_per_mass=f.drag, lift_per_mass=f.lift, mu=mu, g_cos=f.g_cos,
        g_sin=f.g_sin,
    )


def _roll_integrals(
    v_lo: Array, v_hi: Array, headwind: Array, f: _Forces, mu: Array, thrust_hi: Thrust, switch: Array,
    method: str = "closed",
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """Distance and time to slow from airspeed ``v_hi`` to ``v_lo``, and whether a < 0 throughout.

    The range is split by :func:`_pieces`; each piece is integrated by :func:`_piece_integrals`.
    """
    dist = np.zeros_like(v_lo)
    time = np.zeros_like(v_lo)
    ok = np.ones(v_lo.shape, dtype=bool)
    for p in _pieces(v_lo, v_hi, f, mu, thrust_hi, switch):
        # A piece without length (hi = lo) integrates to 0 and counts as a < 0 (see _piece_integrals).
        d, t, good = _piece_integrals(p, headwind[p.rows], method)
        ok[p.rows] &= good | ~p.used
        dist[p.rows] += d
        time[p.rows] += t
    if not ok.all():
        dist = np.where(ok, dist, np.inf)
        time = np.where(ok, time, np.inf)
    return dist, time, ok


def _piece_integrals(p: _Piece, w: Array, method: str) -> tuple[Array, Array, NDArray[np.bool_]]:
    """int (V - w)/(-a) dV, int dV/(-a) over each piece, and whether a < 0 on the whole piece (the
    integrals are meaningful only there)."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if method == "quadrature":
            _, _, a_min, a_max = _extremes(p.lo, p.hi, p.a, p.b, p.c)
            d, t = _quadrature(p.lo, p.hi, p.a, p.b, p.c, w, a_min, a_max, GAUSS_LEGENDRE_ORDER)
            empty = p.hi == p.lo
            return np.where(empty, 0.0, d), np.where(empty, 0.0, t), (a_max < 0) | empty
        return _integrals(p.lo, p.hi, p.a, p.b, p.c, w)


#: Gauss-Legendre points of the fast path of :func:`_integrals`, and the largest reciprocal root |u| of
#: the normalised deceleration p(x) (see :func:`_closed_form`) for which it is used.
GL_FAST_ORDER = 8
GL_ROOT_LIMIT = 0.25
# The positive nodes x_j as (x_j^2, weight): the nodes come in pairs +-x_j of equal weight.
_GL_PAIRS = tuple((float(x * x), float(wt)) for x, wt in zip(*np.polynomial.legendre.leggauss(GL_FAST_ORDER),
                                                                 strict=True) if x > 0)


def _integrals(
    lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """S = int (V - w)/(-q) dV and T = int dV/(-q) on [lo, hi], q = a + b V + c V^2, and whether q < 0
    on the whole of [lo, hi] (S and T are meaningful only there; an empty piece counts as q < 0).

    With the midpoint m, half-width h and x = (V - m)/h, q = q(m) p(x), p(x) = 1 + beta x + gamma x^2 =
    (1 - u1 x)(1 - u2 x), u1 and u2 the reciprocal roots of p (:func:`_closed_form`). Where q(m) < 0 and
    max |u| <= GL_ROOT_LIMIT, p >= (1 - |u|)^2 > 0 on [-1, 1], so q < 0 throughout, and the integrands
    1/p and x/p are analytic inside the Bernstein ellipse E_rho of semi-major axis R = 3.5 (|x| <= R
    there, so |1 - u x| >= 1 - 0.25 R = 1/8 and |p| >= 1/64; rho = R + sqrt(R^2 - 1) = 6.85): n-point
    Gauss-Legendre quadrature then errs by at most (64/15) M rho^(-2n) / (rho^2 - 1) (Trefethen,
    *Approximation Theory and Approximation Practice*, SIAM 2013, Theorem 19.3; constant from memory),
    with M = 64 for 1/p and 64 R for x/p: for n = 8 under 3e-13 and 9e-13, against I0 = int dx/p >=
    2/(1 + |u|)^2 > 1.28 and S ~ int (1 + x)/p dx > 1.28 (since m - w >= h). The symmetric nodes
    are taken in pairs: with A = 1 + gamma x_j^2 and B = beta x_j, 1/p(x_j) + 1/p(-x_j) =
    2 A / (A^2 - B^2) and x_j/p(x_j) - x_j/p(-x_j) = -2 beta x_j^2 / (A^2 - B^2), so a pair costs one
    division.
    Elsewhere the closed form (:func:`_closed_form`), or high-order quadrature where that would lose
    digits. Every operation is element by element, so a landing's result does not depend on the
    others evaluated with it.
    """
    # Written with in-place operations: this is the solver's innermost work (several pieces a landing).
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        mid = hi + lo
        mid *= 0.5
        h = hi - lo
        h *= 0.5
        qm = mid * c
        qm += b
        qm *= mid
        qm += a  # q(m)
        k = h / qm
        beta = c * mid
        beta *= 2.0
        beta += b
        beta *= k  # q'(m) h / q(m)
        gam = c * h
        gam *= k  # c h^2 / q(m)
        bb = beta * beta
        tmp = gam * -4.0
        tmp += bb  # the discriminant delta of p
        # max |u| = sqrt(gamma) for complex roots (delta < 0), (|beta| + sqrt(delta))/2 for real ones.
        real_roots = np.sqrt(np.abs(tmp))
        real_roots += np.abs(beta)
        fast = np.where(tmp < 0, gam <= GL_ROOT_LIMIT**2, real_roots <= 2.0 * GL_ROOT_LIMIT)
        fast &= qm < 0
        # Per pair, A^2 - B^2 = 1 + P x^2 + Q x^4 with P = 2 gamma - beta^2, Q = gamma^2; the sums
        # s_a = sum w/(A^2 - B^2) and s1 = sum w x^2/(A^2 - B^2) give s0 = sum w A/(A^2 - B^2) =
        # s_a + gamma s1.
        pp = gam * 2.0
        pp -= bb
        qq = gam * gam
        s_a = np.zeros(tmp.shape)
        s1 = np.zeros(tmp.shape)
        for x2, wt in _GL_PAIRS:
            np.multiply(qq, x2, out=tmp)
            tmp += pp
            tmp *= x2
            tmp += 1.0
            np.divide(wt, tmp, out=tmp)
            s_a += tmp
            tmp *= x2
            s1 += tmp
        # I0 = 2 s0, I1 = -2 beta s1; T = -k I0, S = -k ((m - w) I0 + h I1).
        s0 = gam * s1
        s0 += s_a
        time = s0 * k
        time *= -2.0
        dist = mid - w
        dist *= s0
        h *= beta
        h *= s1
        dist -= h
        dist *= k
        dist *= -2.0
    if fast.all():
        return dist, time, fast
    i = np.flatnonzero(~fast)
    dist[i], time[i], ok = _slow_integrals(lo[i], hi[i], _at(a, i), _at(b, i), _at(c, i), _at(w, i))
    fast[i] = ok
    return dist, time, fast


def _slow_integrals(
    lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """:func:`_integrals` where Gauss-Legendre is not used: an empty piece is 0; a piece where q < 0
    throughout by :func:`_closed_form` where it is well conditioned, :func:`_quadrature` (high order)
    elsewhere; a piece where q >= 0 somewhere is returned with ok False (its values are not used)."""
    a, b, c, w = (np.broadcast_to(x, lo.shape) for x in (a, b, c, w))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        a_lo, a_hi, a_min, a_max = _extremes(lo, hi, a, b, c)
        empty = hi == lo
        ok = (a_max < 0) | empty
        dist, time, bad = _closed_form(lo, hi, a, b, c, w, a_lo, a_hi)
    bad &= a_max < 0  # where a >= 0 somewhere the result is infinite anyway (flagged by the caller)
    if bad.any():
        i = np.flatnonzero(bad)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            dist[i], time[i] = _quadrature(lo[i], hi[i], a[i], b[i], c[i], w[i], a_min[i], a_max[i],
                                           FALLBACK_ORDER)
    dist = np.where(empty, 0.0, dist)
    time = np.where(empty, 0.0, time)
    return dist, time, ok


def _at(x: Array, i: NDArray[np.intp]) -> Array:
    """x[i], or x itself where x is one value for every landing (a 0-d array or a float)."""
    return x if np.ndim(x) == 0 else x[i]


def _closed_form(
    lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array, a_lo: Array, a_hi: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """Closed-form S = int (V - w)/(-q) dV and T = int dV/(-q) on [lo, hi], q = a + b V + c V^2 < 0.

    With the midpoint m, half-width h and x = (V - m)/h, q = q(m) p(x), p(x) = 1 + beta x + gamma x^2
    (beta = q'(m) h/q(m), gamma = c h^2/q(m)), p > 0 on [-1, 1]. Then T = h/(-q(m)) I0 and
    S = h/(-q(m)) ((m - w) I0 + h I1), with I0 = int dx/p and I1 = int x dx/p over [-1, 1]. From the
    standard integrals of 1/(a + b x + c x^2) and x/(a + b x + c x^2) (Gradshteyn & Ryzhik, *Table of
    Integrals, Series, and Products*, 7th ed. 2007, 2.172 and 2.175.1; Abramowitz & Stegun 1964, 3.3.16
    and 3.3.17), with the discriminant delta = beta^2 - 4 gamma and r = sqrt|delta|:

    - delta < 0: I0 = 2 atan2(r, 1 - gamma) / r (the two arctangents of 2.172 combined into one);
    - delta > 0: I0 = ln((1 - gamma + r)/(1 - gamma - r)) / r, written as
      log1p(2 r (1 - gamma + r) / (p(1) p(-1))) / r since (1 - gamma)^2 - delta = p(1) p(-1);
    - delta = 0: I0 = 2 / (1 - gamma);
    - I1 = (ln(p(1)/p(-1)) - beta I0) / (2 gamma), the logarithm as log1p(2 beta / p(-1)).

    None of these loses digits as delta -> 0 (atan2 and log1p are exact to first order). I1 does as
    gamma -> 0 (c = 0 exactly is the limit), and the sum (m - w) I0 + h I1 does where a vanishes at the
    low end. The rounding error of the result relative to it is bounded by the size of the terms
    subtracted; where that bound exceeds CONDITION_LIMIT the landing is returned in ``bad`` for the
    quadrature. Bit-reproducible per landing: every operation is element by element.
    """
    mid = 0.5 * (hi + lo)
    h = 0.5 * (hi - lo)
    qm = a + mid * (b + mid * c)
    k = h / qm
    beta = (b + 2.0 * c * mid) * k
    gam = c * h * k
    delta = beta * beta - 4.0 * gam
    r = np.sqrt(np.abs(delta))
    xi = mid - w
    i0, comb, bad = _closed_terms(beta, gam, delta, r, a_lo / qm, a_hi / qm, xi, h)
    return -k * comb, -k * i0, bad


def _closed_terms(
    beta: Array, gam: Array, delta: Array, r: Array, p_lo: Array, p_hi: Array, xi: Array, h: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """I0, (m - w) I0 + h I1 and the ill-conditioned rows, by the closed forms of :func:`_closed_form`."""
    omg = 1.0 - gam
    neg = delta < 0
    i0 = np.empty_like(r)
    j = np.flatnonzero(neg)
    if j.size:
        # atan2(r, 1 - gamma) = atan(r / (1 - gamma)) for 1 - gamma > 0, the usual case.
        o, rj = omg[j], r[j]
        i0[j] = 2.0 * np.where(o > 0, np.arctan(rj / np.where(o > 0, o, 1.0)), np.arctan2(rj, o)) / rj
    j = np.flatnonzero(~neg)
    if j.size:
        rj = r[j]
        i0[j] = np.log1p(2.0 * rj * (omg[j] + rj) / (p_lo[j] * p_hi[j])) / rj
    i0 = np.where(r > 0, i0, 2.0 / omg)
    ell = np.log(p_hi / p_lo)  # ln p(1)/p(-1); absolute error ~ 1 ulp, counted in err below
    bi0 = beta * i0
    comb = xi * i0 + h * (ell - bi0) / (2.0 * gam)
    err = h * (1.0 + np.abs(ell) + np.abs(bi0)) / (2.0 * np.abs(gam)) + xi * i0
    bad = ~((err <= CONDITION_LIMIT * comb) & (comb < np.inf))  # also where not a finite number
    return i0, comb, bad


def _extremes(lo: Array, hi: Array, a: Array, b: Array, c: Array) -> tuple[Array, Array, Array, Array]:
    """a + b V + c V^2 at lo and at hi, and its least and largest value on [lo, hi] (vertex if inside)."""
    a_lo = a + lo * (b + lo * c)
    a_hi = a + hi * (b + hi * c)
    low, high = np.minimum(a_lo, a_hi), np.maximum(a_lo, a_hi)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        vertex = -b / (2.0 * c)
        a_v = a - b * b / (4.0 * c)
    inside = (c != 0) & (vertex > lo) & (vertex < hi)
    return a_lo, a_hi, np.where(inside & (c > 0), np.minimum(low, a_v), low), np.where(
        inside & (c < 0), np.maximum(high, a_v), high
    )


#: A piece is bisected while |a| varies across it by more than this factor: the zero of a just beyond
#: it would otherwise slow the convergence of the quadrature (Gauss-Legendre error ~ rho^(-2n), rho the
#: Bernstein-ellipse parameter of the nearest pole).
REFINE_RATIO = 4.0
#: Bisection depth limit: a piece still refining then is integrated as it is (each level halves the
#: distance to the zero of a, so 60 levels reach 1e-18 of the piece; only pieces next to that zero split).
_MAX_REFINE = 60


def _quadrature(
    lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array, a_min: Array, a_max: Array,
    order: int = GAUSS_LEGENDRE_ORDER,
) -> tuple[Array, Array]:
    """int (V - w)/(-a) dV and int dV/(-a) over [lo, hi] with a = a + b V + c V^2 < 0 on it.

    Gauss-Legendre on each piece; pieces where |a| changes by more than REFINE_RATIO are bisected
    (only those landings), at most _MAX_REFINE times; pieces with a >= 0 or a bound that is not finite
    are not refined (their result is infinite or undefined and flagged by the caller). The nodes are
    summed one by one, and a landing's pieces in a fixed order, so that its result does not depend on
    the other landings evaluated with it.
    """
    n = lo.size
    dist = np.zeros(n)
    time = np.zeros(n)
    idx = np.arange(n)
    for depth in range(_MAX_REFINE):
        fine = ~((a_min < REFINE_RATIO * a_max) & (a_max < 0) & np.isfinite(lo) & np.isfinite(hi))
        fine |= depth == _MAX_REFINE - 1
        if fine.all():
            if depth == 0:
                return _gauss_legendre(lo, hi, a, b, c, w, order)
            d, t = _gauss_legendre(lo, hi, a[idx], b[idx], c[idx], w[idx], order)
            dist += np.bincount(idx, d, minlength=n)
            time += np.bincount(idx, t, minlength=n)
            break
        if fine.any():
            j = idx[fine]
            d, t = _gauss_legendre(lo[fine], hi[fine], a[j], b[j], c[j], w[j], order)
            dist += np.bincount(j, d, minlength=n)
            time += np.bincount(j, t, minlength=n)
        keep = ~fine
        idx2 = idx[keep]
        mid = 0.5 * (lo[keep] + hi[keep])
        idx = np.concatenate([idx2, idx2])
        lo = np.concatenate([lo[keep], mid])
        hi = np.concatenate([mid, hi[keep]])
        _, _, a_min, a_max = _extremes(lo, hi, a[idx], b[idx], c[idx])
    return dist, time


def _gauss_legendre(
    lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array, order: int
) -> tuple[Array, Array]:
    half = 0.5 * (hi - lo)
    mid = 0.5 * (hi + lo)
    d_sum = np.zeros_like(half)
    t_sum = np.zeros_like(half)
    for x_j, w_j in zip(*_GL[order], strict=True):
        v = mid + half * x_j
        inv = w_j / (a + v * (b + v * c))  # weight / a at the node (negative)
        t_sum -= inv
        d_sum -= (v - w) * inv
    return half * d_sum, half * t_sum


# --- Free roll ----------------------------------------------------------------------------------------


def _riccati(v0: Array, tau: Array, a: Array, b: Array, c: Array) -> tuple[Array, Array, NDArray[np.bool_]]:
    """Exact solution of dV/dt = a + b V + c V^2 from V(0) = v0 over ``tau`` seconds.

    With q0 = a(v0), g0 = a'(v0) and k^2 = g0^2/4 - c q0 (a quarter of the discriminant), the Riccati
    equation with constant coefficients is solved by V = v0 + q0 S / D, D = cosh(k t) - g0 S / 2,
    S = sinh(k t) / k (for k^2 < 0, cos and sin of |k| t), and then dV/dt = q0 / D^2 (substitute; e.g.
    Polyanin & Zaitsev, *Handbook of Exact Solutions for Ordinary Differential Equations*, 2nd ed. 2003,
    1.2.1; from memory). Where |k t| <= 1/2, cosh and sinh by their power series; elsewhere written with
    e^(-2 k t) so that nothing overflows for k t large.

    Returns V(tau), dV/dt at tau and whether V runs to infinity before tau (D reaches 0). The
    equilibrium the solution may approach is :func:`_equilibrium`.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore", under="ignore"):
        q0 = a + v0 * (b + v0 * c)
        g0 = b + 2.0 * c * v0
        k2 = 0.25 * g0 * g0 - c * q0
        z = k2 * tau * tau
        small = np.abs(z) <= 0.25
        if small.all():
            return _riccati_series(v0, tau, q0, g0, z)
        v = np.empty(np.broadcast(v0, tau, q0).shape)
        rate = np.empty_like(v)
        blow = np.empty(v.shape, dtype=bool)
        j = np.flatnonzero(small)
        if j.size:
            v[j], rate[j], blow[j] = _riccati_series(_at(v0, j), _at(tau, j), q0[j], g0[j], z[j])
        j = np.flatnonzero(~small)
        v[j], rate[j], blow[j] = _riccati_large(_at(v0, j), _at(tau, j), q0[j], g0[j], k2[j], _at(c, j))
    return v, rate, blow


def _riccati_series(
    v0: Array, tau: Array, q0: Array, g0: Array, z: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """:func:`_riccati` for |z| = |k^2 t^2| <= 1/4: cosh(k t) = sum z^n/(2n)!, sinh(k t)/k =
    t sum z^n/(2n+1)! (cos and sin where z < 0); 8 terms leave less than 0.25^8/16! ~ 7e-19."""
    cc = np.full(z.shape, 1.0 / _FACT[14])
    ss = np.full(z.shape, 1.0 / _FACT[15])
    for n in range(6, -1, -1):
        cc *= z
        cc += 1.0 / _FACT[2 * n]
        ss *= z
        ss += 1.0 / _FACT[2 * n + 1]
    ss *= tau
    d = g0 * ss
    d *= -0.5
    d += cc  # D = cosh - g0 S / 2
    y = q0 * ss
    y /= d
    y += v0
    rate = q0 / d
    rate /= d
    return y, rate, (d <= 0) & (q0 != 0)


def _riccati_large(
    v0: Array, tau: Array, q0: Array, g0: Array, k2: Array, c: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """:func:`_riccati` for |k t| > 1/2, with e^(-2 k t) for real k and cos, sin for imaginary k."""
    kk = np.sqrt(np.abs(k2))
    x = kk * tau
    real = k2 >= 0
    # Real k: 2 e^(-kt) D = (1 + e) - g0 tau phi, 2 e^(-kt) S = 2 tau phi, e = e^(-2kt),
    # phi = (1 - e)/(2 k t).
    e = np.exp(-2.0 * x)
    phi = -np.expm1(-2.0 * x) / (2.0 * x)
    # g0 tau phi = s (1 - e), s = g0 / 2k; then 2 e^(-kt) D = (1 - s) + e (1 + s), and for g0 > 0
    # 1 - s = (4k^2 - g0^2) / (2k (2k + g0)) = -4 c q0 / (2k (2k + g0)): without the cancellation
    # of 1 - s that would leave rounding noise where c q0 << g0^2 (a thrust that grows with
    # speed faster than drag: D ~ e^(-2kt) then). D underflowing to 0 is a speed beyond the
    # floating-point range before tau, flagged with the speeds that run to infinity.
    s_ = 0.5 * g0 / kk
    one_minus_s = np.where(g0 > 0, -4.0 * c * q0 / (2.0 * kk * (2.0 * kk + g0)), 1.0 - s_)
    den_r = one_minus_s + e * (1.0 + s_)
    # Imaginary k: D = cos(kt) - g0/2 sin(kt)/k, valid while D > 0 (before its first zero).
    sn = np.sin(x) / kk
    d_i = np.cos(x) - 0.5 * g0 * sn
    y = np.where(real, q0 * 2.0 * tau * phi / den_r, q0 * sn / d_i)
    rate = np.where(real, q0 * 4.0 * e / (den_r * den_r), q0 / (d_i * d_i))
    blow = np.where(real, den_r <= 0, (d_i <= 0) | (x >= np.pi))
    moving = q0 != 0  # q0 = 0: at rest on an equilibrium (the formulas would give 0/0 where e underflows)
    return v0 + np.where(moving, y, 0.0), np.where(moving, rate, 0.0), blow & moving


def _equilibrium(v0: Array, a: Array, b: Array, c: Array) -> Array:
    """The equilibrium airspeed that the solution of :func:`_riccati` from v0 approaches: with k real and
    k > g0/2, the root v0 + q0 / (k - g0/2) of a + b V + c V^2; NaN where there is none."""
    q0 = a + v0 * (b + v0 * c)
    g0 = b + 2.0 * c * v0
    k2 = 0.25 * g0 * g0 - c * q0
    with np.errstate(divide="ignore", invalid="ignore"):
        kk = np.sqrt(np.abs(k2))
        return np.where((k2 >= 0) & (kk - 0.5 * g0 > 0), v0 + q0 / (kk - 0.5 * g0), np.nan)


_FACT = [float(math.factorial(n)) for n in range(20)]


def _trajectory_distance(
    v0: Array, v1: Array, q0: Array, q1: Array, tau: Array, w: Array, a: Array, b: Array, c: Array,
) -> Array:
    """int (V - w) dt along a solution of dV/dt = q(V) = a + b V + c V^2 from v0 (rate q0) to v1 (q1).

    As dt = dV/q, this is the braking integral of :func:`_integrals` over [min, max] of v0, v1. Where the
    motion has settled on an equilibrium r (|q1| <= 1e-3 |q0|), that integral has a logarithmic
    singularity next to its end; there x = (r - w) tau + int (V - r)/(-q) dV, and (V - r)/q =
    1/(q'(r) + c (V - r)) integrates to a logarithm without singularity.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if np.all(q0 < 0):  # slowing down everywhere (the usual free roll): v1 <= v0
            d, _, _ = _integrals(v1, v0, a, b, c, w)
        else:
            sgn = np.where(q0 < 0, 1.0, -1.0)  # sgn q < 0 along the way
            d, _, _ = _integrals(np.minimum(v0, v1), np.maximum(v0, v1), sgn * a, sgn * b, sgn * c, w)
        near = np.abs(q1) <= 1e-3 * np.abs(q0)
        if near.any():
            i = np.flatnonzero(near)
            v0i, v1i, ai, bi, ci, wi = v0[i], v1[i], _at(a, i), _at(b, i), _at(c, i), _at(w, i)
            root = _equilibrium(v0i, ai, bi, ci)
            den = bi + 2.0 * ci * root + ci * (v1i - root)
            z = ci * (v0i - v1i) / den
            ratio = np.where(z != 0, np.log1p(z) / z, 1.0)
            settled = (root - wi) * _at(tau, i) - (v0i - v1i) / den * ratio
            d[i] = np.where(np.isfinite(root), settled, d[i])
    if np.any(q0 == 0):
        d = np.where(q0 == 0, (v0 - w) * tau, d)
    return d


def _free_roll(
    v0: Array, tau: Array, w: Array, f: _Forces, mu: Array, method: str = "closed"
) -> tuple[Array, Array]:
    """Airspeed and distance after ``tau`` seconds of brakes-off roll from airspeed ``v0``.

    Where the motion stays in the regime of the force law at ``v0`` (sign of the airspeed, wheels loaded
    or not), the exact Riccati solution (:func:`_riccati`) and the closed-form distance; elsewhere
    (crossing zero airspeed or the lift-off speed) :func:`_free_roll_pieces`. A speed that runs to
    infinity is returned as inf (distance inf). An airspeed at or below ``w`` means the aircraft
    stopped; its distance is then recomputed by the caller.
    """
    if method == "quadrature":
        return _free_roll_rk4(v0, tau, w, f, mu)
    sign0 = v0 >= 0
    loaded0 = f.g_cos - f.lift * v0 * np.abs(v0) > 0
    if sign0.all():  # touchdown at a positive airspeed, as always from the touchdown speed
        a, b, c = _regime(f, mu, f.idle, loaded0)
    else:
        a, b, c = _coefficients(v0, f, mu, f.idle)
    v1, q1, blow = _riccati(v0, tau, a, b, c)
    with np.errstate(invalid="ignore"):
        same = ((v1 >= 0) == sign0) & ((f.g_cos - f.lift * v1 * np.abs(v1) > 0) == loaded0) & ~blow
    same &= np.isfinite(v1)
    q0 = a + v0 * (b + v0 * c)
    x = _trajectory_distance(v0, v1, q0, q1, tau, w, a, b, c)
    if not same.all():
        i = np.flatnonzero(~same)
        v1[i], x[i] = _free_roll_pieces(v0[i], tau[i], w[i], _take_forces(f, i), mu[i])
    return v1, x


def _free_roll_pieces(v0: Array, tau: Array, w: Array, f: _Forces, mu: Array) -> tuple[Array, Array]:
    """Free roll across regimes: regime by regime, the time to the next break point in closed form,
    then the Riccati solution for the time left. A scalar autonomous equation with a continuous
    right-hand side has monotone solutions, so each break point is crossed at most once."""
    n = v0.size
    q_start = _accel(v0, f, mu, f.idle)
    v_out = np.where(q_start == 0, v0, np.nan)
    x_out = np.where(q_start == 0, (v0 - w) * tau, 0.0)
    left = tau.copy()
    no_switch = np.full(n, -np.inf)
    # Slowing down: walk the pieces of [w, v0] from the top; the motion ends in the piece whose
    # traverse time exceeds the time left, or at the stop (airspeed w) if every piece is traversed.
    dec = np.flatnonzero(q_start < 0)
    if dec.size:
        fd, mud = _take_forces(f, dec), mu[dec]
        open_ = np.ones(dec.size, dtype=bool)
        for p in reversed(_pieces(w[dec], v0[dec], fd, mud, fd.idle, no_switch[dec])):
            rows = np.arange(dec.size)[p.rows]
            d, t, good = _piece_integrals(p, w[dec][rows], "closed")
            t = np.where(good, t, np.inf)
            act = open_[rows] & p.used
            through = act & (t < left[dec][rows])
            gi = dec[rows[through]]
            left[gi] -= t[through]
            x_out[gi] += d[through]
            end = act & ~through
            if end.any():
                k = np.flatnonzero(end)
                gi = dec[rows[k]]
                top = p.hi[k]
                vk, qk, _ = _riccati(top, left[gi], p.a[k], p.b[k], p.c[k])
                vk = np.clip(vk, p.lo[k], top)
                q_top = p.a[k] + top * (p.b[k] + top * p.c[k])
                x_out[gi] += _trajectory_distance(top, vk, q_top, qk, left[gi], w[gi], p.a[k], p.b[k],
                                                  p.c[k])
                v_out[gi] = vk
                open_[rows[k]] = False
        stopped = dec[open_]
        v_out[stopped] = w[stopped]  # stopped before tau (distance recomputed by the caller)
    # Speeding up (thrust above the retarding forces): to the lift-off speed, then unloaded.
    inc = np.flatnonzero(q_start > 0)
    if inc.size:
        fi, mui = _take_forces(f, inc), mu[inc]
        vi, ti, wi = v0[inc], left[inc], w[inc]
        a, b, c = _coefficients(vi, fi, mui, fi.idle)
        lift_off = np.maximum(fi.lift_off_speed, vi)
        cross = np.isfinite(lift_off) & (vi < lift_off)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            d, t, up = _integrals(vi, np.where(cross, lift_off, vi), -a, -b, -c, wi)
        reach = cross & up & (t < ti)  # q > 0 up to the lift-off speed, reached in time
        x1 = np.where(reach, d, 0.0)
        t_left = np.where(reach, ti - t, ti)
        start = np.where(reach, lift_off, vi)
        # Above the lift-off speed the wheels carry nothing: the unloaded law.
        a2, b2, c2 = quadratic_acceleration_coefficients(
            airflow_sign=np.ones_like(vi), wheels_loaded=~reach & (fi.g_cos - fi.lift * vi * vi > 0),
            thrust_per_mass=fi.idle, drag_per_mass=fi.drag, lift_per_mass=fi.lift, mu=mui,
            g_cos=fi.g_cos, g_sin=fi.g_sin,
        )
        v2, q2, blow = _riccati(start, t_left, a2, b2, c2)
        q_s = a2 + start * (b2 + start * c2)
        x2 = _trajectory_distance(start, v2, q_s, q2, t_left, wi, a2, b2, c2)
        v_out[inc] = np.where(blow, np.inf, v2)
        x_out[inc] = np.where(blow, np.inf, x1 + x2)
    return v_out, x_out


def _free_roll_rk4(
    v0: Array, duration: Array, headwind: Array, f: _Forces, mu: Array
) -> tuple[Array, Array]:
    """Airspeed and distance after ``duration`` seconds of brakes-off roll (classical RK4).

    The earlier method, kept for comparison (``method="quadrature"``). Each landing takes
    max(RK4_STEPS, ceil(duration / RK4_MAX_STEP)) equal steps. The force law is taken as the quadratic
    of the regime at ``v0`` (sign of the airspeed, wheels loaded or not); the landings whose speed
    leaves that regime are integrated again with the exact piecewise law.
    """
    a, b, c = _coefficients(v0, f, mu, f.idle)
    sign = np.where(v0 >= 0, 1.0, -1.0)
    loaded = f.g_cos - f.lift * v0 * np.abs(v0) > 0
    with np.errstate(over="ignore", invalid="ignore"):
        v, x = _rk4(v0, duration, headwind, lambda u: a + u * (b + u * c))
        left = (np.where(v >= 0, 1.0, -1.0) != sign) | ((f.g_cos - f.lift * v * np.abs(v) > 0) != loaded)
        if left.any():
            i = np.flatnonzero(left)
            fi = _take_forces(f, i)
            v[i], x[i] = _rk4(v0[i], duration[i], headwind[i], lambda u: _accel(u, fi, mu[i], fi.idle),
                              max_step=RK4_KINK_STEP)
    return v, x


def _rk4(
    v0: Array, duration: Array, headwind: Array, accel, max_step: float = RK4_MAX_STEP
) -> tuple[Array, Array]:
    steps = np.maximum(RK4_STEPS, np.ceil(duration / max_step)).astype(int)
    h = duration / steps
    v = v0.copy()
    x = np.zeros_like(v0)
    for k in range(int(steps.max(initial=0))):
        hk = h if k < RK4_STEPS else np.where(k < steps, h, 0.0)
        k1 = accel(v)
        v2 = v + 0.5 * hk * k1
        k2 = accel(v2)
        v3 = v + 0.5 * hk * k2
        k3 = accel(v3)
        v4 = v + hk * k3
        k4 = accel(v4)
        x += hk / 6.0 * (v + 2.0 * v2 + 2.0 * v3 + v4 - 6.0 * headwind)
        v += hk / 6.0 * (k1 + 2.0 * k2 + 2.0 * k3 + k4)
    return v, x


def _take_forces(f: _Forces, idx: NDArray[np.intp]) -> _Forces:
    return _Forces(
        f.drag[idx], f.lift[idx], f.g_cos[idx], f.g_sin[idx], tuple(x[idx] for x in f.idle),  # type: ignore[arg-type]
        tuple(x[idx] for x in f.braking_thrust), f.switch[idx], f.lift_off_speed[idx],  # type: ignore[arg-type]
    )


def _newton(
    residual, x0: Array, lo: Array, hi: Array, scale: Array, max_iter: int = 60
) -> Array:
    """Safeguarded Newton iteration on an increasing function, per landing, only on unconverged ones.

    ``residual(x, idx)`` returns (r, dr/dx) for the landings ``idx``. Steps are clipped into the bracket
    [lo, hi], which shrinks with every evaluation; a step that is not finite bisects instead.
    """
    x, lo, hi = x0.copy(), lo.copy(), hi.copy()
    active = np.arange(x.size)
    for _ in range(max_iter):
        r, dr = residual(x[active], active)
        done = np.abs(r) <= 1e-10 * np.maximum(scale[active], 1.0)
        hi[active] = np.where(r > 0, x[active], hi[active])
        lo[active] = np.where(r <= 0, x[active], lo[active])
        with np.errstate(divide="ignore", invalid="ignore"):
            step = x[active] - r / dr
        bisect = 0.5 * (lo[active] + hi[active])
        step = np.where(np.isfinite(step), np.clip(step, lo[active], hi[active]), bisect)
        # A step that does not move (pinned at a bracket end it already holds) bisects instead.
        step = np.where(step == x[active], bisect, step)
        x[active] = np.where(done, x[active], step)
        active = active[~done]
        if active.size == 0:
            break
    return x


def _speed_at_braking_distance(
    target: Array, v_top: Array, w: Array, f: _Forces, mu: Array, method: str = "closed"
) -> Array:
    """Airspeed V in [w, v_top] from which the braking distance to the stop equals ``target``.

    Walks up the pieces of the braking roll from the stop; in the piece that holds the point, Newton
    iteration on its partial integral, int_lo^V (u - w)/(-a(u)) du, whose derivative is (V - w)/(-a(V)).
    """
    remaining = target.copy()
    speed = v_top.copy()  # if round-off leaves the point above the last piece: the brake speed
    open_ = np.ones(target.shape, dtype=bool)
    for piece in _pieces(w, v_top, f, mu, f.braking_thrust, f.switch):
        rows: NDArray[np.intp] = np.arange(w.size)[piece.rows]
        p = _Piece(rows, piece.used, piece.lo, piece.hi, piece.a, piece.b, piece.c)
        ww = w[rows]
        d, _, _ = _piece_integrals(p, ww, method)
        d = np.where(p.used, d, 0.0)
        here = open_[rows] & p.used & (d >= remaining[rows])
        passing = open_[rows] & ~here
        remaining[rows[passing]] -= d[passing]
        if here.any():
            k = np.flatnonzero(here)
            lo, hi, a, b, c, wk = p.lo[k], p.hi[k], p.a[k], p.b[k], p.c[k], ww[k]
            rem = remaining[rows[k]]

            def residual(v: Array, j: NDArray[np.intp], lo=lo, a=a, b=b, c=c, wk=wk, rem=rem):
                part = _Piece(slice(None), np.ones(j.size, dtype=bool), lo[j], v, a[j], b[j], c[j])
                dist, _, _ = _piece_integrals(part, wk[j], method)
                return dist - rem[j], (v - wk[j]) / -(a[j] + v * (b[j] + v * c[j]))

            decel = np.maximum(-(a + lo * (b + lo * c)), 1e-9)
            v0 = np.clip(wk + np.sqrt((lo - wk) ** 2 + 2.0 * decel * rem), lo, hi)
            speed[rows[k]] = _newton(residual, v0, lo, hi, rem)
            open_[rows[k]] = False
    return speed


def _speed_at_free_roll_distance(
    target: Array, t_end: Array, v0: Array, w: Array, f: _Forces, mu: Array, method: str = "closed"
) -> Array:
    """Airspeed where the free roll has covered ``target`` metres (Newton on the time)."""

    def residual(t: Array, i: NDArray[np.intp]) -> tuple[Array, Array]:
        v, x = _free_roll(v0[i], t, w[i], _take_forces(f, i), mu[i], method)
        return x - target[i], v - w[i]

    t0 = np.clip(target / (v0 - w), 0.0, t_end)
    t = _newton(residual, t0, np.zeros_like(t0), t_end, target)
    return _free_roll(v0, t, w, f, mu, method)[0]



def _air_distance(c: LandingCase, vs: Array, given: NDArray[np.bool_]) -> tuple[Array, Array, Array]:
    """Approach, flare and air distance: the flare model, or the given touchdown point where ``given``."""
    w = c.headwind
    # The flare model needs h / tan(gamma) to be a number: an angle so shallow that it is not (or that
    # is zero once in radians) is refused with its value rather than carried as inf or NaN.
    with np.errstate(divide="ignore", over="ignore"):
        reach = c.screen_height / np.tan(c.approach_angle)
    shallow = ~given & ~(reach < np.inf)
    if shallow.any():
        angle = float(np.degrees(np.broadcast_to(c.approach_angle, shallow.shape)[shallow][0]))
        raise ValueError(
            f"procedure.approach_angle = {angle:.3g} deg in {int(np.count_nonzero(shallow))} landing(s): the "
            "approach path is too shallow for the air distance to be a number (a few tenths of a degree "
            "or more is usual)"
        )
    approach, flare = air_distance_flare(
        c.screen_height, np.where(given, 0.05, c.approach_angle), c.approach_speed_ratio * vs,
        c.flare_speed_ratio * vs, c.flare_load_factor, w, c.g,
    )
    approach = np.where(given, 0.0, approach)
    flare = np.where(given, 0.0, flare)
    backwards = (approach < 0) | (flare < 0)
    if backwards.any():
        raise ValueError(f"headwind at or above the approach or flare airspeed in "
                         f"{int(np.count_nonzero(backwards))} landing(s): the flare model needs a positive "
                         "ground speed (lower the headwind or give procedure.touchdown_distance)")
    air = np.where(given, c.touchdown_distance, approach + flare)
    if not np.all(np.isfinite(air)):
        raise ValueError("procedure.approach_angle: the air distance overflows in "
                         f"{int(np.count_nonzero(~np.isfinite(air)))} landing(s) (approach path too shallow)")
    return approach, flare, air


def _solve_chunk(c: LandingCase, method: str, n: int) -> dict[str, NDArray]:
    """The n landings of ``c`` (fields of shape (n,) or one value for all); results of shape (n,), or
    one value where it is the same for every landing (the caller broadcasts)."""

    def full(x: Any) -> Array:
        return _full(x, n)

    w = full(c.headwind)
    vs = stall_speed(c.mass, c.density, c.wing_area, c.cl_max, c.g)
    v_td = full(c.touchdown_speed_ratio * vs)
    if np.any(v_td - w <= 0):
        count = int(np.count_nonzero(v_td - w <= 0))
        raise ValueError(f"headwind at or above the touchdown speed in {count} landing(s)")
    given = c.touchdown_given
    if np.all(given):  # the touchdown point is given for every landing: no flare model
        approach = flare = np.zeros(())
        air = full(c.touchdown_distance)
    else:
        approach, flare, air = _air_distance(c, vs, given)

    f = _forces(c, n)
    lifted = f.lift * v_td * v_td > f.g_cos
    no_switch = full(-np.inf)
    rolling_mu, braking_mu, lda = full(c.rolling_mu), full(c.braking_mu), full(c.lda)

    # Free roll: time integration; where the ground speed reaches zero first, the stop in closed form.
    v_b, x_free = _free_roll(v_td, full(c.reaction_time), w, f, rolling_mu, method)
    t_free = np.array(full(c.reaction_time))
    stopped = v_b <= w
    # Thrust above every retarding force and growing faster than drag: the speed runs to infinity.
    runaway = ~(v_b <= RUNAWAY_SPEED) & ~stopped
    cannot = runaway.copy()
    if stopped.any():
        i = np.flatnonzero(stopped)
        fi = _take_forces(f, i)
        d, t, ok = _roll_integrals(w[i], v_td[i], w[i], fi, rolling_mu[i], fi.idle, no_switch[i], method)
        x_free[i], t_free[i], cannot[i], v_b[i] = d, t, ~ok, w[i]
    if runaway.any():
        v_b = np.where(runaway, np.inf, v_b)
        x_free = np.where(runaway, np.inf, x_free)

    # Braking roll from the brake-application airspeed down to zero ground speed.
    brake, t_brake, ok = _roll_integrals(w, np.where(runaway, w, v_b), w, f, braking_mu,
                                         f.braking_thrust, f.switch, method)
    if stopped.any() or runaway.any():
        brake = np.where(stopped, 0.0, np.where(runaway, np.inf, brake))
        t_brake = np.where(stopped, 0.0, np.where(runaway, np.inf, t_brake))
    cannot |= ~ok & ~stopped

    total = air + x_free + brake
    margin = lda - total
    over = total > lda
    # Ground speed at the runway end: filled in afterwards for all overruns of the call together.
    # A landing that never stops passes the end at least at its brake-application ground speed.
    end_speed = np.where(cannot, v_b - w, 0.0) if cannot.any() else np.zeros(())
    beyond = np.maximum(total - lda, 0.0)
    return {
        "_free_roll_time": t_free,
        "approach_m": approach, "flare_m": flare, "air_distance_m": air, "free_roll_m": x_free,
        "braking_m": brake, "total_m": total, "lda_m": c.lda, "margin_m": margin,
        "stall_speed": vs, "touchdown_speed": v_td, "touchdown_ground_speed": v_td - w,
        "brake_speed": v_b, "time_to_stop_s": t_free + t_brake, "overrun": over,
        "runway_end_ground_speed": end_speed, "beyond_end_m": beyond,
        "lift_exceeds_weight": lifted, "cannot_stop": cannot, "stopped_in_free_roll": stopped,
    }


def _overrun_speeds(c: LandingCase, r: dict[str, NDArray], method: str) -> Array:
    """Ground speed at the runway end of overrunning landings ``c`` with their chunk results ``r``."""
    air, x_free, brake = r["air_distance_m"], r["free_roll_m"], r["braking_m"]
    n = air.size
    f = _forces(c, n)
    w, braking_mu, rolling_mu, lda = (_full(x, n) for x in (c.headwind, c.braking_mu, c.rolling_mu, c.lda))
    v_b, v_td = r["brake_speed"], r["touchdown_speed"]
    out = np.zeros(n)
    excess = air + x_free + brake - lda  # distance still to go at the runway end
    in_braking = excess <= brake
    in_free = ~in_braking & (excess <= brake + x_free)
    if in_braking.any():
        i = np.flatnonzero(in_braking)
        v = _speed_at_braking_distance(excess[i], v_b[i], w[i], _take_forces(f, i), braking_mu[i],
                                       method)
        out[i] = v - w[i]
    if in_free.any():
        i = np.flatnonzero(in_free)
        v = _speed_at_free_roll_distance(
            lda[i] - air[i], r["_free_roll_time"][i], v_td[i], w[i], _take_forces(f, i), rolling_mu[i],
            method,
        )
        out[i] = v - w[i]
    # Touchdown beyond the runway end: the aircraft passes it in the air at about its touchdown speed.
    in_air = ~in_braking & ~in_free
    out[in_air] = (v_td - w)[in_air]
    return out


def solve_landings(case: LandingCase, method: str = "closed") -> LandingResult:
    """Evaluate every landing of ``case`` (vectorised; memory grows linearly with N).

    Parameters
    ----------
    case : LandingCase
        Inputs of N landings (see :func:`landrisk.model.case.case_from_values`).
    method : str
        ``"closed"`` (closed-form braking integrals and Riccati free roll, the default) or
        ``"quadrature"`` (the earlier Gauss-Legendre and fixed-step Runge-Kutta solver, for comparison).

    Returns
    -------
    LandingResult
        Every phase distance and speed per landing, with the flags ``lift_exceeds_weight``,
        ``cannot_stop`` (also set where the speed runs away in the free roll: free roll, braking and
        time infinite) and ``stopped_in_free_roll`` for the caller to count.

    Raises
    ------
    ValueError
        If a headwind is at or above the touchdown speed, the air distance is beyond floating-point range,
        or a physics input is outside its range.
    """
    if method not in METHODS:
        raise ValueError(f"unknown method {method!r}; choose one of {', '.join(METHODS)}")
    n = case.size
    if n == 0:
        raise ValueError("no landings to solve")
    out: dict[str, NDArray] = {}
    for start in range(0, n, CHUNK):
        part = _solve_chunk(case.take(slice(start, start + CHUNK)), method, min(CHUNK, n - start))
        if not out:
            out = {k: np.empty(n, dtype=np.asarray(v).dtype) for k, v in part.items()}
        for k, v in part.items():
            out[k][start : start + CHUNK] = v
    overruns = np.flatnonzero(out["overrun"] & ~out["cannot_stop"])
    for start in range(0, overruns.size, CHUNK):
        i = overruns[start : start + CHUNK]
        out["runway_end_ground_speed"][i] = _overrun_speeds(
            case.take(i), {k: v[i] for k, v in out.items()}, method)
    del out["_free_roll_time"]
    return LandingResult(**out)


def solve_one(case: LandingCase) -> LandingResult:
    """Evaluate one landing, refusing one the model cannot represent faithfully.

    Raises
    ------
    SolveError
        If lift exceeds weight at touchdown, the aircraft cannot stop under the given forces, or the
        inputs cannot be evaluated (headwind at the touchdown speed, air distance beyond range).
    """
    try:
        res = solve_landings(case)
    except ValueError as exc:
        raise SolveError(str(exc)) from None
    if res.size != 1:
        raise ValueError("solve_one takes a single landing")
    if res.lift_exceeds_weight[0]:
        ratio = float((res.touchdown_speed[0] / res.stall_speed[0]) ** 2 * case.cl_ground / case.cl_max)
        raise SolveError(
            f"lift exceeds weight at touchdown: L/W = (V_TD/V_S)^2 cl_ground/cl_max = {ratio:.2f} "
            "(allowed: below 1; lower aircraft.cl_ground or procedure.touchdown_speed_ratio)"
        )
    if res.cannot_stop[0]:
        raise SolveError(
            "the aircraft cannot stop: thrust and slope outweigh braking friction and drag somewhere on "
            "the braking roll (check the idle thrust, runway.braking_mu and runway.slope)"
        )
    return res
