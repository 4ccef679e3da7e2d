"""The high-level entry points: what the command line does, in a few lines from Python.

>>> import landrisk.api as lr
>>> scenario = lr.load()                      # the embedded, invented demo scenario
>>> result = lr.solve(scenario)               # one landing, every phase
>>> round(result.total_m)                     # doctest: +SKIP
947
>>> table = lr.solve_many(scenario, {"runway.braking_mu": [0.2, 0.3, 0.4]})   # a pandas DataFrame
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from landrisk import CAUTION, __version__
from landrisk.errors import SolveError
from landrisk.io import load_scenario
from landrisk.io.config import demo_text
from landrisk.io.output import write_text_new
from landrisk.model import KEYS, LandingResult, Scenario, SingleLanding, solve_landings, solve_one

__all__ = ["SingleLanding", "load", "solve", "solve_many", "solve_record", "write_starter"]


def load(path: str | Path | None = None, overrides: Iterable[str] = ()) -> Scenario:
    """Read a scenario file (``None``: the embedded demo) with ``KEY=VALUE`` overrides."""
    return load_scenario(path, overrides)


def solve(scenario: Scenario) -> SingleLanding:
    """The deterministic landing of ``scenario`` at its nominal inputs.

    Raises
    ------
    landrisk.errors.SolveError
        If lift exceeds weight at touchdown or the aircraft cannot stop.
    """
    case = scenario.case()
    try:
        res: LandingResult = solve_one(case)
    except SolveError as exc:
        raise SolveError(f"{scenario.source}: {exc}") from None
    out = {name: _scalar(getattr(res, name)) for name in SingleLanding.__dataclass_fields__
           if name not in ("scenario", "derived")}
    derived = {
        "density_kg_m3": _scalar(case.density),
        "rolling_mu": _scalar(case.rolling_mu),
        "braking_mu": _scalar(case.braking_mu),
        "flare_speed_ratio": _scalar(case.flare_speed_ratio),
        "slope_angle_rad": _scalar(case.slope_angle),
    }
    return SingleLanding(scenario=scenario, derived=derived, **out)


def _scalar(x: Any) -> Any:
    v = np.asarray(x).reshape(-1)[0]
    return bool(v) if v.dtype == bool else float(v)


def solve_many(scenario: Scenario, values: Mapping[str, ArrayLike]) -> pd.DataFrame:
    """Many landings of ``scenario`` with some keys replaced by arrays (one value per landing).

    Parameters
    ----------
    scenario : Scenario
        The base scenario.
    values : mapping
        Dotted key -> array of values in the key's unit (see ``landrisk.model.schema``).

    Returns
    -------
    pandas.DataFrame
        One row per landing: the varied inputs, then every result column of
        :class:`landrisk.model.LandingResult` (metres, m/s, seconds, flags).
    """
    res = solve_landings(scenario.case(values))
    frame = pd.DataFrame({k: np.broadcast_to(np.asarray(v), (res.size,)) for k, v in values.items()})
    for name in LandingResult.__dataclass_fields__:
        frame[name] = getattr(res, name)
    return frame


def solve_record(landing: SingleLanding) -> dict[str, Any]:
    """A JSON-ready record of one landing: results, the resolved inputs and the run's provenance."""
    s = landing.scenario
    return {
        "tool": "landrisk",
        "version": __version__,
        "caution": CAUTION,
        "scenario": s.name,
        "source": s.source,
        "overrides": list(s.overrides),
        "air_distance_m": landing.air_distance_m,
        "approach_m": landing.approach_m,
        "flare_m": landing.flare_m,
        "free_roll_m": landing.free_roll_m,
        "braking_m": landing.braking_m,
        "total_m": landing.total_m,
        "lda_m": landing.lda_m,
        "margin_m": landing.margin_m,
        "overrun": landing.overrun,
        "runway_end_ground_speed_ms": landing.runway_end_ground_speed,
        "beyond_end_m": landing.beyond_end_m,
        "stall_speed_kt": _kt(landing.stall_speed),
        "touchdown_speed_kt": _kt(landing.touchdown_speed),
        "touchdown_ground_speed_kt": _kt(landing.touchdown_ground_speed),
        "brake_speed_kt": _kt(landing.brake_speed),
        "time_to_stop_s": landing.time_to_stop_s,
        "inputs": dict(s.values),
        "input_units": {k: spec.unit for k, spec in KEYS.items() if spec.kind == "quantity"},
        "derived": dict(landing.derived),
    }


def _kt(speed_ms: float) -> float:
    from landrisk.units import convert

    return convert(speed_ms, "m/s", "kt")


def write_starter(path: str | Path, force: bool = False) -> Path:
    """Write a commented starter scenario (the invented demo, every key explained) to ``path``."""
    header = (
        "# Starter scenario written by `landrisk init`: a copy of the invented demo. Replace every value\n"
        "# with your own data; see the README for the meaning, unit and range of each key.\n"
    )
    return write_text_new(Path(path), header + demo_text(), force=force)
