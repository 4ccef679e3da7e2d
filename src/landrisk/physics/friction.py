"""Runway friction: rolling and braking coefficients, and the runway condition code table.

Sources:
- Raymer, D. P., *Aircraft Design: A Conceptual Approach*, 6th ed., AIAA 2018, Table 17.1 (ground rolling
  resistance, brakes off / brakes on): dry concrete or asphalt 0.03-0.05 / 0.3-0.5; wet 0.05 / 0.15-0.3;
  icy 0.02 / 0.06-0.10.
- ICAO Global Reporting Format, PANS-Aerodromes (Doc 9981): runway condition codes 6..0 and their
  braking-action terms (dry; good; good to medium; medium; medium to poor; poor; less than poor).
- The braking coefficients for codes 4..1 (0.20, 0.16, 0.13, 0.08) are airplane braking coefficients of
  the kind used for time-of-arrival landing assessments, recalled from memory, not from a stored copy of a
  source: this table is a documented default, to be replaced by the operator's own data, never a check
  value. Code 6 takes the middle of Raymer's dry range; code 5 the upper part of Raymer's wet range
  (0.25, chosen here); code 0 (less than poor: no operations under the GRF) 0.05, chosen here below
  Raymer's icy range.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["CONDITION_CODE_TABLE", "friction_from_condition_code"]

#: code -> (braking action, rolling mu [-], effective braking mu [-]); see the module docstring.
CONDITION_CODE_TABLE: dict[int, tuple[str, float, float]] = {
    6: ("dry", 0.04, 0.40),
    5: ("good", 0.05, 0.25),
    4: ("good to medium", 0.05, 0.20),
    3: ("medium", 0.05, 0.16),
    2: ("medium to poor", 0.04, 0.13),
    1: ("poor", 0.02, 0.08),
    0: ("less than poor", 0.02, 0.05),
}

_ROLLING = np.array([CONDITION_CODE_TABLE[c][1] for c in range(7)])
_BRAKING = np.array([CONDITION_CODE_TABLE[c][2] for c in range(7)])


def friction_from_condition_code(code: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Rolling and braking friction coefficients for runway condition codes 0..6.

    Parameters
    ----------
    code : array_like of int
        Runway condition code (ICAO GRF, Doc 9981), 0 (less than poor) to 6 (dry).

    Returns
    -------
    (rolling_mu, braking_mu) : tuple of numpy.ndarray
        Coefficients [-] from :data:`CONDITION_CODE_TABLE`.
    """
    c = np.asarray(code)
    ci = np.rint(c).astype(int)
    if np.any(ci != c) or np.any(ci < 0) or np.any(ci > 6):
        raise ValueError("runway condition code must be an integer 0..6")
    return _ROLLING[ci], _BRAKING[ci]
