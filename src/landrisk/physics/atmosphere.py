"""International Standard Atmosphere below 20 km, as a function of pressure altitude.

Source: ICAO, *Manual of the ICAO Standard Atmosphere*, Doc 7488, 3rd ed. 1993 (identical to the
U.S. Standard Atmosphere 1976 below 32 km): sea-level 288.15 K and 101 325 Pa, lapse rate 6.5 K/km up
to the tropopause at 11 km geopotential, isothermal 216.65 K above it. Pressure altitude is by definition
the geopotential altitude at which the standard atmosphere has the given pressure, so it is the argument
of the standard pressure law. A non-standard day keeps that pressure and changes only the temperature.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "GAS_CONSTANT_AIR",
    "STANDARD_GRAVITY",
    "density_from_pressure_temperature",
    "isa_density",
    "isa_pressure",
    "isa_pressure_altitude",
    "isa_temperature",
]

#: Standard acceleration of gravity [m/s^2] (ICAO Doc 7488, Table A).
STANDARD_GRAVITY = 9.80665
#: Specific gas constant of dry air [J/(kg K)] (ICAO Doc 7488: R* / M0 = 8314.32 / 28.9644).
GAS_CONSTANT_AIR = 287.05287
SEA_LEVEL_TEMPERATURE = 288.15  # [K]
SEA_LEVEL_PRESSURE = 101_325.0  # [Pa]
LAPSE_RATE = 0.0065  # [K/m], troposphere
TROPOPAUSE = 11_000.0  # [m] geopotential
TROPOPAUSE_TEMPERATURE = SEA_LEVEL_TEMPERATURE - LAPSE_RATE * TROPOPAUSE  # 216.65 K
_EXPONENT = STANDARD_GRAVITY / (GAS_CONSTANT_AIR * LAPSE_RATE)  # 5.25588
TROPOPAUSE_PRESSURE = SEA_LEVEL_PRESSURE * (TROPOPAUSE_TEMPERATURE / SEA_LEVEL_TEMPERATURE) ** _EXPONENT

#: Validity of the model here [m]: the 1976 tables start at -5 km; above 20 km the lapse rate changes.
ALTITUDE_RANGE = (-5_000.0, 20_000.0)


def _check_altitude(h: NDArray[np.float64]) -> None:
    lo, hi = ALTITUDE_RANGE
    if np.any(h < lo) or np.any(h > hi):
        raise ValueError(f"pressure altitude outside {lo:g}..{hi:g} m, where this ISA model holds")


def isa_temperature(pressure_altitude: ArrayLike) -> NDArray[np.float64]:
    """Standard temperature at a pressure altitude.

    Parameters
    ----------
    pressure_altitude : array_like
        Pressure (geopotential) altitude [m], -5 000 to 20 000 m.

    Returns
    -------
    numpy.ndarray
        Temperature [K]: 288.15 - 0.0065 h up to 11 km, 216.65 K above (ICAO Doc 7488).
    """
    h = np.asarray(pressure_altitude, dtype=float)
    _check_altitude(h)
    return np.where(h <= TROPOPAUSE, SEA_LEVEL_TEMPERATURE - LAPSE_RATE * h, TROPOPAUSE_TEMPERATURE)


def isa_pressure(pressure_altitude: ArrayLike) -> NDArray[np.float64]:
    """Static pressure at a pressure altitude.

    Parameters
    ----------
    pressure_altitude : array_like
        Pressure (geopotential) altitude [m], -5 000 to 20 000 m.

    Returns
    -------
    numpy.ndarray
        Pressure [Pa]: p0 (T/T0)^(g0/(R L)) in the troposphere, exponential decay above
        (ICAO Doc 7488, hydrostatic equation integrated for a linear and a constant temperature).
    """
    h = np.asarray(pressure_altitude, dtype=float)
    _check_altitude(h)
    t = isa_temperature(h)
    tropo = SEA_LEVEL_PRESSURE * (t / SEA_LEVEL_TEMPERATURE) ** _EXPONENT
    strato = TROPOPAUSE_PRESSURE * np.exp(
        -STANDARD_GRAVITY * (h - TROPOPAUSE) / (GAS_CONSTANT_AIR * TROPOPAUSE_TEMPERATURE)
    )
    return np.where(h <= TROPOPAUSE, tropo, strato)


def density_from_pressure_temperature(pressure: ArrayLike, temperature: ArrayLike) -> NDArray[np.float64]:
    """Air density from the ideal-gas law rho = p / (R T).

    Parameters
    ----------
    pressure : array_like
        Static pressure [Pa], > 0.
    temperature : array_like
        Static temperature [K], > 0.

    Returns
    -------
    numpy.ndarray
        Density [kg/m^3], with R = 287.05287 J/(kg K) (ICAO Doc 7488).
    """
    p = np.asarray(pressure, dtype=float)
    t = np.asarray(temperature, dtype=float)
    if np.any(p <= 0) or np.any(t <= 0):
        raise ValueError("pressure and temperature must be positive")
    return p / (GAS_CONSTANT_AIR * t)


def isa_density(
    pressure_altitude: ArrayLike,
    isa_deviation: ArrayLike = 0.0,
    temperature: ArrayLike | None = None,
) -> NDArray[np.float64]:
    """Density at a pressure altitude on a standard or non-standard day.

    Parameters
    ----------
    pressure_altitude : array_like
        Pressure altitude [m], -5 000 to 20 000 m.
    isa_deviation : array_like, optional
        Temperature above standard [K]; ignored when ``temperature`` is given.
    temperature : array_like, optional
        Outside air temperature [K]; overrides ``isa_deviation``.

    Returns
    -------
    numpy.ndarray
        Density [kg/m^3] from the standard pressure and the actual temperature (ICAO Doc 7488).
    """
    p = isa_pressure(pressure_altitude)
    t = isa_temperature(pressure_altitude) + np.asarray(isa_deviation, dtype=float)
    if temperature is not None:
        t = np.broadcast_to(np.asarray(temperature, dtype=float), np.broadcast(t, temperature).shape)
    return density_from_pressure_temperature(p, t)


def isa_pressure_altitude(pressure: ArrayLike) -> NDArray[np.float64]:
    """Pressure altitude of a static pressure: the inverse of :func:`isa_pressure`.

    Parameters
    ----------
    pressure : array_like
        Static pressure [Pa] (for a runway, the station pressure QFE), between the ISA pressures at
        20 000 m and -5 000 m.

    Returns
    -------
    numpy.ndarray
        Pressure altitude [m]: (T0 / L) (1 - (p / p0)^(R L / g0)) in the troposphere, and the
        isothermal inverse above 11 km (ICAO Doc 7488).
    """
    p = np.asarray(pressure, dtype=float)
    lo, hi = ALTITUDE_RANGE
    if np.any(p <= 0) or np.any(p > isa_pressure(lo)) or np.any(p < isa_pressure(hi)):
        raise ValueError("pressure outside the ISA range of -5 000 to 20 000 m")
    tropo = SEA_LEVEL_TEMPERATURE / LAPSE_RATE * (1.0 - (p / SEA_LEVEL_PRESSURE) ** (1.0 / _EXPONENT))
    strato = TROPOPAUSE - GAS_CONSTANT_AIR * TROPOPAUSE_TEMPERATURE / STANDARD_GRAVITY * np.log(
        p / TROPOPAUSE_PRESSURE
    )
    return np.where(p >= TROPOPAUSE_PRESSURE, tropo, strato)
