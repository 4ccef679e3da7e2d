"""A validated scenario: the values of every scalar key, and the text that describes it."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from landrisk.model.case import LandingCase, case_from_values
from landrisk.model.schema import KEYS
from landrisk.model.solver import LandingResult

__all__ = ["Scenario", "SingleLanding"]


@dataclass(frozen=True)
class Scenario:
    """One landing scenario as read and checked from a scenario file.

    Attributes
    ----------
    values : Mapping[str, Any]
        Every key of :data:`landrisk.model.schema.KEYS` with its value in the key's unit (``None`` for
        an optional key not given). Read-only.
    source : str
        Where it was read from: a path, or ``"<demo>"`` for the embedded demo scenario.
    text : str
        The scenario file as read (before ``--set`` overrides), for the record of a run.
    overrides : tuple of str
        The ``--set`` assignments applied, as written.
    """

    values: Mapping[str, Any]
    source: str = "<memory>"
    text: str = ""
    overrides: tuple[str, ...] = field(default_factory=tuple)

    def __post_init__(self) -> None:
        missing = set(KEYS) - set(self.values)
        if missing:
            raise ValueError(f"scenario lacks keys: {sorted(missing)}")
        object.__setattr__(self, "values", MappingProxyType(dict(self.values)))

    def __reduce__(self) -> tuple[Any, ...]:
        """Pickled as its plain values (for process pools and distributed workers)."""
        return (Scenario, (dict(self.values), self.source, self.text, self.overrides))

    @property
    def name(self) -> str:
        """The scenario's short name."""
        return str(self.values["scenario.name"])

    def with_values(self, **changes: Any) -> Scenario:
        """The same scenario with some keys (dotted names as keyword-unpacked dict) set to new values."""
        unknown = set(changes) - set(self.values)
        if unknown:
            raise KeyError(f"not keys of the scenario: {sorted(unknown)}")
        return Scenario({**self.values, **changes}, self.source, self.text, self.overrides)

    def scalar_values(self) -> dict[str, Any]:
        """The keys that hold numbers (those a sample may replace), with their values."""
        return {k: v for k, v in self.values.items() if KEYS[k].scalar}

    def case(self, overrides: Mapping[str, ArrayLike] | None = None) -> LandingCase:
        """The solver's inputs, with any scalar key replaced by an array over landings.

        Parameters
        ----------
        overrides : mapping, optional
            Dotted key -> value or array of values (in the key's unit), e.g. Monte Carlo samples.
        """
        vals: dict[str, Any] = self.scalar_values()
        for k, x in (overrides or {}).items():
            if k not in vals:
                raise KeyError(f"{k} is not a scalar key of the scenario")
            vals[k] = np.asarray(x)
        return case_from_values(vals)


@dataclass(frozen=True)
class SingleLanding:
    """One landing's phases [m], speeds [m/s] and time [s], with the scenario it came from."""

    scenario: Scenario
    approach_m: float
    flare_m: float
    air_distance_m: float
    free_roll_m: float
    braking_m: float
    total_m: float
    lda_m: float
    margin_m: float
    stall_speed: float
    touchdown_speed: float
    touchdown_ground_speed: float
    brake_speed: float
    time_to_stop_s: float
    overrun: bool
    runway_end_ground_speed: float
    beyond_end_m: float
    stopped_in_free_roll: bool
    derived: Mapping[str, float]

    @classmethod
    def of(cls, scenario: Scenario, result: LandingResult) -> SingleLanding:
        """The first landing of a solver result, with the derived inputs of the scenario's case."""
        case = scenario.case()
        out = {name: _scalar(getattr(result, name)) for name in cls.__dataclass_fields__
               if name not in ("scenario", "derived")}
        derived = {
            "density_kg_m3": _scalar(case.density),
            "rolling_mu": _scalar(case.rolling_mu),
            "braking_mu": _scalar(case.braking_mu),
            "flare_speed_ratio": _scalar(case.flare_speed_ratio),
            "slope_angle_rad": _scalar(case.slope_angle),
        }
        return cls(scenario=scenario, derived=derived, **out)


def _scalar(x: Any) -> Any:
    v = np.asarray(x).reshape(-1)[0]
    return bool(v) if v.dtype == bool else float(v)
