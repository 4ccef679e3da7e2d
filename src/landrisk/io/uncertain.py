"""Reading the uncertain inputs of a scenario: ``[uncertain."<key>"]`` and ``[[correlation]]`` tables.

```toml
[uncertain."procedure.reaction_time"]
distribution = "lognormal"          # normal, truncnormal, lognormal, uniform, triangular, beta,
median = "1.5 s"                    # weibull, discrete, empirical
sigma_log = 0.35
upper = "6 s"                       # optional truncation of any continuous family
source = "common practice, no source: 1-3 s"   # where the shape and numbers come from

[[correlation]]
between = ["procedure.touchdown_distance", "procedure.touchdown_speed_ratio"]
spearman = 0.3
```

Location parameters (mean, median, mode, lower, upper, scale, shift, values) and the spread ``sd`` of a
key with a unit are quantities written with a unit (``"6 kt"``; a bare number is refused); for a pure key
they are bare numbers. sigma_log, alpha, beta, shape and probabilities are always pure numbers. An
empirical distribution reads ``column`` of the CSV ``file`` (relative to the scenario file); for a key
with a unit, ``unit`` names the unit of the column's numbers (required). Every cell of the column must be
a finite number.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from landrisk.errors import ConfigError
from landrisk.model import KEYS, Key
from landrisk.model.schema import conflicting_forms
from landrisk.units import BareNumberError, UnitError, convert_array, shown_unit, to_unit
from landrisk.uq import FAMILIES, Marginal, Problem, make_marginal

__all__ = ["UncertainInput", "UncertainSet", "parse_uncertain"]

_LOCATION = ("mean", "median", "mode", "lower", "upper", "scale", "shift")
_SPREAD = ("sd",)
_PURE = ("sigma_log", "alpha", "beta", "shape", "pareto_tail_above")
_META = ("distribution", "source", "file", "column", "unit")


@dataclass(frozen=True)
class UncertainInput:
    """One uncertain scenario key: its distribution, its source note and the table as written."""

    key: str
    marginal: Marginal
    source: str
    written: Mapping[str, Any]


@dataclass(frozen=True)
class UncertainSet:
    """The uncertain inputs of a scenario and their rank correlations."""

    inputs: tuple[UncertainInput, ...] = ()
    spearman: np.ndarray | None = None
    correlations: tuple[Mapping[str, Any], ...] = field(default_factory=tuple)
    fixed: tuple[str, ...] = ()  # keys whose distribution an override replaced by a fixed value

    @property
    def keys(self) -> tuple[str, ...]:
        return tuple(u.key for u in self.inputs)

    def problem(self) -> Problem:
        """The uq Problem (names = dotted keys, marginals, Spearman matrix)."""
        return Problem(self.keys, tuple(u.marginal for u in self.inputs), self.spearman)

    def without(self, keys: set[str]) -> UncertainSet:
        """The same set without ``keys`` (and without correlations that involve them)."""
        keep = [u for u in self.inputs if u.key not in keys]
        corr = tuple(c for c in self.correlations if not set(c["between"]) & keys)
        out = _with_correlations(tuple(keep), corr)
        return UncertainSet(out.inputs, out.spearman, out.correlations, tuple(sorted(set(self.fixed) | keys)))

    def record(self) -> dict[str, Any]:
        """A JSON-ready description for output files."""
        return {
            "inputs": {u.key: {"distribution": u.marginal.describe(), "source": u.source,
                               "written": dict(u.written)} for u in self.inputs},
            "correlations": [dict(c) for c in self.correlations],
            "fixed_by_override": list(self.fixed),
        }


def _with_correlations(
    inputs: tuple[UncertainInput, ...], corr: tuple[Mapping[str, Any], ...]
) -> UncertainSet:
    if not corr:
        return UncertainSet(inputs, None, ())
    index = {u.key: i for i, u in enumerate(inputs)}
    r = np.eye(len(inputs))
    for c in corr:
        i, j = (index[k] for k in c["between"])
        r[i, j] = r[j, i] = c["spearman"]
    return UncertainSet(inputs, r, corr)


def parse_uncertain(
    tables: Any,
    correlation: Any,
    values: Mapping[str, Any],
    base_dir: Path | None,
    given: set[str] | None = None,
) -> UncertainSet:
    """Check the ``uncertain`` tables and ``correlation`` list against the scenario ``values``.

    ``given`` names the keys the file gives a value for (default: those whose value is not None).
    """
    if tables is None and correlation is None:
        return UncertainSet()
    if tables is not None and not isinstance(tables, dict):
        raise ConfigError('must be tables [uncertain."<key>"]', key="uncertain", value=tables)
    inputs = []
    for key, body in (tables or {}).items():
        spec = KEYS.get(key)
        if spec is None or not spec.scalar:
            raise ConfigError("is not a scalar key of the scenario", key=f'uncertain."{key}"',
                              allowed="a numeric key such as runway.braking_mu")
        if not isinstance(body, dict):
            raise ConfigError("must be a table", key=f'uncertain."{key}"', value=body)
        inputs.append(_one(spec, body, base_dir))
    if given is None:
        given = {k for k, v in values.items() if v is not None}
    _check_exclusive({u.key for u in inputs}, given)
    corr = _correlations(correlation, {u.key for u in inputs})
    try:
        result = _with_correlations(tuple(inputs), corr)
        result.problem()  # checks that the matrix is a valid correlation matrix
    except ValueError as exc:
        raise ConfigError(str(exc), key="correlation") from None
    return result


def _one(spec: Key, body: dict[str, Any], base_dir: Path | None) -> UncertainInput:
    where = f'uncertain."{spec.name}"'
    family = body.get("distribution")
    if family not in FAMILIES:
        raise ConfigError("unknown or missing distribution", key=f"{where}.distribution", value=family,
                          allowed=", ".join(FAMILIES))
    if spec.kind in ("int", "bool") and family != "discrete":
        raise ConfigError(f"{spec.name} takes whole values: use distribution = \"discrete\"",
                          key=f"{where}.distribution", value=family)
    params: dict[str, Any] = {}
    for name, raw in body.items():
        if name in _META:
            continue
        try:
            params[name] = _param(spec, family, name, raw)
        except BareNumberError as exc:
            raise ConfigError(str(exc), key=f"{where}.{name}", value=raw) from None
        except UnitError as exc:
            allowed = spec.allowed() if name in _LOCATION or name == "values" else None
            raise ConfigError(str(exc), key=f"{where}.{name}", value=raw, allowed=allowed) from None
    if family == "empirical":
        params["data"] = _read_column(spec, body, base_dir, where)
    elif {"file", "column"} & set(body):
        raise ConfigError("file and column belong to an empirical distribution", key=where)
    try:
        marginal = make_marginal(family, params)
    except ValueError as exc:
        shown = {k: v for k, v in body.items() if k != "source"}
        raise ConfigError(str(exc), key=where, value=shown) from None
    _check_support(spec, marginal, where)
    source = body.get("source", "")
    if not isinstance(source, str):
        raise ConfigError("must be text", key=f"{where}.source", value=source)
    return UncertainInput(spec.name, marginal, source, {k: v for k, v in body.items()})


def _param(spec: Key, family: str, name: str, raw: Any) -> Any:
    if name == "values":
        if not isinstance(raw, list) or not raw:
            raise UnitError("must be a list of values")
        if spec.kind == "bool":
            if not all(isinstance(v, bool) for v in raw):
                raise UnitError("must be a list of true/false")
            return [float(v) for v in raw]
        if spec.kind == "int":
            if not all(isinstance(v, int) and not isinstance(v, bool) for v in raw):
                raise UnitError("must be a list of whole numbers")
            return [float(v) for v in raw]
        out = []
        for i, v in enumerate(raw):
            try:
                out.append(_quantity(spec, v))
            except UnitError as exc:
                raise type(exc)(f"value {i + 1}: {exc}") from None
        return out
    if name == "probabilities":
        if not isinstance(raw, list) or not all(isinstance(v, int | float) and not isinstance(v, bool)
                                                for v in raw):
            raise UnitError("must be a list of numbers")
        return [float(v) for v in raw]
    if name in _LOCATION:
        return _quantity(spec, raw)
    if name in _SPREAD:
        return to_unit(raw, spec.unit, difference=True)
    if name in _PURE:
        return to_unit(raw, "")
    raise UnitError(f"{family} takes no parameter {name!r} (it takes "
                    f"{', '.join(FAMILIES[family][0] + FAMILIES[family][1])})")


def _quantity(spec: Key, raw: Any) -> float:
    return to_unit(raw, spec.unit, difference=spec.name == "conditions.isa_deviation")


#: The largest CSV file an empirical input reads (bytes).
MAX_CSV_BYTES = 64 << 20


def _read_column(spec: Key, body: dict[str, Any], base_dir: Path | None, where: str) -> list[float]:
    """The numbers of ``column`` in the CSV ``file``, converted from ``unit`` to the key's unit.

    Messages name the file, the column and line numbers, never the file's contents (the file may be
    anything the user pointed at).
    """
    import io

    import pandas as pd

    file, column = body.get("file"), body.get("column")
    if not isinstance(file, str) or not isinstance(column, str):
        raise ConfigError("an empirical distribution needs file and column (text)", key=where)
    unit = body.get("unit")
    if unit is None and spec.unit:
        raise ConfigError(f"an empirical column of {spec.name} needs the unit of its numbers, e.g. "
                          f'unit = "{shown_unit(spec.unit)}"', key=f"{where}.unit")
    if unit is not None:
        try:
            convert_array([], unit, spec.unit, difference=spec.name == "conditions.isa_deviation")
        except UnitError as exc:
            raise ConfigError(str(exc), key=f"{where}.unit", value=unit,
                              allowed=f"a unit of the kind of {shown_unit(spec.unit) or 'a pure number'}") \
                from None
    path = Path(file) if Path(file).is_absolute() or base_dir is None else base_dir / file
    text = _csv_text(path, f"{where}.file")
    try:
        frame = pd.read_csv(io.StringIO(text), comment="#", dtype=str, keep_default_na=False)
    except Exception as exc:  # pandas raises many kinds; their messages may quote the file
        line = re.search(r"fields in line ([0-9]+)", str(exc))
        reason = f"line {line.group(1)} has more fields than the header" if line else type(exc).__name__
        raise ConfigError(f"cannot read it as a CSV table ({reason})", key=f"{where}.file",
                          value=str(path)) from None
    if column not in frame.columns:
        raise ConfigError(f"no such column (the file has {len(frame.columns)} columns)",
                          key=f"{where}.column", value=column)
    cells = frame[column]
    if isinstance(cells, pd.DataFrame):
        raise ConfigError("the file has more than one column of that name", key=f"{where}.column",
                          value=column)
    numbers = pd.to_numeric(cells.str.strip(), errors="coerce").to_numpy(dtype=float)
    bad = ~np.isfinite(numbers)
    if bad.any():
        first = int(np.flatnonzero(bad)[0])
        raise ConfigError(f"{int(bad.sum())} of {bad.size} cells are empty or not finite numbers (the first "
                          f"on {_line_of(text, first, len(frame))})", key=f"{where}.column", value=column)
    if numbers.size < 2:
        raise ConfigError("the column holds fewer than two numbers", key=f"{where}.column", value=column)
    if unit is None:
        return [float(x) for x in numbers]
    data = convert_array(numbers, unit, spec.unit, difference=spec.name == "conditions.isa_deviation")
    if not np.all(np.isfinite(data)):
        raise ConfigError(f"some numbers are too large in {shown_unit(spec.unit)}", key=f"{where}.column",
                          value=column)
    return [float(x) for x in data]


def _csv_text(path: Path, key: str) -> str:
    try:
        if not path.is_file():
            reason = "no such file" if not path.exists() else "is not a regular file"
            raise ConfigError(reason, key=key, value=str(path))
        if path.stat().st_size > MAX_CSV_BYTES:
            raise ConfigError(f"the file is larger than {MAX_CSV_BYTES >> 20} MiB", key=key, value=str(path))
        data = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"cannot read the file ({exc.strerror or type(exc).__name__})", key=key,
                          value=str(path)) from None
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ConfigError("is not UTF-8 text", key=key, value=str(path)) from None


def _line_of(text: str, row: int, rows: int) -> str:
    """The line of the file that holds data row ``row`` (0-based), skipping comment and blank lines."""
    lines = [i + 1 for i, line in enumerate(text.splitlines()) if line.split("#", 1)[0].strip()]
    if len(lines) == rows + 1:  # header + one line per row: the mapping is exact
        return f"line {lines[row + 1]}"
    return f"data row {row + 1}"


def _check_support(spec: Key, m: Marginal, where: str) -> None:
    """The distribution must stay inside the key's allowed range (truncate it if it does not)."""
    if m.discrete:
        bad = [v for v in m.choices()[0] if not spec.contains(float(v))]
        if bad:
            raise ConfigError(f"value {bad[0]:g} is outside the allowed range of {spec.name}", key=where,
                              allowed=spec.allowed())
        return
    lo_ok = m.lower > spec.lo or (m.lower == spec.lo and not spec.lo_open)
    hi_ok = m.upper < spec.hi or (m.upper == spec.hi and not spec.hi_open)
    if not (lo_ok and hi_ok) or math.isnan(m.lower) or math.isnan(m.upper):
        raise ConfigError(
            f"the {m.family} distribution reaches [{m.lower:g}, {m.upper:g}] {spec.unit}, outside the "
            f"allowed range of {spec.name}; truncate it with lower and upper", key=where,
            allowed=spec.allowed())


