"""Air distance: from the screen height over the threshold to touchdown.

Model: a steady approach along a straight path at the angle gamma, then a flare flown as a circular arc
of radius R = V_F^2 / (g (n - 1)) tangent to the approach path and to the runway, n being the load factor
in the flare. Sources: Anderson, J. D., *Aircraft Performance and Design*, McGraw-Hill 1999, §6.8,
eqs. 6.106-6.109; Raymer, D. P., *Aircraft Design: A Conceptual Approach*, 6th ed., AIAA 2018, §17.9.
If the flare height R (1 - cos gamma) exceeds the screen height, the arc starts above the screen and
the air distance is the arc's horizontal extent below the screen height, sqrt(R^2 - (R - h)^2).

Wind: the geometry is fixed to the air mass. The ground distance is the horizontal air distance minus
the headwind component times the time spent on each part (path length divided by airspeed).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from landrisk.physics.atmosphere import STANDARD_GRAVITY

__all__ = ["air_distance_flare", "flare_height", "flare_radius"]


def flare_radius(
    flare_speed: ArrayLike, load_factor: ArrayLike, g: float = STANDARD_GRAVITY
) -> NDArray[np.float64]:
    """Flare radius R = V_F^2 / (g (n - 1)) [m] (Anderson 1999, eq. 6.107).

    Parameters
    ----------
    flare_speed : array_like
        Mean true airspeed in the flare [m/s], > 0.
    load_factor : array_like
        Load factor in the flare n [-], > 1 (about 1.2 is typical, Anderson §6.8).
    g : float
        Acceleration of gravity [m/s^2].
    """
    v = np.asarray(flare_speed, dtype=float)
    n = np.asarray(load_factor, dtype=float)
    if np.any(n <= 1):
        raise ValueError("flare load factor must exceed 1")
    return v * v / (g * (n - 1.0))


def flare_height(radius: ArrayLike, approach_angle: ArrayLike) -> NDArray[np.float64]:
    """Height at which the flare starts, h_f = R (1 - cos gamma) [m] (Anderson 1999, eq. 6.108).

    Parameters
    ----------
    radius : array_like
        Flare radius [m].
    approach_angle : array_like
        Approach flight-path angle gamma [rad], positive descending.
    """
    return np.asarray(radius, dtype=float) * (1.0 - np.cos(np.asarray(approach_angle, dtype=float)))


def air_distance_flare(
    screen_height: ArrayLike,
    approach_angle: ArrayLike,
    approach_speed: ArrayLike,
    flare_speed: ArrayLike,
    load_factor: ArrayLike,
    headwind: ArrayLike = 0.0,
    g: float = STANDARD_GRAVITY,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Ground distances of the approach and of the flare, from the screen height to touchdown.

    Anderson 1999, §6.8, eqs. 6.106-6.109: S_a = (h_screen - h_f) / tan gamma, S_f = R sin gamma;
    when h_f > h_screen only the arc below the screen counts, S_f = sqrt(R^2 - (R - h_screen)^2).

    Parameters
    ----------
    screen_height : array_like
        Height over the threshold where the air distance starts [m], > 0 (15.24 m = 50 ft).
    approach_angle : array_like
        Approach flight-path angle [rad], in (0, pi/6].
    approach_speed : array_like
        True airspeed on the approach [m/s], > 0.
    flare_speed : array_like
        Mean true airspeed in the flare [m/s], > 0.
    load_factor : array_like
        Flare load factor [-], > 1.
    headwind : array_like
        Headwind component [m/s], negative for a tailwind.
    g : float
        Acceleration of gravity [m/s^2].

    Returns
    -------
    (approach, flare) : tuple of numpy.ndarray
        Ground distances [m] of the straight approach (0 if the flare starts above the screen height)
        and of the flare arc.
    """
    h = np.asarray(screen_height, dtype=float)
    gam = np.asarray(approach_angle, dtype=float)
    va = np.asarray(approach_speed, dtype=float)
    vf = np.asarray(flare_speed, dtype=float)
    w = np.asarray(headwind, dtype=float)
    if np.any(h <= 0):
        raise ValueError("screen height must be positive")
    if np.any(gam <= 0) or np.any(gam > np.pi / 6):
        raise ValueError("approach angle must be in (0, 30] deg")
    if np.any(va <= 0) or np.any(vf <= 0):
        raise ValueError("approach and flare speeds must be positive")
    r = flare_radius(vf, load_factor, g)
    hf = flare_height(r, gam)
    high_flare = hf > h
    tan_g, cos_g, sin_g = np.tan(gam), np.cos(gam), np.sin(gam)
    if not np.any(high_flare):  # the usual case: the flare starts below the screen height
        s_app_air = (h - hf) / tan_g
        t_app = s_app_air / (cos_g * va)
        return s_app_air - w * t_app, r * sin_g - w * (r * gam / vf)
    # Straight part: horizontal air distance and path length; flown at the approach speed.
    s_app_air = np.where(high_flare, 0.0, (h - hf) / tan_g)
    t_app = s_app_air / (cos_g * va)
    # Arc: swept angle gamma, or less if the arc starts above the screen height.
    # R^2 - (R - h)^2 written as h (2 R - h): no cancellation when R is much larger than h (n -> 1).
    s_arc_air = np.where(high_flare, np.sqrt(np.maximum(h * (2.0 * r - h), 0.0)), r * sin_g)
    swept = np.where(high_flare, np.arcsin(np.minimum(s_arc_air / r, 1.0)), gam)
    t_arc = r * swept / vf
    return s_app_air - w * t_app, s_arc_air - w * t_arc
