"""Reading a scenario file (TOML) into a checked :class:`~landrisk.model.Scenario`.

Every problem is a :class:`~landrisk.errors.ConfigError` that names the file, the key, the value as
written and what is allowed. Inputs that are accepted but outside common practice raise a
:class:`~landrisk.errors.LandriskWarning`.
"""

from __future__ import annotations

import difflib
import tomllib
import warnings
from collections.abc import Iterable, Mapping
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np

from landrisk.errors import ConfigError, LandriskWarning
from landrisk.io.uncertain import UncertainSet, parse_uncertain
from landrisk.model import KEYS, Key, Scenario
from landrisk.model.schema import conflicting_forms, replaced_by
from landrisk.physics import isa_density, isa_pressure_altitude, stall_speed
from landrisk.units import UnitError, has_dimension, to_unit

__all__ = [
    "DEMO_SOURCE",
    "demo_text",
    "load_scenario",
    "load_study",
    "parse_scenario",
    "parse_set",
    "parse_study",
]

DEMO_SOURCE = "<demo>"
#: Touchdown speed ratios below this are accepted with a warning (common practice, no source: civil
#: aircraft touch down at about 1.15 V_S or more).
TOUCHDOWN_RATIO_PRACTICE = 1.15

_SECTIONS = ("scenario", "aircraft", "conditions", "runway", "procedure")
_THRUST_SETTINGS = ("idle", "reverse")


def demo_text() -> str:
    """The embedded demo scenario file (an invented aircraft and runway)."""
    return resources.files("landrisk").joinpath("data/demo.toml").read_text(encoding="utf-8")


def load_scenario(path: str | Path | None = None, overrides: Iterable[str] = ()) -> Scenario:
    """Read, override and check a scenario.

    Parameters
    ----------
    path : str or Path, optional
        The scenario file; ``None`` for the embedded demo scenario.
    overrides : iterable of str
        ``KEY=VALUE`` assignments (``runway.lda="6500 ft"``), VALUE written as in the file.
    """
    return load_study(path, overrides)[0]


def parse_scenario(text: str, source: str = "<text>", overrides: Iterable[str] = ()) -> Scenario:
    """Check the TOML ``text`` of a scenario (with ``--set`` overrides) and build the Scenario."""
    return parse_study(text, source, overrides)[0]


def load_study(
    path: str | Path | None = None, overrides: Iterable[str] = ()
) -> tuple[Scenario, UncertainSet]:
    """Read a scenario and its uncertain inputs (``None``: the embedded demo)."""
    if path is None:
        return parse_study(demo_text(), DEMO_SOURCE, overrides)
    p = Path(path)
    return parse_study(_read(p), str(p), overrides, base_dir=p.parent)


def parse_study(
    text: str, source: str = "<text>", overrides: Iterable[str] = (), base_dir: Path | None = None,
    assign: Mapping[tuple[str, ...], Any] | None = None,
) -> tuple[Scenario, UncertainSet]:
    """The Scenario and its UncertainSet from TOML ``text``.

    ``--set`` on an uncertain key fixes it at the value given: its distribution is dropped and the key
    is listed in ``UncertainSet.fixed``. ``assign`` sets values of the parsed file before it is checked:
    a path of table names -> value, e.g. ``("uncertain", "runway.braking_mu", "mode") -> 0.25``.
    """
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML ({exc})", file=source) from None
    for path, value in (assign or {}).items():
        try:
            _assign_path(raw, path, value)
        except ConfigError as exc:
            raise exc.with_file(source) from None
    overrides = tuple(overrides)
    fixed = set()
    for item in overrides:
        key, value = parse_set(item)
        for other in replaced_by(key):  # an override of one form replaces the other form
            raw.get(other.split(".")[0], {}).pop(other.split(".")[1], None)
        _assign(raw, key, value)
        fixed.add(key)
    origin = {key: "--set" for key in fixed}
    tables, correlation = raw.pop("uncertain", None), raw.pop("correlation", None)
    try:
        values, flat = _values(raw, source, origin, optional=set(tables or {}))
        given = {k for k in flat if k in KEYS}
        uncertain = parse_uncertain(tables, correlation, values, base_dir, given=given)
        dropped = fixed & set(uncertain.keys)
        if dropped:
            uncertain = uncertain.without(dropped)
        for u in uncertain.inputs:  # a required key given only as a distribution: its median
            if values[u.key] is None and KEYS[u.key].required:
                values[u.key] = KEYS[u.key].cast(float(u.marginal.ppf(0.5)))
        _check_together(values, flat)
    except ConfigError as exc:
        raise exc.with_file(source) from None
    return Scenario(values=values, source=source, text=text, overrides=overrides), uncertain


def _read(p: Path) -> str:
    try:
        return p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ConfigError("no such file", file=str(p)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"cannot read the file ({exc})", file=str(p)) from None


