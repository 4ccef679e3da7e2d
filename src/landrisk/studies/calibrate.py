"""Calibration: fit aircraft parameters to reference landing distances by weighted least squares.

The residual of reference row i is r_i = (S_i(p) - S_ref,i) / sigma_i, S_i the model's total distance
from the screen height under the row's conditions and sigma_i the row's tolerance (1 m when none is
given). ``scipy.optimize.least_squares`` (trust-region reflective, within the bounds) minimises
sum r_i^2. The parameter covariance is the Gauss-Newton one, C = (J^T J)^-1 with J = dr/dp at the
optimum (Seber, G. A. F. & Wild, C. J., *Nonlinear Regression*, Wiley 1989, §2.1 eq. 2.9): with
tolerances it is taken as is (the tolerances are the standard uncertainties); without them it is scaled
by s^2 = sum r_i^2 / (n - p), the residual variance (§2.1, eq. 2.10), as ``scipy.optimize.curve_fit``
does with ``absolute_sigma=False``. J is taken by central differences, all the perturbed parameter
sets in one vectorised solver call.

Identifiability (Seber & Wild 1989, §3.4 on ill-conditioning): a warning names every pair of
parameters whose estimated correlation exceeds 0.95 in magnitude, and every flat direction of the
least-squares surface: a singular value of J, with its columns scaled by each parameter's bound range,
below 1e-6 of the largest (common practice, no source, for the threshold). Along a flat direction the
data do not fix the parameters; their standard errors are then not reported.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import NDArray
from scipy.optimize import least_squares

from landrisk.errors import LandriskError
from landrisk.model import Scenario, case_from_values, solve_landings
from landrisk.physics import friction_from_condition_code

__all__ = [
    "CODE_MU_PREFIX",
    "CORRELATION_LIMIT",
    "FLAT_LIMIT",
    "SCALE_KEYS",
    "Calibration",
    "FitParameter",
    "FittedParameter",
    "calibrate",
    "reference_model",
]

#: |correlation| above which two fitted parameters are reported as confounded.
CORRELATION_LIMIT = 0.95
#: Relative singular value of the range-scaled Jacobian below which a direction is reported as flat.
FLAT_LIMIT = 1e-6
#: Factors on a thrust law: pseudo-key -> the three scenario coefficients it multiplies.
SCALE_KEYS = {
    "aircraft.thrust.reverse.scale": ("aircraft.thrust.reverse.t0", "aircraft.thrust.reverse.t1",
                                      "aircraft.thrust.reverse.t2"),
    "aircraft.thrust.idle.scale": ("aircraft.thrust.idle.t0", "aircraft.thrust.idle.t1",
                                   "aircraft.thrust.idle.t2"),
}
#: ``runway.braking_mu.code_N``: an effective braking mu for the reference rows with condition code N.
CODE_MU_PREFIX = "runway.braking_mu.code_"
#: Distance [m] put in place of a landing the model cannot finish while the optimiser explores.
_FAILED_M = 1e5

Array = NDArray[np.float64]


@dataclass(frozen=True)
class FitParameter:
    """A parameter to fit: a scenario key (or a pseudo-key above), bounds and start in its unit."""

    name: str
    lower: float
    upper: float
    start: float
    unit: str = ""


@dataclass(frozen=True)
class FittedParameter:
    """A fitted value with its standard error (None where a flat direction leaves it undetermined)."""

    name: str
    unit: str
    value: float
    standard_error: float | None
    start: float
    lower: float
    upper: float
    at_bound: bool


@dataclass(frozen=True)
class Calibration:
    """The result of :func:`calibrate`. Distances in metres."""

    scenario: Scenario
    parameters: tuple[FittedParameter, ...]
    covariance: Array
    correlation: Array
    conditions: dict[str, NDArray[Any]] = field(repr=False)
    reference_m: Array = field(repr=False)
    model_m: Array = field(repr=False)
    start_model_m: Array = field(repr=False)
    sigma_m: Array = field(repr=False)
    lines: tuple[int, ...]
    reference_source: str
    sigma_from: str  # "tolerance" (given per row) or "residuals" (estimated from the fit)
    residual_sd: float  # s = sqrt(sum r^2 / (n - p)), in units of sigma
    warnings: tuple[str, ...]
    solver_calls: int
    optimizer_message: str

    @property
    def residual_m(self) -> Array:
        """Model minus reference [m], per row."""
        return self.model_m - self.reference_m

    @property
    def values(self) -> dict[str, float]:
        """Fitted value of every parameter, by name."""
        return {p.name: p.value for p in self.parameters}

    def scenario_values(self) -> dict[str, Any]:
        """The scenario keys that the fit changes, with their calibrated values (a thrust scale as the
        scaled coefficients; per-code braking mu values are not scenario keys and are left out)."""
        out: dict[str, Any] = {}
        for p in self.parameters:
            if p.name in SCALE_KEYS:
                for key in SCALE_KEYS[p.name]:
                    out[key] = float(self.scenario.values[key]) * p.value
            elif not p.name.startswith(CODE_MU_PREFIX):
                out[p.name] = p.value
        return out


def reference_model(
    scenario: Scenario, names: Sequence[str], conditions: Mapping[str, NDArray[Any]], n: int
) -> Any:
    """The model distances S(theta) [K, n] [m] of the ``n`` reference rows for K parameter sets
    theta[K, p] (columns in the order of ``names``), in one solver call of K n landings.

    ``conditions`` are the rows' scenario keys (arrays of n in the keys' units); the other keys keep the
    scenario's values. Friction: rows under a condition code take the code's coefficients, with the
    braking mu replaced by ``runway.braking_mu.code_N`` where that is a parameter; rows without a code
    take the scenario's (or the fitted) ``runway.braking_mu``.
    """
    base = scenario.scalar_values()
    cols = dict(conditions)
    if "runway.braking_mu" in cols or "runway.rolling_mu" in cols:
        base["runway.condition_code"] = None
    if "runway.condition_code" in cols:
        base["runway.braking_mu"] = base["runway.rolling_mu"] = None
    code_params = {int(nm[len(CODE_MU_PREFIX):]): j for j, nm in enumerate(names)
                   if nm.startswith(CODE_MU_PREFIX)}

    def distances(theta: Array) -> Array:
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        k = theta.shape[0]
        values: dict[str, Any] = dict(base)
        values.update({key: np.tile(np.asarray(col), k) for key, col in cols.items()})
        for j, name in enumerate(names):
            per_row = np.repeat(theta[:, j], n)
            if name in SCALE_KEYS:
                for key in SCALE_KEYS[name]:
                    values[key] = np.asarray(values[key], dtype=float) * per_row
            elif not name.startswith(CODE_MU_PREFIX):
                values[name] = per_row
        code = values.get("runway.condition_code")
        if code is not None:
            code_rows = np.broadcast_to(np.asarray(code), (k * n,))
            rolling, braking = friction_from_condition_code(code_rows)
            braking = braking.copy()
            for c, j in code_params.items():
                braking = np.where(code_rows == c, np.repeat(theta[:, j], n), braking)
            values.update({"runway.condition_code": None, "runway.rolling_mu": rolling,
                           "runway.braking_mu": braking})
        try:
            result = solve_landings(case_from_values(values))
        except ValueError as exc:
            raise LandriskError(f"{scenario.source}: a reference row the model cannot evaluate "
                                f"({exc})") from None
        total = np.where(result.lift_exceeds_weight | result.cannot_stop, np.inf, result.total_m)
        return total.reshape(k, n)

    return distances


def _steps(x: Array, lower: Array, upper: Array) -> tuple[Array, Array]:
    """Central-difference points x +- h inside the bounds (one-sided at a bound)."""
    h = 1e-5 * (upper - lower)
    hi = np.minimum(x + h, upper)
    lo = np.maximum(x - h, lower)
    return lo, hi


def calibrate(
    scenario: Scenario,
    parameters: Sequence[FitParameter],
    conditions: Mapping[str, NDArray[Any]],
    reference_m: Array,
    tolerance_m: Array | None = None,
    *,
    lines: Sequence[int] | None = None,
    reference_source: str = "<reference>",
) -> Calibration:
    """Fit ``parameters`` to the reference distances (see the module docstring).

    Parameters
    ----------
    scenario : Scenario
        The scenario whose other values hold for every reference row.
    parameters : sequence of FitParameter
        What to fit, with bounds and starting values in the keys' units.
    conditions : mapping
        Scenario key -> array over the reference rows (the rows' conditions, in the keys' units).
    reference_m : array
        Reference total distance from the screen height of each row [m].
    tolerance_m : array, optional
        Standard uncertainty of each reference distance [m] (weights 1/tolerance^2).
    """
    names = [p.name for p in parameters]
    ref = np.asarray(reference_m, dtype=float)
    n, d = ref.size, len(parameters)
    if d == 0:
        raise LandriskError(f"{scenario.source}: no parameters to calibrate")
    if n <= d:
        raise LandriskError(f"{reference_source}: {n} reference rows cannot fix {d} parameters; "
                            "give more rows")
    sigma = np.ones(n) if tolerance_m is None else np.asarray(tolerance_m, dtype=float)
    lower = np.array([p.lower for p in parameters])
    upper = np.array([p.upper for p in parameters])
    start = np.array([p.start for p in parameters])
    model = reference_model(scenario, names, conditions, n)
    calls = [0]

    def run(theta: Array) -> Array:
        calls[0] += theta.shape[0] * n
        return model(theta)

    start_m = run(start[None, :])[0]
    if not np.all(np.isfinite(start_m)):
        bad = int(np.flatnonzero(~np.isfinite(start_m))[0])
        row = lines[bad] if lines is not None else bad + 1
        raise LandriskError(f"{reference_source}: row {row}: the landing cannot be finished at the starting "
                            "values (lift above weight or no deceleration); change the start or the row")

    def residuals(x: Array) -> Array:
        s = run(x[None, :])[0]
        return np.where(np.isfinite(s), s - ref, _FAILED_M) / sigma

    def jacobian(x: Array) -> Array:
        lo, hi = _steps(x, lower, upper)
        pts = np.repeat(x[None, :], 2 * d, axis=0)
        pts[np.arange(d), np.arange(d)] = hi
        pts[d + np.arange(d), np.arange(d)] = lo
        s = run(pts)
        s = np.where(np.isfinite(s), s, _FAILED_M)
        return ((s[:d] - s[d:]) / (hi - lo)[:, None]).T / sigma[:, None]

    fit = least_squares(residuals, start, jac=jacobian, bounds=(lower, upper), x_scale=upper - lower,
                        method="trf", xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=200)
    x = fit.x
    final_m = run(x[None, :])[0]
    jac = jacobian(x)
    r = (final_m - ref) / sigma
    dof = n - d
    s2 = float(r @ r) / dof
    cov, flat = _covariance(jac, upper - lower)
    if tolerance_m is None:
        cov = cov * s2
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    undetermined = np.zeros(d, dtype=bool)
    notes: list[str] = []
    for direction in flat:
        involved = np.abs(direction) > 0.1
        undetermined |= involved
        listed = ", ".join(f"{names[j]} ({direction[j]:+.2f})" for j in np.flatnonzero(involved))
        notes.append(f"flat direction: the reference distances do not fix the combination {listed}; "
                     "its standard errors are not reported (add rows that vary the conditions these act on)")
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(se, se)
    corr = np.where(np.outer(se, se) > 0, corr, 0.0)
    np.fill_diagonal(corr, 1.0)
    for i in range(d):
        for j in range(i + 1, d):
            if abs(corr[i, j]) > CORRELATION_LIMIT and not (undetermined[i] and undetermined[j]):
                notes.append(f"confounded: {names[i]} and {names[j]} have correlation {corr[i, j]:+.3f} "
                             f"(above {CORRELATION_LIMIT} in magnitude); the data fix their combination, "
                             "not each one")
    at_bound = (np.isclose(x, lower, rtol=0, atol=1e-9 * (upper - lower))
                | np.isclose(x, upper, rtol=0, atol=1e-9 * (upper - lower)))
    for jb in np.flatnonzero(at_bound).tolist():
        notes.append(f"{names[jb]} = {x[jb]:.6g} is at a bound of its range [{lower[jb]:g}, "
                     f"{upper[jb]:g}]; the fit is limited by that bound and its standard error is a "
                     "local figure only")
    if not fit.success:
        notes.append(f"the optimiser stopped without converging: {fit.message}")
    fitted = tuple(
        FittedParameter(p.name, p.unit, float(x[j]), None if undetermined[j] else float(se[j]), p.start,
                        p.lower, p.upper, bool(at_bound[j]))
        for j, p in enumerate(parameters)
    )
    return Calibration(
        scenario=scenario,
        parameters=fitted,
        covariance=cov,
        correlation=corr,
        conditions={k: np.asarray(v) for k, v in conditions.items()},
        reference_m=ref,
        model_m=final_m,
        start_model_m=start_m,
        sigma_m=sigma,
        lines=tuple(lines) if lines is not None else tuple(range(1, n + 1)),
        reference_source=reference_source,
        sigma_from="residuals" if tolerance_m is None else "tolerance",
        residual_sd=float(np.sqrt(s2)),
        warnings=tuple(notes),
        solver_calls=calls[0],
        optimizer_message=str(fit.message),
    )


def _covariance(jac: Array, ranges: Array) -> tuple[Array, list[Array]]:
    """(J^T J)^-1 by the singular value decomposition of J with range-scaled columns, and the flat
    directions (unit vectors in the scaled parameters) whose singular values fall below FLAT_LIMIT."""
    js = jac * ranges[None, :]
    _, s, vt = np.linalg.svd(js, full_matrices=False)
    flat_mask = s <= FLAT_LIMIT * s[0] if s[0] > 0 else np.ones_like(s, dtype=bool)
    inv = np.where(flat_mask, 0.0, 1.0 / np.where(flat_mask, 1.0, s) ** 2)
    cov_scaled = (vt.T * inv) @ vt
    cov = cov_scaled * np.outer(ranges, ranges)
    return cov, [vt[i] for i in np.flatnonzero(flat_mask)]
