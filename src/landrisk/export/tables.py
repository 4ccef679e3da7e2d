"""pandas views of results: one row per landing, per percentile, per input or per runway length.

Column headers carry their unit (``total [m]``, ``total [ft]``, ``runway_end_ground_speed [kt]``) in the
unit system asked for (:class:`landrisk.units.DisplayUnits`, SI by default); every frame carries the
caution in ``frame.attrs["caution"]``. Written as CSV they open with ``pandas.read_csv`` and no options.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike, NDArray

from landrisk import CAUTION
from landrisk.model import KEYS, LandingResult
from landrisk.units import DisplayUnits

if TYPE_CHECKING:
    import pandas as pd

    from landrisk.studies import Assessment, Ranking, RareAssessment

__all__ = ["landings_table", "overrun_profile_table", "percentile_table", "rank_table", "risk_curve_table",
           "samples_columns", "samples_table"]

Units = DisplayUnits | str | None


def _du(units: Units) -> DisplayUnits:
    return units if isinstance(units, DisplayUnits) else DisplayUnits(units or "si")


def _head(name: str, unit: str) -> str:
    return f"{name} [{unit}]" if unit else name


def _framed(frame: pd.DataFrame) -> pd.DataFrame:
    frame.attrs["caution"] = CAUTION
    return frame


def landings_table(values: Mapping[str, ArrayLike], result: LandingResult) -> pd.DataFrame:
    """One row per landing: the varied inputs, then every result column of ``result`` (SI)."""
    import pandas as pd

    frame = pd.DataFrame({k: np.broadcast_to(np.asarray(v), (result.size,)) for k, v in values.items()})
    for name in LandingResult.__dataclass_fields__:
        frame[name] = getattr(result, name)
    return _framed(frame)


def percentile_table(a: Assessment, units: Units = None) -> pd.DataFrame:
    """Percentiles of every phase with their intervals: one row per (phase, percentile).

    A percentile or interval end that is infinite (landings that cannot stop) is empty, with
    ``beyond_any_runway`` (or ``ci95_hi_beyond_any_runway``) true.
    """
    import pandas as pd

    from landrisk.studies.assess import PHASES

    du = _du(units)
    u = du.unit("length")

    def conv(x: float | None) -> float:
        return float("nan") if x is None else float(du.length(x))

    rows = []
    for name, label in PHASES.items():
        for p in a.percentiles[name]:
            rows.append({"phase": label, "percentile": p.p, _head("value", u): conv(p.value),
                         _head("ci95_lo", u): conv(p.lo), _head("ci95_hi", u): conv(p.hi),
                         "supported": p.supported, "beyond_any_runway": p.infinite,
                         "ci95_hi_beyond_any_runway": p.hi_infinite})
    return _framed(pd.DataFrame(rows))


#: Output columns of the samples table: result name -> (header name, kind of unit or None).
_SAMPLE_OUTPUTS = {"air_distance_m": ("air_distance", "length"), "free_roll_m": ("free_roll", "length"),
                   "braking_m": ("braking_roll", "length"), "total_m": ("total", "length"),
                   "margin_m": ("margin", "length"),
                   "runway_end_ground_speed": ("runway_end_ground_speed", "speed"),
                   "overrun": ("overrun", None), "cannot_stop": ("cannot_stop", None)}


def samples_columns(names: Sequence[str], x: NDArray[np.float64] | None, y: Mapping[str, NDArray],
                    lda_m: float, units: Units = None) -> dict[str, NDArray]:
    """The columns of the samples table for inputs ``x[m, d]`` (named ``names``) and outputs ``y``.

    ``lda_m``: the scenario's LDA, for landings that cannot stop (infinite distance and margin).
    """
    du = _du(units)
    cols: dict[str, NDArray] = {}
    if x is not None:
        for j, k in enumerate(names):
            spec = KEYS.get(k)
            if spec is not None and spec.kind == "bool":
                cols[k] = x[:, j] != 0
                continue
            kind, sym = du.key_unit(spec.unit if spec is not None else "")
            cols[_head(k, sym)] = du.value(kind, x[:, j]) if kind else x[:, j]
    for k, (head, kind) in _SAMPLE_OUTPUTS.items():
        if kind is None:
            cols[head] = np.asarray(y[k], dtype=bool)
        else:
            cols[_head(head, du.unit(kind))] = du.value(kind, y[k])
    lda = np.asarray(y["total_m"] + y["margin_m"], dtype=float)
    lda = np.where(np.isfinite(lda), lda, lda_m)  # where the distance is infinite, so is the margin
    cols[_head("lda", du.unit("length"))] = du.length(lda)
    return cols


def samples_table(a: Assessment, units: Units = None) -> pd.DataFrame:
    """Every sample's uncertain inputs (if kept) and its phase distances and outcome."""
    import pandas as pd

    return _framed(pd.DataFrame(samples_columns(a.problem.names, a.inputs, a.outputs, a.lda_m, units)))