def parse_set(item: str) -> tuple[str, Any]:
    """Split ``KEY=VALUE`` and read VALUE as a TOML value (bare text is taken as a string)."""
    key, sep, value = item.partition("=")
    key = key.strip()
    if not sep or not key:
        raise ConfigError("expected KEY=VALUE", value=item, file="--set")
    settable = [k for k, spec in KEYS.items() if spec.scalar or spec.kind == "str"]
    if key not in KEYS:
        raise ConfigError("unknown key" + _suggest(key, settable), key=key, value=value, file="--set")
    try:
        parsed = tomllib.loads(f"v = {value}")["v"]
    except tomllib.TOMLDecodeError:
        parsed = value.strip()  # e.g. --set runway.lda="6500 ft" after the shell removed the quotes
    return key, parsed


def _assign(raw: dict[str, Any], dotted: str, value: Any) -> None:
    parts = dotted.split(".")
    node = raw
    for p in parts[:-1]:
        child = node.setdefault(p, {})
        if not isinstance(child, dict):
            raise ConfigError("is not a table", key=p, value=child)
        node = child
    node[parts[-1]] = value


def _assign_path(raw: dict[str, Any], path: tuple[str, ...], value: Any) -> None:
    node = raw
    for p in path[:-1]:
        child = node.setdefault(p, {})
        if not isinstance(child, dict):
            raise ConfigError("is not a table", key=".".join(path), value=child)
        node = child
    node[path[-1]] = value


def _suggest(name: str, choices: Iterable[str]) -> str:
    close = difflib.get_close_matches(name, list(choices), n=1)
    return f"; did you mean {close[0]!r}?" if close else ""


def _flatten(raw: Mapping[str, Any]) -> dict[str, Any]:
    """Dotted key -> value, refusing unknown sections and keys; thrust tables kept whole."""
    flat: dict[str, Any] = {}
    for section, body in raw.items():
        if section not in _SECTIONS:
            raise ConfigError("unknown section" + _suggest(section, _SECTIONS), key=section,
                              allowed=", ".join(_SECTIONS))
        if not isinstance(body, dict):
            raise ConfigError("must be a table ([section])", key=section, value=body)
        for name, value in body.items():
            dotted = f"{section}.{name}"
            if dotted == "aircraft.thrust":
                flat.update(_flatten_thrust(value))
                continue
            if dotted not in KEYS:
                allowed = [k for k in KEYS if k.startswith(section + ".")]
                raise ConfigError("unknown key" + _suggest(dotted, allowed), key=dotted, value=value)
            flat[dotted] = value
    return flat


def _flatten_thrust(table: Any) -> dict[str, Any]:
    if not isinstance(table, dict):
        raise ConfigError("must be a table with [aircraft.thrust.idle] and [aircraft.thrust.reverse]",
                          key="aircraft.thrust", value=table)
    flat: dict[str, Any] = {}
    for setting, body in table.items():
        key = f"aircraft.thrust.{setting}"
        if setting not in _THRUST_SETTINGS:
            raise ConfigError("unknown thrust setting" + _suggest(setting, _THRUST_SETTINGS), key=key,
                              allowed=", ".join(_THRUST_SETTINGS))
        if not isinstance(body, dict):
            raise ConfigError("must be a table", key=key, value=body)
        coeffs = {n: body[n] for n in ("t0", "t1", "t2") if n in body}
        unknown = set(body) - {"t0", "t1", "t2", "points"}
        if unknown:
            name = sorted(unknown)[0]
            raise ConfigError("unknown key", key=f"{key}.{name}", value=body[name],
                              allowed="t0, t1, t2 or points")
        if "points" in body:
            if coeffs:
                raise ConfigError("give either the coefficients t0, t1, t2 or points, not both", key=key)
            coeffs = _fit_points(body["points"], f"{key}.points")
        else:
            for n, v in coeffs.items():
                spec = KEYS[f"{key}.{n}"]
                coeffs[n] = _quantity(spec, v)
        flat[f"{key}.__given__"] = True
        for n, v in coeffs.items():
            flat[f"{key}.{n}"] = v
    return flat


def _fit_points(points: Any, key: str) -> dict[str, float]:
    """Least-squares fit of T = t0 + t1 V + t2 V^2 through [[V, T], ...] (degree below 2 for < 3 points)."""
    if not isinstance(points, list) or not points or not all(
        isinstance(p, list) and len(p) == 2 for p in points
    ):
        raise ConfigError("must be a list of [speed, thrust] pairs", key=key, value=points,
                          allowed='e.g. [["0 kt", "-60 kN"], ["100 kt", "-70 kN"]]')
    try:
        v = np.array([to_unit(p[0], "m/s") for p in points])
        t = np.array([to_unit(p[1], "N") for p in points])
    except UnitError as exc:
        raise ConfigError(str(exc), key=key, value=points) from None
    if len(np.unique(v)) != len(v):
        raise ConfigError("the speeds of the points must differ", key=key, value=points)
    deg = min(2, len(v) - 1)
    c = np.polynomial.polynomial.polyfit(v, t, deg)
    c = np.concatenate([c, np.zeros(3 - len(c))])
    return {"t0": float(c[0]), "t1": float(c[1]), "t2": float(c[2])}