def _check_exclusive(uncertain: set[str], given: set[str]) -> None:
    """An uncertain key must not sit beside a key of the other form of its alternative (schema)."""
    clash = conflicting_forms(uncertain | given)
    if clash is None or not ({clash[1], clash[2]} & uncertain):
        return  # no clash, or one between fixed values only (the scenario reader reports that)
    alt, first, second = clash
    key = first if first in uncertain else second
    other = second if key == first else first
    raise ConfigError(f"{alt.what} is given both by {first} and by {second}; remove {other}",
                      key=f'uncertain."{key}"', allowed=" or ".join(", ".join(f) for f in alt.forms))


def _correlations(raw: Any, uncertain: set[str]) -> tuple[dict[str, Any], ...]:
    if raw is None:
        return ()
    if not isinstance(raw, list) or not all(isinstance(c, dict) for c in raw):
        raise ConfigError("must be [[correlation]] tables with between = [key, key] and spearman",
                          key="correlation", value=raw)
    seen: set[frozenset[str]] = set()
    out = []
    for c in raw:
        unknown = set(c) - {"between", "spearman", "source"}
        if unknown:
            raise ConfigError("unknown key", key=f"correlation.{sorted(unknown)[0]}",
                              allowed="between, spearman, source")
        pair, rho = c.get("between"), c.get("spearman")
        if not (isinstance(pair, list) and len(pair) == 2 and all(isinstance(k, str) for k in pair)):
            raise ConfigError("must name two uncertain inputs", key="correlation.between", value=pair)
        for k in pair:
            if k not in uncertain:
                raise ConfigError("is not an uncertain input", key="correlation.between", value=k)
        if pair[0] == pair[1] or frozenset(pair) in seen:
            raise ConfigError("names a pair twice or an input with itself", key="correlation.between",
                              value=pair)
        if isinstance(rho, bool) or not isinstance(rho, int | float) or not -1 < rho < 1:
            raise ConfigError("must be a number in (-1, 1)", key="correlation.spearman", value=rho,
                              allowed="(-1, 1)")
        seen.add(frozenset(pair))
        out.append({"between": list(pair), "spearman": float(rho), "source": c.get("source", "")})
    return tuple(out)
