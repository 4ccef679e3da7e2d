"""A slow, independent reference: one landing's ground roll by ``scipy.integrate.solve_ivp``.

It integrates the equations of motion in time, m dV/dt = F(V) and dx/dt = V - V_w, with the force built
directly from the physics force functions (thrust, drag, lift, friction on the normal force, slope), an
event where the reverser is stowed and an event at zero ground speed. It shares no integration code with
:mod:`landrisk.model.solver`, so the tests and the benchmark use it to check the solver.
"""

from __future__ import annotations

import numpy as np
from scipy.integrate import solve_ivp

from landrisk.model.case import LandingCase
from landrisk.physics import (
    aspect_ratio,
    drag_force,
    ground_effect_factor,
    induced_drag_factor,
    lift_force,
    stall_speed,
    thrust,
)

__all__ = ["reference_braking_quad", "reference_free_roll", "reference_ground_roll"]


def reference_ground_roll(
    case: LandingCase, index: int = 0, rtol: float = 1e-12, position: float | None = None
) -> dict[str, float]:
    """Free roll, braking roll and time to stop of landing ``index`` of ``case``, by solve_ivp (DOP853).

    Parameters
    ----------
    position : float, optional
        A distance past touchdown [m]; the ground speed there is returned as ``ground_speed_at``
        (0 if the aircraft stops before it).

    Returns
    -------
    dict
        ``free_roll_m``, ``braking_m``, ``time_to_stop_s``, ``touchdown_speed`` [m/s] and, with
        ``position``, ``ground_speed_at`` [m/s].
    """
    passed: list[float] = []
    c = case.broadcast().take(slice(index, index + 1))
    p = {f: float(np.asarray(getattr(c, f))[0]) for f in c.__dataclass_fields__ if f != "g"}
    g = c.g
    m, rho, s = p["mass"], p["density"], p["wing_area"]
    k = float(induced_drag_factor(aspect_ratio(p["wing_span"], s), p["oswald"]))
    phi = float(ground_effect_factor(p["wing_height"], p["wing_span"]))
    w, theta = p["headwind"], p["slope_angle"]
    v_td = p["touchdown_speed_ratio"] * float(stall_speed(m, rho, s, p["cl_max"], g))
    idle = (p["idle_t0"], p["idle_t1"], p["idle_t2"])
    rev = (p["reverse_t0"], p["reverse_t1"], p["reverse_t2"])

    def rhs(mu: float, coeffs: tuple[float, float, float]):
        def f(_t: float, y: np.ndarray) -> list[float]:
            v = y[1]
            lift = float(lift_force(v, rho, s, p["cl_ground"]))
            drag = float(drag_force(v, rho, s, p["cd0"], k, phi, p["cl_ground"]))
            normal = max(m * g * np.cos(theta) - lift, 0.0)
            force = float(thrust(v, *coeffs)) - drag - mu * normal - m * g * np.sin(theta)
            return [v - w, force / m]

        return f

    def stop(_t: float, y: np.ndarray) -> float:
        return y[1] - w

    stop.terminal = True  # type: ignore[attr-defined]
    opts = {"method": "DOP853", "rtol": rtol, "atol": 1e-12}
    x0 = 0.0  # distance covered before the current integration

    def at_position(_t: float, y: np.ndarray) -> float:
        return x0 + y[0] - (np.inf if position is None else position)

    def record(sol) -> None:
        if position is not None and sol.t_events[-1].size:
            passed.append(float(sol.y_events[-1][0][1] - w))

    def done(out: dict[str, float]) -> dict[str, float]:
        if position is not None:
            out["ground_speed_at"] = passed[0] if passed else 0.0
        return out

    t_f = p["reaction_time"]
    y0 = [0.0, v_td]
    sol = solve_ivp(rhs(p["rolling_mu"], idle), (0.0, t_f), y0, events=[stop, at_position], **opts)
    record(sol)
    x_free, v_b, t = sol.y[0, -1], sol.y[1, -1], sol.t[-1]
    if sol.status == 1 and sol.t_events[0].size:  # stopped before the brakes came on
        return done({"free_roll_m": x_free, "braking_m": 0.0, "time_to_stop_s": t, "touchdown_speed": v_td})
    x0 = x_free
    y = [0.0, v_b]
    horizon = 1e5
    if p["use_reverse"] and v_b > p["reverse_cutoff_speed"]:

        def stow(_t: float, y: np.ndarray) -> float:
            return y[1] - p["reverse_cutoff_speed"]

        stow.terminal = True  # type: ignore[attr-defined]
        sol = solve_ivp(rhs(p["braking_mu"], rev), (t, t + horizon), y, events=[stop, stow, at_position],
                        **opts)
        record(sol)
        y, t = list(sol.y[:, -1]), sol.t[-1]
        if sol.t_events[0].size:  # stopped with the reverser still out
            return done({"free_roll_m": x_free, "braking_m": y[0], "time_to_stop_s": t,
                         "touchdown_speed": v_td})
    sol = solve_ivp(rhs(p["braking_mu"], idle), (t, t + horizon), y, events=[stop, at_position], **opts)
    record(sol)
    if not sol.t_events[0].size:
        raise RuntimeError("reference integration did not reach a stop")
    return done({"free_roll_m": x_free, "braking_m": sol.y[0, -1], "time_to_stop_s": sol.t[-1],
                 "touchdown_speed": v_td})


