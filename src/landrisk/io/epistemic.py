"""Reading epistemic parameters: ``[epistemic."<key>".<parameter>]`` tables of a scenario file.

```toml
[epistemic."runway.braking_mu".mode]     # the mode of braking_mu's distribution is itself uncertain
distribution = "uniform"
lower = 0.28
upper = 0.36
source = "..."

[epistemic."procedure.reaction_time".median]
range = ["1.2 s", "1.8 s"]              # short for a uniform distribution on the range
```

The key must be an uncertain input of the scenario and the parameter one of its distribution's. Values
are in the unit of that parameter: the key's unit for a location (mean, median, mode, lower, upper,
scale, shift), a difference in it for ``sd``, pure numbers for sigma_log, alpha, beta and shape. The
input's distribution must stay valid, and inside the key's allowed range, at both ends of the
parameter's range (at its 0.01 % and 99.99 % quantiles for an unbounded one).
"""

from __future__ import annotations

import math
import tomllib
from typing import Any

import numpy as np

from landrisk.errors import ConfigError
from landrisk.io.uncertain import UncertainSet
from landrisk.model import KEYS
from landrisk.units import UnitError, to_unit
from landrisk.uq import FAMILIES, make_marginal
from landrisk.uq.epistemic import EpistemicParameter

__all__ = ["epistemic_parameters"]

_LOCATION = ("mean", "median", "mode", "lower", "upper", "scale", "shift")
_PURE = ("sigma_log", "alpha", "beta", "shape")
_META = ("distribution", "source", "range")


def _unit(key: str, parameter: str) -> tuple[str, bool]:
    if parameter in _LOCATION:
        return KEYS[key].unit, False
    if parameter == "sd":
        return KEYS[key].unit, True
    return "", False


def epistemic_parameters(text: str, source: str, uncertain: UncertainSet) -> tuple[EpistemicParameter, ...]:
    """The epistemic parameters of the scenario file ``text`` (empty if it has none)."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML ({exc})", file=source) from None
    tables = raw.get("epistemic")
    if tables is None:
        return ()
    if not isinstance(tables, dict):
        raise ConfigError('must be tables [epistemic."<key>".<parameter>]', key="epistemic", file=source)
    inputs = {u.key: u for u in uncertain.inputs}
    out = []
    for key, body in tables.items():
        where = f'epistemic."{key}"'
        if key not in inputs:
            raise ConfigError("is not an uncertain input of the scenario", key=where, file=source,
                              allowed=", ".join(inputs) or "none: add [uncertain.\"<key>\"] tables")
        marginal = inputs[key].marginal
        if not isinstance(body, dict):
            raise ConfigError("must hold tables, one per parameter", key=where, value=body, file=source)
        for parameter, table in body.items():
            out.append(_one(key, parameter, table, marginal, f"{where}.{parameter}", source))
    return tuple(out)


def _one(key: str, parameter: str, table: Any, marginal: Any, where: str, source: str) -> EpistemicParameter:
    takes = [n for n in marginal.params if n not in ("data", "values", "probabilities")]
    if parameter not in takes:
        raise ConfigError(f"is not a parameter of {key}'s {marginal.family} distribution", key=where,
                          file=source, allowed=", ".join(takes))
    if not isinstance(table, dict):
        raise ConfigError("must be a table with a distribution or a range", key=where, value=table,
                          file=source)
    unit, difference = _unit(key, parameter)
    body = dict(table)
    if "range" in body:
        rng = body.pop("range")
        if "distribution" in body or not (isinstance(rng, list) and len(rng) == 2):
            raise ConfigError("range must be [lower, upper] and replaces distribution", key=f"{where}.range",
                              value=rng, file=source)
        body.update({"distribution": "uniform", "lower": rng[0], "upper": rng[1]})
    dist = _distribution(body, unit, difference, where, source)
    _check_ends(key, parameter, marginal, dist, where, source)
    note = body.get("source", "")
    if not isinstance(note, str):
        raise ConfigError("must be text", key=f"{where}.source", value=note, file=source)
    return EpistemicParameter(key, parameter, dist, note)


def _distribution(body: dict[str, Any], unit: str, difference: bool, where: str, source: str) -> Any:
    family = body.get("distribution")
    allowed = [f for f in FAMILIES if f not in ("discrete", "empirical")]
    if family not in allowed:
        raise ConfigError("unknown or missing distribution", key=f"{where}.distribution", value=family,
                          file=source, allowed=", ".join(allowed))
    params = {}
    for name, value in body.items():
        if name in _META:
            continue
        try:
            if name in _PURE:
                params[name] = to_unit(value, "")
            else:
                params[name] = to_unit(value, unit, difference=difference or name == "sd")
        except UnitError as exc:
            raise ConfigError(str(exc), key=f"{where}.{name}", value=value, file=source) from None
    try:
        return make_marginal(str(family), params)
    except ValueError as exc:
        raise ConfigError(str(exc), key=where, file=source) from None


def _check_ends(key: str, parameter: str, marginal: Any, dist: Any, where: str, source: str) -> None:
    ends = [dist.lower, dist.upper]
    if not all(math.isfinite(e) for e in ends):
        ends = [float(v) for v in dist.ppf(np.array([1e-4, 1.0 - 1e-4]))]
    spec = KEYS[key]
    for end in ends:
        try:
            m = make_marginal(marginal.family, {**marginal.params, parameter: end})
        except ValueError as exc:
            raise ConfigError(f"at {parameter} = {end:g} the distribution of {key} is not valid ({exc})",
                              key=where, file=source) from None
        if m.lower < spec.lo or m.upper > spec.hi:
            raise ConfigError(f"at {parameter} = {end:g} the distribution of {key} leaves its allowed range",
                              key=where, file=source, allowed=spec.allowed())