def _quantity(spec: Key, value: Any) -> float:
    try:
        if spec.name == "conditions.pressure_altitude" and has_dimension(value, "Pa"):
            # A station pressure (QFE) instead of an altitude: its ISA pressure altitude.
            p = to_unit(value, "Pa")
            try:
                x = float(isa_pressure_altitude(p))
            except ValueError:
                raise UnitError(f"pressure {p:g} Pa is outside the standard atmosphere's range") from None
        else:
            x = to_unit(value, spec.unit, difference=spec.name == "conditions.isa_deviation")
    except UnitError as exc:
        raise ConfigError(str(exc), key=spec.name, value=value, allowed=spec.allowed()) from None
    if not spec.contains(x):
        shown = f" (= {x:g} {spec.unit})" if isinstance(value, str) else ""
        raise ConfigError(f"outside the allowed range{shown}", key=spec.name, value=value,
                          allowed=spec.allowed())
    return x


def _typed(spec: Key, value: Any) -> Any:
    if spec.kind == "quantity":
        return _quantity(spec, value)
    if spec.kind == "bool":
        if not isinstance(value, bool):
            raise ConfigError("must be true or false", key=spec.name, value=value, allowed="true, false")
        return value
    if spec.kind == "int":
        if isinstance(value, bool) or not isinstance(value, int) or not spec.contains(value):
            raise ConfigError("must be a whole number in range", key=spec.name, value=value,
                              allowed=spec.allowed())
        return value
    if not isinstance(value, str):
        raise ConfigError("must be text in quotes", key=spec.name, value=value)
    return value


def _values(
    raw: Mapping[str, Any], source: str, origin: Mapping[str, str], optional: set[str]
) -> tuple[dict[str, Any], dict[str, Any]]:
    """Every key's value (``optional``: required keys that may be missing, being uncertain)."""
    flat = _flatten(raw)
    values: dict[str, Any] = {}
    for name, spec in KEYS.items():
        where = origin.get(name)
        try:
            if name in flat:
                values[name] = flat[name] if name.startswith("aircraft.thrust.") else _typed(spec, flat[name])
            elif spec.required and name not in optional:
                raise ConfigError("is required", key=name, allowed=spec.allowed())
            else:
                values[name] = spec.default
        except ConfigError as exc:
            raise (exc.with_file(f"{source} (--set)") if where else exc) from None
    return values, flat


def _check_together(v: dict[str, Any], flat: Mapping[str, Any]) -> None:
    """Rules that involve more than one key."""
    clash = conflicting_forms({k for k in flat if k in KEYS})
    if clash is not None:
        alt, _, second = clash
        raise ConfigError(f"give {alt.what} by {' and '.join(alt.forms[0])} or by "
                          f"{' and '.join(alt.forms[1])}, not both", key=second, value=flat[second])
    if v["runway.condition_code"] is None and v["runway.braking_mu"] is None:
        raise ConfigError("is required unless runway.condition_code is given", key="runway.braking_mu",
                          allowed=KEYS["runway.braking_mu"].allowed())
    if v["procedure.use_reverse"] and "aircraft.thrust.reverse.__given__" not in flat:
        raise ConfigError("needs an [aircraft.thrust.reverse] table", key="procedure.use_reverse",
                          value=True)
    ratio = v["procedure.touchdown_speed_ratio"]
    if ratio < TOUCHDOWN_RATIO_PRACTICE:
        warnings.warn(
            f"procedure.touchdown_speed_ratio = {ratio:g} is below {TOUCHDOWN_RATIO_PRACTICE} (common "
            "practice for civil aircraft: touchdown at 1.15 V_S or more)",
            LandriskWarning,
            stacklevel=4,
        )
    temperature = v["conditions.temperature"]
    rho = isa_density(v["conditions.pressure_altitude"], v["conditions.isa_deviation"] or 0.0,
                      temperature)
    vs = float(stall_speed(v["aircraft.mass"], rho, v["aircraft.wing_area"], v["aircraft.cl_max"]))
    v_td = ratio * vs
    if v["conditions.headwind"] >= v_td:
        raise ConfigError("the headwind is at or above the touchdown speed", key="conditions.headwind",
                          value=flat.get("conditions.headwind", v["conditions.headwind"]),
                          allowed=f"below the touchdown speed {v_td:.1f} m/s")