def rank_table(r: Ranking, units: Units = None) -> pd.DataFrame:
    """One row per input: first-order and total index (with intervals for Monte Carlo) and swings.

    The low and high values are in each input's unit, given in the ``unit`` column.
    """
    import pandas as pd

    du = _du(units)
    u = du.unit("length")
    rows = []
    for i in r.inputs:
        spec = KEYS.get(i.name)
        kind, sym = du.key_unit(spec.unit if spec is not None else "")
        rows.append({"input": i.name, "first_order": i.first, "total": i.total,
                     "first_order_ci95_lo": i.first_ci[0] if i.first_ci else None,
                     "first_order_ci95_hi": i.first_ci[1] if i.first_ci else None,
                     "total_ci95_lo": i.total_ci[0] if i.total_ci else None,
                     "total_ci95_hi": i.total_ci[1] if i.total_ci else None,
                     "low_value": du.value(kind, i.p5) if kind else i.p5,
                     "high_value": du.value(kind, i.p95) if kind else i.p95, "unit": sym,
                     _head("swing_total", u): du.length(i.swing_total_m),
                     _head("swing_margin", u): du.length(i.swing_margin_m), "discrete": i.discrete,
                     "levels": "; ".join(i.levels)})
    return _framed(pd.DataFrame(rows))


def overrun_profile_table(r: Ranking, units: Units = None) -> pd.DataFrame:
    """One row per input: its median before and given an overrun (in the ``unit`` column's unit: the
    key's SI unit, or the system ``units`` asks for), the shift, and the input's first-order index of
    the overrun indicator."""
    import pandas as pd

    cols = ["name", "unit", "prior_median", "overrun_median", "shift", "overrun_first_order",
            "overrun_first_order_ci95_lo", "overrun_first_order_ci95_hi", "note"]
    o = r.overrun
    if o is None:
        return _framed(pd.DataFrame(columns=cols))
    du = _du(units) if units is not None else None
    rows = []
    for p, i in zip(o.profile, o.indices, strict=True):
        unit, prior, given, shift = p.unit, p.prior_median, p.overrun_median, p.shift
        spec = KEYS.get(p.name)
        if du is not None and spec is not None and not p.discrete:
            kind, unit = du.key_unit(spec.unit)
            if kind is not None:
                prior = du.value(kind, p.prior_median)
                if p.overrun_median is not None:
                    given = du.value(kind, p.overrun_median)
                    shift = given - prior  # a difference: no temperature offset
        rows.append({"name": p.name, "unit": unit, "prior_median": prior, "overrun_median": given,
                     "shift": shift, "overrun_first_order": i.first_order,
                     "overrun_first_order_ci95_lo": i.ci[0] if i.ci else None,
                     "overrun_first_order_ci95_hi": i.ci[1] if i.ci else None, "note": i.note})
    return _framed(pd.DataFrame(rows, columns=cols))


def risk_curve_table(r: RareAssessment, units: Units = None) -> pd.DataFrame:
    """P(overrun) against the LDA: subset simulation (mixed over branches) and crude Monte Carlo."""
    import pandas as pd

    du = _du(units)
    lda = _head("lda", du.unit("length"))
    rc = r.risk_curve
    if rc is None:
        return _framed(pd.DataFrame(columns=[lda, "p_overrun_subset", "p_overrun_mc"]))
    return _framed(pd.DataFrame({lda: du.length(rc.lda_m), "p_overrun_subset": rc.p_subset,
                                 "p_overrun_mc": rc.p_mc}))
