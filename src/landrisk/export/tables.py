"""pandas views of results: one row per landing, per percentile, per input or per runway length."""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

from landrisk.model import LandingResult
from landrisk.studies import PHASES, Assessment, Ranking, RareAssessment

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["landings_table", "overrun_profile_table", "percentile_table", "rank_table", "risk_curve_table",
           "samples_table"]


def landings_table(values: Mapping[str, ArrayLike], result: LandingResult) -> pd.DataFrame:
    """One row per landing: the varied inputs, then every result column of ``result``."""
    import pandas as pd

    frame = pd.DataFrame({k: np.broadcast_to(np.asarray(v), (result.size,)) for k, v in values.items()})
    for name in LandingResult.__dataclass_fields__:
        frame[name] = getattr(result, name)
    return frame


def percentile_table(a: Assessment) -> pd.DataFrame:
    """Percentiles of every phase with their intervals: one row per (phase, percentile)."""
    import pandas as pd

    rows = []
    for name, label in PHASES.items():
        for p in a.percentiles[name]:
            rows.append({"phase": label, "percentile": p.p, "value_m": p.value, "ci95_lo_m": p.lo,
                         "ci95_hi_m": p.hi, "supported": p.supported})
    return pd.DataFrame(rows)


def samples_table(a: Assessment) -> pd.DataFrame:
    """Every sample's uncertain inputs (if kept) and its phase distances and outcome."""
    import pandas as pd

    cols: dict[str, np.ndarray] = {}
    if a.inputs is not None:
        for j, k in enumerate(a.problem.names):
            cols[k] = a.inputs[:, j]
    for k in ("air_distance_m", "free_roll_m", "braking_m", "total_m", "margin_m",
              "runway_end_ground_speed", "overrun"):
        cols[k] = a.outputs[k]
    cols["lda_m"] = a.outputs["total_m"] + a.outputs["margin_m"]
    return pd.DataFrame(cols)


def rank_table(r: Ranking) -> pd.DataFrame:
    """One row per input: first-order and total index (with intervals for Monte Carlo) and swings."""
    import pandas as pd

    return pd.DataFrame([{"input": i.name, "first_order": i.first, "total": i.total,
                          "first_order_ci95_lo": i.first_ci[0] if i.first_ci else None,
                          "first_order_ci95_hi": i.first_ci[1] if i.first_ci else None,
                          "total_ci95_lo": i.total_ci[0] if i.total_ci else None,
                          "total_ci95_hi": i.total_ci[1] if i.total_ci else None,
                          "low_value": i.p5, "high_value": i.p95, "swing_total_m": i.swing_total_m,
                          "swing_margin_m": i.swing_margin_m, "discrete": i.discrete,
                          "levels": "; ".join(i.levels)} for i in r.inputs])


def overrun_profile_table(r: Ranking) -> pd.DataFrame:
    """One row per input: its median before and given an overrun (SI units of the key), the shift, and
    the input's first-order index of the overrun indicator."""
    import pandas as pd

    cols = ["name", "unit", "prior_median", "overrun_median", "shift", "overrun_first_order",
            "overrun_first_order_ci95_lo", "overrun_first_order_ci95_hi", "note"]
    o = r.overrun
    if o is None:
        return pd.DataFrame(columns=cols)
    return pd.DataFrame([{"name": p.name, "unit": p.unit, "prior_median": p.prior_median,
                          "overrun_median": p.overrun_median, "shift": p.shift,
                          "overrun_first_order": i.first_order,
                          "overrun_first_order_ci95_lo": i.ci[0] if i.ci else None,
                          "overrun_first_order_ci95_hi": i.ci[1] if i.ci else None, "note": i.note}
                         for p, i in zip(o.profile, o.indices, strict=True)], columns=cols)


def risk_curve_table(r: RareAssessment) -> pd.DataFrame:
    """P(overrun) against the LDA: subset simulation (mixed over branches) and crude Monte Carlo."""
    import pandas as pd

    rc = r.risk_curve
    if rc is None:
        return pd.DataFrame(columns=["lda_m", "p_overrun_subset", "p_overrun_mc"])
    return pd.DataFrame({"lda_m": rc.lda_m, "p_overrun_subset": rc.p_subset, "p_overrun_mc": rc.p_mc})
