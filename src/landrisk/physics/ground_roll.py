"""Forces on the aircraft rolling on the runway, and the equation of motion along it.

The net force along the runway (Anderson, J. D., *Aircraft Performance and Design*, McGraw-Hill 1999,
§6.8, eq. 6.100; Raymer, D. P., *Aircraft Design: A Conceptual Approach*, 6th ed., AIAA 2018, §17.8):

    F(V) = T(V) - D(V) - mu (W cos theta - L(V))^+ - W sin theta

with thrust T = t0 + t1 V + t2 V^2 (negative for reverse thrust), signed drag and lift
(1/2 rho V|V| S C), friction mu on the normal force, which is never negative (^+ = max(., 0)), and the
slope angle theta, positive uphill. V is the true airspeed; the ground speed is V - V_w, V_w being the
headwind component. Between the points where V changes sign, where the normal force reaches zero and
where the thrust setting changes, F is a quadratic A + B V + C V^2 in V, which the solver integrates.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["acceleration", "quadratic_acceleration_coefficients", "thrust"]


def thrust(airspeed: ArrayLike, t0: ArrayLike, t1: ArrayLike, t2: ArrayLike) -> NDArray[np.float64]:
    """Thrust T = t0 + t1 V + t2 V^2 [N] of one thrust setting (a quadratic fit in airspeed).

    Quadratic thrust laws are the usual form for jet thrust against speed at a fixed setting
    (Raymer 2018, §17.8, where T is taken as a function of V in the ground-roll integral).

    Parameters
    ----------
    airspeed : array_like
        True airspeed [m/s].
    t0 : array_like
        Static thrust [N]; negative for reverse thrust.
    t1 : array_like
        Linear coefficient [N s/m].
    t2 : array_like
        Quadratic coefficient [N s^2/m^2].
    """
    v = np.asarray(airspeed, dtype=float)
    return np.asarray(t0) + v * (np.asarray(t1) + v * np.asarray(t2))


def acceleration(
    airspeed: ArrayLike,
    *,
    thrust_per_mass: tuple[ArrayLike, ArrayLike, ArrayLike],
    drag_per_mass: ArrayLike,
    lift_per_mass: ArrayLike,
    mu: ArrayLike,
    g_cos: ArrayLike,
    g_sin: ArrayLike,
) -> NDArray[np.float64]:
    """Acceleration along the runway a = F / m [m/s^2] at a given airspeed.

    Parameters
    ----------
    airspeed : array_like
        True airspeed V [m/s].
    thrust_per_mass : tuple of array_like
        (t0, t1, t2) / m: thrust coefficients divided by the mass [m/s^2, 1/s, 1/m].
    drag_per_mass : array_like
        1/2 rho S C_D / m [1/m], so that D/m = drag_per_mass * V|V|.
    lift_per_mass : array_like
        1/2 rho S C_L / m [1/m].
    mu : array_like
        Friction coefficient on the normal force [-] (rolling or braking).
    g_cos, g_sin : array_like
        g cos theta and g sin theta [m/s^2], theta the runway slope, positive uphill.
    """
    v = np.asarray(airspeed, dtype=float)
    vv = v * np.abs(v)
    t0, t1, t2 = thrust_per_mass
    normal = np.maximum(np.asarray(g_cos) - np.asarray(lift_per_mass) * vv, 0.0)
    return thrust(v, t0, t1, t2) - np.asarray(drag_per_mass) * vv - np.asarray(mu) * normal - g_sin


def quadratic_acceleration_coefficients(
    *,
    airflow_sign: ArrayLike,
    wheels_loaded: ArrayLike,
    thrust_per_mass: tuple[ArrayLike, ArrayLike, ArrayLike],
    drag_per_mass: ArrayLike,
    lift_per_mass: ArrayLike,
    mu: ArrayLike,
    g_cos: ArrayLike,
    g_sin: ArrayLike,
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Coefficients (A, B, C) of a = A + B V + C V^2 on a stretch where the force law is smooth.

    On such a stretch the sign s of V is fixed (V|V| = s V^2) and the normal force is either positive
    (``wheels_loaded``) or zero; then, from :func:`acceleration`,
    A = t0 - mu g cos - g sin, B = t1, C = t2 - s (drag - mu lift), per unit mass.

    Parameters
    ----------
    airflow_sign : array_like
        +1 where the airspeed is positive on the stretch, -1 where negative.
    wheels_loaded : array_like of bool
        True where W cos theta > L on the stretch (friction acts), False where lift carries the weight.
    thrust_per_mass, drag_per_mass, lift_per_mass, mu, g_cos, g_sin
        As for :func:`acceleration`.
    """
    s = np.asarray(airflow_sign, dtype=float)
    mu_eff = np.asarray(mu, dtype=float) * np.asarray(wheels_loaded, dtype=bool)  # mu, or 0 if unloaded
    t0, t1, t2 = (np.asarray(x, dtype=float) for x in thrust_per_mass)
    a = t0 - mu_eff * np.asarray(g_cos) - np.asarray(g_sin)
    c = t2 - s * (np.asarray(drag_per_mass) - mu_eff * np.asarray(lift_per_mass))
    shape = np.broadcast_shapes(a.shape, t1.shape, c.shape)
    return tuple(x if x.shape == shape else np.broadcast_to(x, shape) for x in (a, t1, c))  # type: ignore[return-value]
