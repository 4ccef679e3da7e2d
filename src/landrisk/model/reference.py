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

__all__ = ["reference_ground_roll"]


def reference_ground_roll(case: LandingCase, index: int = 0, rtol: float = 1e-12) -> dict[str, float]:
    """Free roll, braking roll and time to stop of landing ``index`` of ``case``, by solve_ivp (DOP853).

    Returns
    -------
    dict
        ``free_roll_m``, ``braking_m``, ``time_to_stop_s`` and ``touchdown_speed`` [m/s].
    """
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
    t_f = p["reaction_time"]
    y0 = [0.0, v_td]
    sol = solve_ivp(rhs(p["rolling_mu"], idle), (0.0, t_f), y0, events=stop, **opts)
    x_free, v_b, t = sol.y[0, -1], sol.y[1, -1], sol.t[-1]
    if sol.status == 1:  # stopped before the brakes came on
        return {"free_roll_m": x_free, "braking_m": 0.0, "time_to_stop_s": t, "touchdown_speed": v_td}
    y = [0.0, v_b]
    horizon = 1e5
    if p["use_reverse"] and v_b > p["reverse_cutoff_speed"]:

        def stow(_t: float, y: np.ndarray) -> float:
            return y[1] - p["reverse_cutoff_speed"]

        stow.terminal = True  # type: ignore[attr-defined]
        sol = solve_ivp(rhs(p["braking_mu"], rev), (t, t + horizon), y, events=[stop, stow], **opts)
        y, t = list(sol.y[:, -1]), sol.t[-1]
        if sol.t_events[0].size:  # stopped with the reverser still out
            return {"free_roll_m": x_free, "braking_m": y[0], "time_to_stop_s": t, "touchdown_speed": v_td}
    sol = solve_ivp(rhs(p["braking_mu"], idle), (t, t + horizon), y, events=stop, **opts)
    if sol.status != 1:
        raise RuntimeError("reference integration did not reach a stop")
    return {"free_roll_m": x_free, "braking_m": sol.y[0, -1], "time_to_stop_s": sol.t[-1],
            "touchdown_speed": v_td}