def _landing_params(case: LandingCase, index: int) -> dict[str, float]:
    c = case.broadcast().take(slice(index, index + 1))
    p = {f: float(np.asarray(getattr(c, f))[0]) for f in c.__dataclass_fields__ if f != "g"}
    p["g"] = c.g
    p["k"] = float(induced_drag_factor(aspect_ratio(p["wing_span"], p["wing_area"]), p["oswald"]))
    p["phi"] = float(ground_effect_factor(p["wing_height"], p["wing_span"]))
    p["v_td"] = p["touchdown_speed_ratio"] * float(
        stall_speed(p["mass"], p["density"], p["wing_area"], p["cl_max"], p["g"])
    )
    return p


def _force_per_mass(p: dict[str, float], v: float, mu: float, coeffs: tuple[float, float, float]) -> float:
    m, rho, s, g, theta = p["mass"], p["density"], p["wing_area"], p["g"], p["slope_angle"]
    lift = float(lift_force(v, rho, s, p["cl_ground"]))
    drag = float(drag_force(v, rho, s, p["cd0"], p["k"], p["phi"], p["cl_ground"]))
    normal = max(m * g * np.cos(theta) - lift, 0.0)
    return (float(thrust(v, *coeffs)) - drag - mu * normal - m * g * np.sin(theta)) / m


def reference_braking_quad(
    case: LandingCase, v_brake: float, index: int = 0, epsrel: float = 1e-13
) -> dict[str, float]:
    """Braking distance and time from airspeed ``v_brake`` to the stop by ``scipy.integrate.quad``.

    S = int_w^v_b (V - w)/(-a(V)) dV and t = int_w^v_b dV/(-a(V)), with the acceleration a built from the
    physics force functions point by point (reverse thrust above the cut-off where used, idle below), and
    the points where the force law has a kink (zero airspeed, the cut-off, the lift-off speed) given to
    QUADPACK as break points. Shares no integration code with the solver.

    Returns
    -------
    dict
        ``braking_m`` and ``braking_s``.
    """
    from scipy.integrate import quad

    p = _landing_params(case, index)
    w = p["headwind"]
    idle = (p["idle_t0"], p["idle_t1"], p["idle_t2"])
    rev = (p["reverse_t0"], p["reverse_t1"], p["reverse_t2"])
    cut = p["reverse_cutoff_speed"]

    def accel(v: float) -> float:
        coeffs = rev if p["use_reverse"] and v > cut else idle
        return _force_per_mass(p, v, p["braking_mu"], coeffs)

    q_lift = 0.5 * p["density"] * p["wing_area"] * p["cl_ground"]
    lift_off = np.sqrt(p["mass"] * p["g"] * np.cos(p["slope_angle"]) / q_lift) if q_lift > 0 else np.inf
    points = sorted({x for x in (0.0, cut, lift_off) if w < x < v_brake})
    opts = {"epsabs": 0.0, "epsrel": epsrel, "limit": 500, "points": points or None}
    dist = quad(lambda v: (v - w) / -accel(v), w, v_brake, **opts)[0]
    time = quad(lambda v: 1.0 / -accel(v), w, v_brake, **opts)[0]
    return {"braking_m": dist, "braking_s": time}


def reference_free_roll(
    case: LandingCase, index: int = 0, rtol: float = 1e-12, method: str = "DOP853"
) -> dict[str, float]:
    """The free roll alone by ``scipy.integrate.solve_ivp``: airspeed and distance after the reaction
    time, brakes off, idle thrust, rolling friction; stops at zero ground speed.

    Returns
    -------
    dict
        ``free_roll_m``, ``brake_speed`` (airspeed at the end) and ``stopped`` (1.0 or 0.0).
    """
    p = _landing_params(case, index)
    w = p["headwind"]
    idle = (p["idle_t0"], p["idle_t1"], p["idle_t2"])

    def f(_t: float, y: np.ndarray) -> list[float]:
        return [y[1] - w, _force_per_mass(p, y[1], p["rolling_mu"], idle)]

    def stop(_t: float, y: np.ndarray) -> float:
        return y[1] - w

    stop.terminal = True  # type: ignore[attr-defined]
    sol = solve_ivp(f, (0.0, p["reaction_time"]), [0.0, p["v_td"]], events=[stop], method=method,
                    rtol=rtol, atol=1e-12)
    stopped = bool(sol.t_events[0].size)
    return {"free_roll_m": float(sol.y[0, -1]), "brake_speed": float(sol.y[1, -1]),
            "stopped": float(stopped)}
