"""The landing case: every physical input of the solver as an array over landings, in SI units.

:func:`case_from_values` is the adapter between the scenario's dotted keys and the solver. It takes the
scenario's values with any of them replaced by arrays (one value per landing, e.g. Monte Carlo samples),
derives what the solver needs (air density from pressure altitude and temperature, friction from the
runway condition code, slope angle, induced-drag factor) and returns a :class:`LandingCase`.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, fields
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from landrisk.physics import STANDARD_GRAVITY, friction_from_condition_code, isa_density

__all__ = ["DEFAULT_ROLLING_MU", "LandingCase", "case_from_values"]

#: Rolling coefficient used with an explicit braking_mu when rolling_mu is not given [-]
#: (Raymer 2018, Table 17.1: dry concrete or asphalt 0.03-0.05; middle of the range).
DEFAULT_ROLLING_MU = 0.04

Array = NDArray[np.float64]


@dataclass(frozen=True)
class LandingCase:
    """Inputs of N landings, each field an array of shape (N,) (or broadcastable to it).

    Units: masses [kg], lengths [m], areas [m^2], speeds [m/s], times [s], forces [N], angles [rad],
    density [kg/m^3]; coefficients and ratios [-]. Thrust laws are T = t0 + t1 V + t2 V^2.
    """

    mass: Array
    wing_area: Array
    wing_span: Array
    wing_height: Array
    cl_max: Array
    cd0: Array
    oswald: Array
    cl_ground: Array
    reverse_cutoff_speed: Array
    idle_t0: Array
    idle_t1: Array
    idle_t2: Array
    reverse_t0: Array
    reverse_t1: Array
    reverse_t2: Array
    use_reverse: NDArray[np.bool_]
    density: Array
    headwind: Array
    slope_angle: Array
    rolling_mu: Array
    braking_mu: Array
    screen_height: Array
    approach_angle: Array
    approach_speed_ratio: Array
    flare_speed_ratio: Array
    flare_load_factor: Array
    touchdown_speed_ratio: Array
    reaction_time: Array
    touchdown_given: NDArray[np.bool_]
    touchdown_distance: Array
    lda: Array
    g: float = STANDARD_GRAVITY

    @property
    def size(self) -> int:
        """Number of landings N (the broadcast length of all fields)."""
        return int(np.broadcast(*(getattr(self, f.name) for f in fields(self) if f.name != "g")).size)

    def broadcast(self) -> LandingCase:
        """The same case with every field broadcast to shape (N,)."""
        names = [f.name for f in fields(self) if f.name != "g"]
        arrays = np.broadcast_arrays(*(np.atleast_1d(getattr(self, n)) for n in names))
        return LandingCase(**dict(zip(names, arrays, strict=True)), g=self.g)

    def take(self, index: slice | NDArray[np.intp] | NDArray[np.bool_]) -> LandingCase:
        """The landings selected by ``index``: fields of shape (N,) are indexed, a field that holds one value
        for every landing (of size 1) is kept as it is."""
        names = [f.name for f in fields(self) if f.name != "g"]
        return LandingCase(**{n: _rows(getattr(self, n), index) for n in names}, g=self.g)


def _rows(x: NDArray, index: slice | NDArray[np.intp] | NDArray[np.bool_]) -> NDArray:
    x = np.asarray(x)
    return x if x.size == 1 else x[index]


def _arr(x: ArrayLike) -> Array:
    return np.asarray(x, dtype=float)


def case_from_values(values: Mapping[str, ArrayLike | None], g: float = STANDARD_GRAVITY) -> LandingCase:
    """Build the solver's inputs from scenario values keyed by dotted name (see ``model.schema``).

    Parameters
    ----------
    values : mapping
        Every scalar key of the scenario in its schema unit (SI; approach angle in degrees, slope in
        percent), each a scalar or an array over landings. ``None`` marks an optional key not given
        (``conditions.temperature``, ``runway.condition_code``, ``procedure.flare_speed_ratio``,
        ``procedure.touchdown_distance``, ``runway.rolling_mu``).
    g : float
        Acceleration of gravity [m/s^2].

    Returns
    -------
    LandingCase
        With density from the ISA (ICAO Doc 7488) at the pressure altitude and the actual temperature,
        friction from the runway condition code table when a code is given, the slope angle
        arctan(slope / 100), and a flare speed ratio defaulting to the mean of approach and touchdown.
    """
    v: Mapping[str, Any] = values
    temperature = v.get("conditions.temperature")
    deviation = v.get("conditions.isa_deviation")
    density = isa_density(
        _arr(v["conditions.pressure_altitude"]),
        isa_deviation=_arr(0.0 if deviation is None else deviation),
        temperature=None if temperature is None else _arr(temperature),
    )
    code = v.get("runway.condition_code")
    if code is not None:
        rolling_mu, braking_mu = friction_from_condition_code(code)
    else:
        rolling = v.get("runway.rolling_mu")
        rolling_mu = _arr(DEFAULT_ROLLING_MU if rolling is None else rolling)
        braking_mu = _arr(v["runway.braking_mu"])
    td_ratio = _arr(v["procedure.touchdown_speed_ratio"])
    app_ratio = _arr(v["procedure.approach_speed_ratio"])
    flare = v.get("procedure.flare_speed_ratio")
    flare_ratio = 0.5 * (app_ratio + td_ratio) if flare is None else _arr(flare)
    td = v.get("procedure.touchdown_distance")
    return LandingCase(
        mass=_arr(v["aircraft.mass"]),
        wing_area=_arr(v["aircraft.wing_area"]),
        wing_span=_arr(v["aircraft.wing_span"]),
        wing_height=_arr(v["aircraft.wing_height"]),
        cl_max=_arr(v["aircraft.cl_max"]),
        cd0=_arr(v["aircraft.cd0"]),
        oswald=_arr(v["aircraft.oswald"]),
        cl_ground=_arr(v["aircraft.cl_ground"]),
        reverse_cutoff_speed=_arr(v["aircraft.reverse_cutoff_speed"]),
        idle_t0=_arr(v["aircraft.thrust.idle.t0"]),
        idle_t1=_arr(v["aircraft.thrust.idle.t1"]),
        idle_t2=_arr(v["aircraft.thrust.idle.t2"]),
        reverse_t0=_arr(v["aircraft.thrust.reverse.t0"]),
        reverse_t1=_arr(v["aircraft.thrust.reverse.t1"]),
        reverse_t2=_arr(v["aircraft.thrust.reverse.t2"]),
        use_reverse=np.asarray(v["procedure.use_reverse"]).astype(bool),
        density=density,
        headwind=_arr(v["conditions.headwind"]),
        slope_angle=np.arctan(_arr(v["runway.slope"]) / 100.0),
        rolling_mu=rolling_mu,
        braking_mu=braking_mu,
        screen_height=_arr(v["procedure.screen_height"]),
        approach_angle=np.radians(_arr(v["procedure.approach_angle"])),
        approach_speed_ratio=app_ratio,
        flare_speed_ratio=flare_ratio,
        flare_load_factor=_arr(v["procedure.flare_load_factor"]),
        touchdown_speed_ratio=td_ratio,
        reaction_time=_arr(v["procedure.reaction_time"]),
        touchdown_given=np.asarray(td is not None),
        touchdown_distance=_arr(0.0 if td is None else td),
        lda=_arr(v["runway.lda"]),
        g=g,
    )
