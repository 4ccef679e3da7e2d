"""Pure, vectorised physics of the landing, in SI units.

Every function takes numpy arrays (or scalars) that broadcast together and returns arrays; none keeps
state, reads files or imports anything of the rest of landrisk. Each docstring gives the unit of every
parameter and the published source of the relation.
"""

from landrisk.physics.aerodynamics import (
    aspect_ratio,
    drag_force,
    ground_effect_factor,
    induced_drag_factor,
    lift_force,
    stall_speed,
)
from landrisk.physics.air_distance import air_distance_flare, flare_height, flare_radius
from landrisk.physics.atmosphere import (
    STANDARD_GRAVITY,
    density_from_pressure_temperature,
    isa_density,
    isa_pressure,
    isa_pressure_altitude,
    isa_temperature,
)
from landrisk.physics.friction import CONDITION_CODE_TABLE, friction_from_condition_code
from landrisk.physics.ground_roll import acceleration, thrust

__all__ = [
    "CONDITION_CODE_TABLE",
    "STANDARD_GRAVITY",
    "acceleration",
    "air_distance_flare",
    "aspect_ratio",
    "density_from_pressure_temperature",
    "drag_force",
    "flare_height",
    "flare_radius",
    "friction_from_condition_code",
    "ground_effect_factor",
    "induced_drag_factor",
    "isa_density",
    "isa_pressure",
    "isa_pressure_altitude",
    "isa_temperature",
    "lift_force",
    "stall_speed",
    "thrust",
]
