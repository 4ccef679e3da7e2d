"""Aerodynamic forces near the ground: stall speed, ground effect, lift and drag.

Sources: Anderson, J. D., *Aircraft Performance and Design*, McGraw-Hill 1999, §5.3 (stall speed,
eq. 5.67), §6.7 (ground effect, eq. 6.77, after McCormick) and §2.9 (drag polar); McCormick, B. W.,
*Aerodynamics, Aeronautics, and Flight Mechanics*, Wiley (ground-effect factor).

Aerodynamic forces are written with V|V| rather than V^2, so that they change sign when the airspeed does:
at the end of a roll with a tailwind the air comes from behind and drag pushes the aircraft forward.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from landrisk.physics.atmosphere import STANDARD_GRAVITY

__all__ = [
    "aspect_ratio",
    "drag_force",
    "ground_effect_factor",
    "induced_drag_factor",
    "lift_force",
    "stall_speed",
]


def stall_speed(
    mass: ArrayLike,
    density: ArrayLike,
    wing_area: ArrayLike,
    cl_max: ArrayLike,
    g: float = STANDARD_GRAVITY,
) -> NDArray[np.float64]:
    """Stall speed V_S = sqrt(2 W / (rho S C_Lmax)) (Anderson 1999, eq. 5.67).

    Parameters
    ----------
    mass : array_like
        Aircraft mass [kg], > 0.
    density : array_like
        Air density [kg/m^3], > 0.
    wing_area : array_like
        Reference wing area S [m^2], > 0.
    cl_max : array_like
        Maximum lift coefficient in the landing configuration [-], > 0.
    g : float
        Acceleration of gravity [m/s^2].

    Returns
    -------
    numpy.ndarray
        True-airspeed stall speed [m/s].
    """
    m, rho, s, cl = (np.asarray(x, dtype=float) for x in (mass, density, wing_area, cl_max))
    if np.any(m <= 0) or np.any(rho <= 0) or np.any(s <= 0) or np.any(cl <= 0):
        raise ValueError("mass, density, wing area and cl_max must be positive")
    return np.sqrt(2.0 * m * g / (rho * s * cl))


def ground_effect_factor(wing_height: ArrayLike, wing_span: ArrayLike) -> NDArray[np.float64]:
    """Ground-effect factor phi = (16 h/b)^2 / (1 + (16 h/b)^2) on the induced drag (McCormick).

    Quoted by Anderson 1999, eq. 6.77; for h = 5.6 ft, b = 75 ft it gives 0.588 (Anderson p. 366).

    Parameters
    ----------
    wing_height : array_like
        Height of the wing above the ground [m], >= 0.
    wing_span : array_like
        Wing span b [m], > 0.

    Returns
    -------
    numpy.ndarray
        phi [-], in [0, 1): the share of the free-air induced drag that remains on the ground.
    """
    h = np.asarray(wing_height, dtype=float)
    b = np.asarray(wing_span, dtype=float)
    if np.any(h < 0) or np.any(b <= 0):
        raise ValueError("wing height must be >= 0 and span > 0")
    r = (16.0 * h / b) ** 2
    return r / (1.0 + r)


def aspect_ratio(wing_span: ArrayLike, wing_area: ArrayLike) -> NDArray[np.float64]:
    """Aspect ratio AR = b^2 / S [-] (Anderson 1999, §2.9).

    Parameters
    ----------
    wing_span : array_like
        Wing span [m].
    wing_area : array_like
        Wing area [m^2].
    """
    b = np.asarray(wing_span, dtype=float)
    return b * b / np.asarray(wing_area, dtype=float)


def induced_drag_factor(aspect_ratio: ArrayLike, oswald: ArrayLike) -> NDArray[np.float64]:
    """Induced-drag factor K = 1 / (pi e AR) of the polar C_D = C_D0 + K C_L^2 (Anderson 1999, eq. 2.47).

    Parameters
    ----------
    aspect_ratio : array_like
        Wing aspect ratio [-], > 0.
    oswald : array_like
        Oswald span efficiency e [-], in (0, 1].
    """
    ar = np.asarray(aspect_ratio, dtype=float)
    e = np.asarray(oswald, dtype=float)
    if np.any(ar <= 0) or np.any(e <= 0) or np.any(e > 1):
        raise ValueError("aspect ratio must be > 0 and the Oswald factor in (0, 1]")
    return 1.0 / (np.pi * e * ar)


def lift_force(
    airspeed: ArrayLike, density: ArrayLike, wing_area: ArrayLike, cl: ArrayLike
) -> NDArray[np.float64]:
    """Lift L = 1/2 rho V|V| S C_L [N], signed with the airspeed.

    Parameters
    ----------
    airspeed : array_like
        True airspeed along the runway [m/s]; negative when the air comes from behind.
    density : array_like
        Air density [kg/m^3].
    wing_area : array_like
        Wing area [m^2].
    cl : array_like
        Lift coefficient during the roll [-] (spoilers or lift dumpers lower it).
    """
    v = np.asarray(airspeed, dtype=float)
    return 0.5 * np.asarray(density) * v * np.abs(v) * np.asarray(wing_area) * np.asarray(cl)


def drag_force(
    airspeed: ArrayLike,
    density: ArrayLike,
    wing_area: ArrayLike,
    cd0: ArrayLike,
    induced_factor: ArrayLike,
    ground_factor: ArrayLike,
    cl: ArrayLike,
) -> NDArray[np.float64]:
    """Drag D = 1/2 rho V|V| S (C_D0 + phi K C_L^2) [N], positive when it retards forward motion.

    Anderson 1999, eq. 6.100 (ground roll with the ground-effect factor phi on the induced term).

    Parameters
    ----------
    airspeed : array_like
        True airspeed [m/s]; negative with the air from behind (drag then pushes forward).
    density : array_like
        Air density [kg/m^3].
    wing_area : array_like
        Wing area [m^2].
    cd0 : array_like
        Zero-lift drag coefficient in the landing configuration, gear and flaps included [-].
    induced_factor : array_like
        K = 1/(pi e AR) [-].
    ground_factor : array_like
        Ground-effect factor phi [-].
    cl : array_like
        Lift coefficient during the roll [-].
    """
    v = np.asarray(airspeed, dtype=float)
    cd = np.asarray(cd0) + np.asarray(ground_factor) * np.asarray(induced_factor) * np.asarray(cl) ** 2
    return 0.5 * np.asarray(density) * v * np.abs(v) * np.asarray(wing_area) * cd
