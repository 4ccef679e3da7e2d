"""The landing-distance solver: N landings in one call, each phase a separate distance.

Phases (see DESIGN.md and the physics modules for the sources):

1. **Air distance** from the screen height to touchdown, by the flare model
   (:func:`landrisk.physics.air_distance_flare`) or the given touchdown point.
2. **Free roll** for the reaction time after touchdown, brakes off: idle thrust, drag, rolling friction
   and slope. Integrated in time by the classical fourth-order Runge-Kutta method with a fixed number of
   steps (the motion changes on a time scale of tens of seconds, the step is a fraction of a second).
3. **Braking roll** from the end of the free roll to zero ground speed. With a the acceleration,
   distance and time are integrals in airspeed, S = int (V - V_w) / (-a(V)) dV and t = int dV / (-a(V)),
   split where the force law stops being smooth: at the reverser cut-off, at zero airspeed (tailwind)
   and where lift takes the whole weight. On each piece a is a quadratic in V and the integrals are taken
   by Gauss-Legendre quadrature, which converges geometrically for this rational integrand.

Where the deceleration is not negative over the whole braking range the aircraft cannot stop: its braking
distance is infinite and the landing is flagged ``cannot_stop``. Where lift exceeds weight at touchdown
the normal force is held at zero until it returns (no friction meanwhile) and the landing is flagged
``lift_exceeds_weight``; :func:`solve_one` refuses both.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from itertools import pairwise

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

__all__ = ["GAUSS_LEGENDRE_ORDER", "RK4_STEPS", "LandingResult", "solve_landings", "solve_one"]

#: Gauss-Legendre nodes per smooth piece of the braking roll.
GAUSS_LEGENDRE_ORDER = 8
#: Least number of Runge-Kutta steps over the free roll, and the longest step [s]. The count is set per
#: landing from its own reaction time, so a landing's result never depends on the others in the call.
RK4_STEPS = 3
RK4_MAX_STEP = 1.5
#: Step [s] for the rare free roll that crosses zero airspeed or the lift-off speed (a kink in the force).
RK4_KINK_STEP = 0.002
#: Landings evaluated together (keeps the temporaries in cache; results do not depend on it).
CHUNK = 1 << 14

_GL_X, _GL_W = np.polynomial.legendre.leggauss(GAUSS_LEGENDRE_ORDER)

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


def _forces(c: LandingCase) -> _Forces:
    q = 0.5 * c.density * c.wing_area / c.mass
    k = induced_drag_factor(aspect_ratio(c.wing_span, c.wing_area), c.oswald)
    phi = ground_effect_factor(c.wing_height, c.wing_span)
    cd = c.cd0 + phi * k * c.cl_ground**2
    lift = q * c.cl_ground
    g_cos = c.g * np.cos(c.slope_angle)
    idle = (c.idle_t0 / c.mass, c.idle_t1 / c.mass, c.idle_t2 / c.mass)
    rev = (c.reverse_t0 / c.mass, c.reverse_t1 / c.mass, c.reverse_t2 / c.mass)
    use = c.use_reverse
    with np.errstate(divide="ignore", over="ignore"):
        lift_off = np.where(lift > 0, np.sqrt(g_cos / np.where(lift > 0, lift, 1.0)), np.inf)
    return _Forces(
        drag=q * cd,
        lift=lift,
        g_cos=g_cos,
        g_sin=c.g * np.sin(c.slope_angle),
        idle=idle,
        braking_thrust=tuple(np.where(use, r, i) for r, i in zip(rev, idle, strict=True)),  # type: ignore[arg-type]
        switch=np.where(use, c.reverse_cutoff_speed, -np.inf),
        lift_off_speed=lift_off,
    )


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
    a_min: Array
    a_max: Array


def _pieces(
    v_lo: Array, v_hi: Array, f: _Forces, mu: Array, thrust_hi: Thrust, switch: Array
) -> list[_Piece]:
    """Split [v_lo, v_hi] where the force law is not smooth, lowest piece first.

    ``thrust_hi`` acts above ``switch``, idle thrust below. Break points: zero airspeed, the switch speed
    and the lift-off speed. Each piece holds only the landings for which it has length.
    """
    # Break points in increasing order: zero airspeed <= the switch speed (>= 0; without a switch, zero
    # again) and the lift-off speed (> 0), which may fall either side of the switch; then clipped.
    switch_break = np.where(np.isfinite(switch), switch, 0.0)
    edges = [
        v_lo,
        np.clip(0.0, v_lo, v_hi),
        np.clip(np.minimum(switch_break, f.lift_off_speed), v_lo, v_hi),
        np.clip(np.maximum(switch_break, f.lift_off_speed), v_lo, v_hi),
        v_hi,
    ]
    pieces = []
    for lo, hi in pairwise(edges):
        used = hi > lo
        count = int(np.count_nonzero(used))
        if count == 0:
            continue
        rows: NDArray[np.intp] | slice = slice(None)
        if count < lo.size // 2:  # few landings: work on those only; otherwise on all, masked
            rows = np.flatnonzero(used)
            used = np.ones(count, dtype=bool)
            lo, hi = lo[rows], hi[rows]
            fr, mur, sw = _take_forces(f, rows), mu[rows], switch[rows]
            th = tuple(x[rows] for x in thrust_hi)
        else:
            fr, mur, sw, th = f, mu, switch, thrust_hi
        mid = 0.5 * (hi + lo)
        thrust = tuple(np.where(mid > sw, h, i) for h, i in zip(th, fr.idle, strict=True))
        a, b, c = quadratic_acceleration_coefficients(
            airflow_sign=np.where(mid >= 0, 1.0, -1.0),
            wheels_loaded=fr.g_cos - fr.lift * mid * np.abs(mid) > 0,
            thrust_per_mass=thrust,  # type: ignore[arg-type]
            drag_per_mass=fr.drag, lift_per_mass=fr.lift, mu=mur, g_cos=fr.g_cos, g_sin=fr.g_sin,
        )
        a_min, a_max = _extremes(lo, hi, a, b, c)
        pieces.append(_Piece(rows, used, lo, hi, a, b, c, a_min, a_max))
    return pieces


def _roll_integrals(
    v_lo: Array, v_hi: Array, headwind: Array, f: _Forces, mu: Array, thrust_hi: Thrust, switch: Array
) -> tuple[Array, Array, NDArray[np.bool_]]:
    """Distance and time to slow from airspeed ``v_hi`` to ``v_lo``, and whether a < 0 throughout.

    The range is split by :func:`_pieces`; each piece is integrated by :func:`_quadrature`.
    """
    dist = np.zeros_like(v_lo)
    time = np.zeros_like(v_lo)
    ok = np.ones(v_lo.shape, dtype=bool)
    for p in _pieces(v_lo, v_hi, f, mu, thrust_hi, switch):
        ok[p.rows] &= (p.a_max < 0) | ~p.used
        with np.errstate(divide="ignore", invalid="ignore"):
            d, t = _quadrature(p.lo, p.hi, p.a, p.b, p.c, headwind[p.rows], p.a_min, p.a_max)
        dist[p.rows] += np.where(p.used, d, 0.0)
        time[p.rows] += np.where(p.used, t, 0.0)
    dist = np.where(ok, dist, np.inf)
    time = np.where(ok, time, np.inf)
    return dist, time, ok


def _extremes(lo: Array, hi: Array, a: Array, b: Array, c: Array) -> tuple[Array, Array]:
    """Least and largest value of a + b V + c V^2 on [lo, hi] (the ends, and the vertex if inside)."""
    a_lo = a + lo * (b + lo * c)
    a_hi = a + hi * (b + hi * c)
    low, high = np.minimum(a_lo, a_hi), np.maximum(a_lo, a_hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        vertex = -b / (2.0 * c)
        a_v = a - b * b / (4.0 * c)
    inside = (c != 0) & (vertex > lo) & (vertex < hi)
    return np.where(inside & (c > 0), np.minimum(low, a_v), low), np.where(
        inside & (c < 0), np.maximum(high, a_v), high
    )


#: A piece is bisected while |a| varies across it by more than this factor: the zero of a just beyond
#: it would otherwise slow the convergence of the quadrature (Gauss-Legendre error ~ rho^(-2n), rho the
#: Bernstein-ellipse parameter of the nearest pole).
REFINE_RATIO = 4.0
_MAX_REFINE = 40


def _quadrature(
    lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array, a_min: Array, a_max: Array
) -> tuple[Array, Array]:
    """int (V - w)/(-a) dV and int dV/(-a) over [lo, hi] with a = a + b V + c V^2 < 0 on it.

    Gauss-Legendre on each piece; pieces where |a| changes by more than REFINE_RATIO are bisected
    (only those landings). The nodes are summed one by one, and a landing's pieces in a fixed order, so
    that its result does not depend on the other landings evaluated with it.
    """
    n = lo.size
    dist = np.zeros(n)
    time = np.zeros(n)
    idx = np.arange(n)
    for depth in range(_MAX_REFINE):
        fine = (a_min >= REFINE_RATIO * a_max) | (a_max >= 0) | (depth == _MAX_REFINE - 1)
        if fine.all():
            if depth == 0:
                return _gauss_legendre(lo, hi, a, b, c, w)
            d, t = _gauss_legendre(lo, hi, a[idx], b[idx], c[idx], w[idx])
            dist += np.bincount(idx, d, minlength=n)
            time += np.bincount(idx, t, minlength=n)
            break
        if fine.any():
            j = idx[fine]
            d, t = _gauss_legendre(lo[fine], hi[fine], a[j], b[j], c[j], w[j])
            dist += np.bincount(j, d, minlength=n)
            time += np.bincount(j, t, minlength=n)
        keep = ~fine
        idx2 = idx[keep]
        mid = 0.5 * (lo[keep] + hi[keep])
        idx = np.concatenate([idx2, idx2])
        lo = np.concatenate([lo[keep], mid])
        hi = np.concatenate([mid, hi[keep]])
        a_min, a_max = _extremes(lo, hi, a[idx], b[idx], c[idx])
    return dist, time


def _gauss_legendre(lo: Array, hi: Array, a: Array, b: Array, c: Array, w: Array) -> tuple[Array, Array]:
    half = 0.5 * (hi - lo)
    mid = 0.5 * (hi + lo)
    d_sum = np.zeros_like(half)
    t_sum = np.zeros_like(half)
    for x_j, w_j in zip(_GL_X, _GL_W, strict=True):
        v = mid + half * x_j
        inv = w_j / (a + v * (b + v * c))  # weight / a at the node (negative)
        t_sum -= inv
        d_sum -= (v - w) * inv
    return half * d_sum, half * t_sum


def _free_roll_rk4(
    v0: Array, duration: Array, headwind: Array, f: _Forces, mu: Array
) -> tuple[Array, Array]:
    """Airspeed and distance after ``duration`` seconds of brakes-off roll (classical RK4).

    Each landing takes max(RK4_STEPS, ceil(duration / RK4_MAX_STEP)) equal steps. The force law is
    taken as the quadratic of the regime at ``v0`` (sign of the airspeed, wheels loaded or not); the
    landings whose speed leaves that regime are integrated again with the exact piecewise law.
    """
    sign = np.where(v0 >= 0, 1.0, -1.0)
    loaded = f.g_cos - f.lift * v0 * np.abs(v0) > 0
    a, b, c = quadratic_acceleration_coefficients(
        airflow_sign=sign, wheels_loaded=loaded, thrust_per_mass=f.idle, drag_per_mass=f.drag,
        lift_per_mass=f.lift, mu=mu, g_cos=f.g_cos, g_sin=f.g_sin,
    )
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
    out = {}
    for fld in fields(f):
        val = getattr(f, fld.name)
        out[fld.name] = tuple(x[idx] for x in val) if isinstance(val, tuple) else val[idx]
    return _Forces(**out)


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


def _speed_at_braking_distance(target: Array, v_top: Array, w: Array, f: _Forces, mu: Array) -> Array:
    """Airspeed V in [w, v_top] from which the braking distance to the stop equals ``target``.

    Walks up the pieces of the braking roll from the stop; in the piece that holds the point, Newton
    iteration on its partial integral, int_lo^V (u - w)/(-a(u)) du, whose derivative is (V - w)/(-a(V)).
    """
    remaining = target.copy()
    speed = v_top.copy()  # if round-off leaves the point above the last piece: the brake speed
    open_ = np.ones(target.shape, dtype=bool)
    for p in _pieces(w, v_top, f, mu, f.braking_thrust, f.switch):
        p = _Piece(np.arange(w.size)[p.rows], p.used, p.lo, p.hi, p.a, p.b, p.c, p.a_min, p.a_max)
        ww = w[p.rows]
        with np.errstate(divide="ignore", invalid="ignore"):
            d, _ = _quadrature(p.lo, p.hi, p.a, p.b, p.c, ww, p.a_min, p.a_max)
        d = np.where(p.used, d, 0.0)
        here = open_[p.rows] & p.used & (d >= remaining[p.rows])
        passing = open_[p.rows] & ~here
        remaining[p.rows[passing]] -= d[passing]
        if here.any():
            k = np.flatnonzero(here)
            lo, hi, a, b, c, wk = p.lo[k], p.hi[k], p.a[k], p.b[k], p.c[k], ww[k]
            rem = remaining[p.rows[k]]

            def residual(v: Array, j: NDArray[np.intp], lo=lo, a=a, b=b, c=c, wk=wk, rem=rem):
                a_min, a_max = _extremes(lo[j], v, a[j], b[j], c[j])
                with np.errstate(divide="ignore", invalid="ignore"):
                    part, _ = _quadrature(lo[j], v, a[j], b[j], c[j], wk[j], a_min, a_max)
                return part - rem[j], (v - wk[j]) / -(a[j] + v * (b[j] + v * c[j]))

            decel = np.maximum(-(a + lo * (b + lo * c)), 1e-9)
            v0 = np.clip(wk + np.sqrt((lo - wk) ** 2 + 2.0 * decel * rem), lo, hi)
            speed[p.rows[k]] = _newton(residual, v0, lo, hi, rem)
            open_[p.rows[k]] = False
    return speed


def _speed_at_free_roll_distance(
    target: Array, t_end: Array, v0: Array, w: Array, f: _Forces, mu: Array
) -> Array:
    """Airspeed where the free roll has covered ``target`` metres (Newton on the time, RK4 inside)."""

    def residual(t: Array, i: NDArray[np.intp]) -> tuple[Array, Array]:
        v, x = _free_roll_rk4(v0[i], t, w[i], _take_forces(f, i), mu[i])
        return x - target[i], v - w[i]

    t0 = np.clip(target / (v0 - w), 0.0, t_end)
    t = _newton(residual, t0, np.zeros_like(t0), t_end, target)
    return _free_roll_rk4(v0, t, w, f, mu)[0]


def _solve_chunk(c: LandingCase) -> dict[str, NDArray]:
    w = c.headwind
    vs = stall_speed(c.mass, c.density, c.wing_area, c.cl_max, c.g)
    v_td = c.touchdown_speed_ratio * vs
    if np.any(v_td - w <= 0):
        n = int(np.count_nonzero(v_td - w <= 0))
        raise ValueError(f"headwind at or above the touchdown speed in {n} landing(s)")
    approach, flare = air_distance_flare(
        c.screen_height, c.approach_angle, c.approach_speed_ratio * vs, c.flare_speed_ratio * vs,
        c.flare_load_factor, w, c.g,
    )
    given = c.touchdown_given
    approach = np.where(given, 0.0, approach)
    flare = np.where(given, 0.0, flare)
    air = np.where(given, c.touchdown_distance, approach + flare)

    f = _forces(c)
    lifted = f.lift * v_td * v_td > f.g_cos
    no_switch = np.full_like(w, -np.inf)

    # Free roll: time integration; where the ground speed reaches zero first, the stop by quadrature.
    v_b, x_free = _free_roll_rk4(v_td, c.reaction_time, w, f, c.rolling_mu)
    t_free = c.reaction_time.copy()
    stopped = v_b <= w
    cannot = np.zeros_like(stopped)
    if stopped.any():
        i = np.flatnonzero(stopped)
        fi = _take_forces(f, i)
        d, t, ok = _roll_integrals(w[i], v_td[i], w[i], fi, c.rolling_mu[i], fi.idle, no_switch[i])
        x_free[i], t_free[i], cannot[i], v_b[i] = d, t, ~ok, w[i]

    # Braking roll from the brake-application airspeed down to zero ground speed.
    brake, t_brake, ok = _roll_integrals(w, v_b, w, f, c.braking_mu, f.braking_thrust, f.switch)
    brake = np.where(stopped, 0.0, brake)
    t_brake = np.where(stopped, 0.0, t_brake)
    cannot |= ~ok & ~stopped

    total = air + x_free + brake
    margin = c.lda - total
    over = total > c.lda
    # Ground speed at the runway end: filled in afterwards for all overruns of the call together.
    # A landing that never stops passes the end at least at its brake-application ground speed.
    end_speed = np.where(cannot, v_b - w, 0.0)
    beyond = np.where(over, total - c.lda, 0.0)
    return {
        "_free_roll_time": t_free,
        "approach_m": approach, "flare_m": flare, "air_distance_m": air, "free_roll_m": x_free,
        "braking_m": brake, "total_m": total, "lda_m": c.lda.copy(), "margin_m": margin,
        "stall_speed": vs, "touchdown_speed": v_td, "touchdown_ground_speed": v_td - w,
        "brake_speed": v_b, "time_to_stop_s": t_free + t_brake, "overrun": over,
        "runway_end_ground_speed": end_speed, "beyond_end_m": beyond,
        "lift_exceeds_weight": lifted, "cannot_stop": cannot, "stopped_in_free_roll": stopped,
    }


def _overrun_speeds(c: LandingCase, r: dict[str, NDArray]) -> Array:
    """Ground speed at the runway end of overrunning landings ``c`` with their chunk results ``r``."""
    f = _forces(c)
    w = c.headwind
    air, x_free, brake = r["air_distance_m"], r["free_roll_m"], r["braking_m"]
    v_b, v_td = r["brake_speed"], r["touchdown_speed"]
    out = np.zeros_like(w)
    excess = air + x_free + brake - c.lda  # distance still to go at the runway end
    in_braking = excess <= brake
    in_free = ~in_braking & (excess <= brake + x_free)
    if in_braking.any():
        i = np.flatnonzero(in_braking)
        v = _speed_at_braking_distance(excess[i], v_b[i], w[i], _take_forces(f, i), c.braking_mu[i])
        out[i] = v - w[i]
    if in_free.any():
        i = np.flatnonzero(in_free)
        v = _speed_at_free_roll_distance(
            c.lda[i] - air[i], r["_free_roll_time"][i], v_td[i], w[i], _take_forces(f, i), c.rolling_mu[i]
        )
        out[i] = v - w[i]
    # Touchdown beyond the runway end: the aircraft passes it in the air at about its touchdown speed.
    in_air = ~in_braking & ~in_free
    out[in_air] = (v_td - w)[in_air]
    return out


def solve_landings(case: LandingCase) -> LandingResult:
    """Evaluate every landing of ``case`` (vectorised; memory grows linearly with N).

    Parameters
    ----------
    case : LandingCase
        Inputs of N landings (see :func:`landrisk.model.case.case_from_values`).

    Returns
    -------
    LandingResult
        Every phase distance and speed per landing, with the flags ``lift_exceeds_weight``,
        ``cannot_stop`` and ``stopped_in_free_roll`` for the caller to count.

    Raises
    ------
    ValueError
        If a headwind is at or above the touchdown speed, or a physics input is outside its range.
    """
    full = case.broadcast()
    n = full.size
    if n == 0:
        raise ValueError("no landings to solve")
    out: dict[str, NDArray] = {}
    for start in range(0, n, CHUNK):
        part = _solve_chunk(full.take(slice(start, start + CHUNK)))
        if not out:
            out = {k: np.empty(n, dtype=v.dtype) for k, v in part.items()}
        for k, v in part.items():
            out[k][start : start + CHUNK] = v
    overruns = np.flatnonzero(out["overrun"] & ~out["cannot_stop"])
    for start in range(0, overruns.size, CHUNK):
        i = overruns[start : start + CHUNK]
        out["runway_end_ground_speed"][i] = _overrun_speeds(full.take(i), {k: v[i] for k, v in out.items()})
    del out["_free_roll_time"]
    return LandingResult(**out)


def solve_one(case: LandingCase) -> LandingResult:
    """Evaluate one landing, refusing one the model cannot represent faithfully.

    Raises
    ------
    SolveError
        If lift exceeds weight at touchdown, or the aircraft cannot stop under the given forces.
    """
    res = solve_landings(case)
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
