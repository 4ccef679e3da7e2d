"""Write configs/demo-reference-distances-invented.csv: an INVENTED reference table for the demo aircraft.

The LR-64 does not exist, and neither do these distances. They are the model's own total distances
from the screen height for the demo scenario with the parameters TRUE_PARAMETERS below (chosen for the
demo, a little off the scenario's own values), under conditions spread over mass, altitude,
temperature, wind, reverser use and runway condition code, plus Gaussian noise of standard deviation
TOLERANCE_FT. They exist so that `landrisk calibrate` has something to fit and a test can check that it
recovers TRUE_PARAMETERS; they are never check values for the physics.

Run from the repository root:  python configs/make_reference_invented.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

#: The parameters the table is made from (invented).
TRUE_PARAMETERS = {
    "aircraft.cd0": 0.095,
    "aircraft.cl_ground": 0.10,
    "aircraft.thrust.reverse.scale": 0.9,
    "runway.braking_mu.code_6": 0.36,
    "runway.braking_mu.code_5": 0.22,
    "runway.braking_mu.code_3": 0.15,
}
#: Standard deviation of the noise added to each distance, and the tolerance column written [ft].
TOLERANCE_FT = 30.0
ROWS = 60
SEED = 20261202
FT = 0.3048
LB = 0.45359237
KT = 1852.0 / 3600.0

OUT = Path(__file__).with_name("demo-reference-distances-invented.csv")


def conditions(rows: int = ROWS, seed: int = SEED) -> dict[str, np.ndarray]:
    """The rows' conditions in the scenario keys' units (SI): a fixed grid-like spread."""
    rng = np.random.default_rng(seed)
    i = np.arange(rows)
    return {
        "aircraft.mass": np.round(rng.uniform(50_000, 66_000, rows) / LB / 500) * 500 * LB,
        "conditions.pressure_altitude": np.array([0.0, 2000.0, 5000.0, 8000.0])[i % 4] * FT,
        "conditions.temperature": 273.15 + np.array([-5.0, 15.0, 30.0])[i % 3],
        "conditions.headwind": np.array([-10.0, 0.0, 10.0, 20.0, 5.0])[i % 5] * KT,
        "runway.condition_code": np.array([6, 5, 3])[(i // 2) % 3],
        "procedure.use_reverse": (i % 2) == 0,
    }


def distances(true: dict[str, float] | None = None, rows: int = ROWS, seed: int = SEED) -> np.ndarray:
    """The model distances [m] of the rows at ``true`` parameters (default TRUE_PARAMETERS)."""
    from landrisk.api import load
    from landrisk.studies.calibrate import reference_model

    p = TRUE_PARAMETERS if true is None else true
    model = reference_model(load(), list(p), conditions(rows, seed), rows)
    return model(np.array([list(p.values())]))[0]


def main() -> None:
    cond = conditions()
    rng = np.random.default_rng(SEED + 1)
    ref_ft = distances() / FT + rng.normal(0.0, TOLERANCE_FT, ROWS)
    lines = [
        "# INVENTED reference landing distances for the invented LR-64 demo aircraft: NOT DATA OF ANY",
        "# REAL AIRCRAFT. Made by configs/make_reference_invented.py from the model with known parameters",
        f"# ({', '.join(f'{k} = {v:g}' for k, v in TRUE_PARAMETERS.items())})",
        f"# plus Gaussian noise of {TOLERANCE_FT:g} ft. Total distance from the screen height (50 ft).",
        "aircraft.mass [lb],conditions.pressure_altitude [ft],conditions.temperature [degC],"
        "conditions.headwind [kt],runway.condition_code,procedure.use_reverse,reference_distance [ft],"
        "tolerance [ft]",
    ]
    for j in range(ROWS):
        lines.append(
            f"{cond['aircraft.mass'][j] / LB:.0f},{cond['conditions.pressure_altitude'][j] / FT:.0f},"
            f"{cond['conditions.temperature'][j] - 273.15:.0f},{cond['conditions.headwind'][j] / KT:.0f},"
            f"{cond['runway.condition_code'][j]},{str(bool(cond['procedure.use_reverse'][j])).lower()},"
            f"{ref_ft[j]:.0f},{TOLERANCE_FT:g}"
        )
    OUT.write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"wrote {OUT}")


if __name__ == "__main__":
    main()
