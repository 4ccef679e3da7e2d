"""Reading a scenario file (TOML) into a checked :class:`~landrisk.model.Scenario`.

Every problem is a :class:`~landrisk.errors.ConfigError` that names the file, the key, the value as
written and what is allowed. Inputs that are accepted but outside common practice raise a
:class:`~landrisk.errors.LandriskWarning`.
"""

from __future__ import annotations

import difflib
import re
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
from landrisk.units import BareNumberError, UnitError, has_dimension, shown_unit, to_unit

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

#: The largest scenario file read (bytes); scenario files are a few kilobytes.
MAX_FILE_BYTES = 1 << 20
#: The deepest nesting of tables and arrays accepted (the deepest the schema uses is 6).
MAX_DEPTH = 32
#: The largest whole number accepted anywhere in a file (beyond it a float is no longer exact).
MAX_INT = 2**53
#: Thrust points: speeds accepted (m/s) and the smallest spacing between two speeds (m/s). 200 m/s is
#: 389 kt, above any landing speed; 0.5 m/s is about 1 kt (common practice, no source).
POINT_SPEED_RANGE = (0.0, 200.0)
POINT_MIN_SPACING = 0.5

_SECTIONS = ("scenario", "aircraft", "conditions", "runway", "procedure")
_THRUST_SETTINGS = ("idle", "reverse")
#: Sections of a scenario file that other readers take (calibration, epistemic parameters).
_READ_ELSEWHERE = ("calibration", "epistemic")


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
    raw = _toml(text.removeprefix("\ufeff"), source)
    try:
        _check_tree(raw, "")
    except ConfigError as exc:
        raise exc.with_file(source) from None
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
            _drop(raw, other)
        _assign(raw, key, value)
        fixed.add(key)
    origin = {key: "--set" for key in fixed}
    tables, correlation = raw.pop("uncertain", None), raw.pop("correlation", None)
    for section in _READ_ELSEWHERE:  # read by landrisk.io.calibration and landrisk.io.epistemic
        raw.pop(section, None)
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


def _toml(text: str, source: str) -> dict[str, Any]:
    try:
        return tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ConfigError(f"not valid TOML ({_toml_reason(str(exc))})", file=source) from None
    except RecursionError:
        raise ConfigError(f"arrays or tables are nested too deeply (more than {MAX_DEPTH} levels)",
                          file=source) from None
    except ValueError:  # Python refuses to read a whole number of more than 4 300 digits
        long = re.search(r"[0-9_]{4000,}", text)
        line = f" on line {text.count(chr(10), 0, long.start()) + 1}" if long else ""
        raise ConfigError(f"a number{line} has thousands of digits", file=source) from None


def _toml_reason(message: str) -> str:
    """tomllib's reason and position, without the keys it quotes from the text (the file may be any file)."""
    if re.search(r"Cannot declare|namespace|Duplicate inline table key", message):
        where = re.search(r"\((at line \d+, column \d+|at end of document)\)", message)
        return "a key or table is defined twice" + (f" ({where.group(1)})" if where else "")
    return message


def _check_tree(node: Any, where: str) -> None:
    """Refuse nesting deeper than MAX_DEPTH and whole numbers too large to be exact (iteratively)."""
    stack = [(node, where, 0)]
    while stack:
        value, path, depth = stack.pop()
        if depth > MAX_DEPTH:
            short = path.split("[", 1)[0] + ("[...]" if "[" in path else "")
            raise ConfigError(f"arrays or tables are nested too deeply (more than {MAX_DEPTH} levels)",
                              key=short or None)
        if isinstance(value, dict):
            for k, v in value.items():
                name = f'"{k}"' if "." in str(k) else str(k)  # a dotted key inside [uncertain."<key>"]
                stack.append((v, f"{path}.{name}" if path else name, depth + 1))
        elif isinstance(value, list):
            stack.extend((v, f"{path}[{i}]", depth + 1) for i, v in enumerate(value))
        elif isinstance(value, int) and not isinstance(value, bool) and abs(value) > MAX_INT:
            digits = len(str(abs(value)))  # at most 4 300: tomllib reads no longer whole numbers
            raise ConfigError(f"the whole number has {digits} digits, too many to be exact (at most 2^53)",
                              key=path or None, value=f"{str(value)[:12]}... ({digits} digits)")


def _drop(raw: dict[str, Any], key: str) -> None:
    """Remove ``key``, its uncertain table and the correlations that name it from ``raw``."""
    section, name = key.split(".", 1)
    body = raw.get(section)
    if isinstance(body, dict):
        body.pop(name, None)
    tables = raw.get("uncertain")
    if isinstance(tables, dict) and tables.pop(key, None) is not None:
        corr = raw.get("correlation")
        if isinstance(corr, list):
            raw["correlation"] = [c for c in corr if not (isinstance(c, dict) and isinstance(
                c.get("between"), list) and key in c["between"])]


def _read(p: Path) -> str:
    """The text of a scenario file: at most MAX_FILE_BYTES, UTF-8 with or without a byte-order mark."""
    try:
        with p.open("rb") as f:
            data = f.read(MAX_FILE_BYTES + 1)
    except FileNotFoundError:
        raise ConfigError("no such file", file=str(p)) from None
    except IsADirectoryError:
        raise ConfigError("is a folder, not a scenario file", file=str(p)) from None
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise ConfigError(f"cannot read the file ({reason})", file=str(p)) from None
    if len(data) > MAX_FILE_BYTES:
        raise ConfigError(f"is larger than {MAX_FILE_BYTES >> 20} MiB; a scenario file is a few KiB of "
                          "TOML", file=str(p))
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise ConfigError(f"is not UTF-8 text (byte {exc.start + 1} cannot be read)", file=str(p)) from None


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
    except RecursionError:
        raise ConfigError(f"nested too deeply (more than {MAX_DEPTH} levels)", key=key,
                          file="--set") from None
    except ValueError:  # a whole number of more than 4 300 digits
        raise ConfigError("the number has thousands of digits", key=key, file="--set") from None
    try:
        _check_tree(parsed, key)
    except ConfigError as exc:
        shown = exc.value if exc.value is not None else value.strip()[:60]
        raise ConfigError(exc.reason, key=key, value=shown, file="--set") from None
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
    """Least-squares fit of T = t0 + t1 V + t2 V^2 through [[V, T], ...] (degree below 2 for < 3 points).

    The speeds must lie in POINT_SPEED_RANGE and differ by POINT_MIN_SPACING at least, and the fitted
    coefficients must lie in their keys' allowed ranges; otherwise the fit is refused, naming the key.
    """
    example = 'e.g. [["0 kt", "-60 kN"], ["100 kt", "-70 kN"]]'
    if not isinstance(points, list) or not points or len(points) > 100 or not all(
        isinstance(p, list) and len(p) == 2 for p in points
    ):
        raise ConfigError("must be a list of [speed, thrust] pairs (at most 100)", key=key, value=points,
                          allowed=example)
    try:
        v = np.array([to_unit(p[0], "m/s") for p in points])
    except UnitError as exc:
        raise ConfigError(f"a speed: {exc}", key=key, value=points, allowed=example) from None
    try:
        t = np.array([to_unit(p[1], "N") for p in points])
    except UnitError as exc:
        raise ConfigError(f"a thrust: {exc}", key=key, value=points, allowed=example) from None
    lo, hi = POINT_SPEED_RANGE
    if np.any(v < lo) or np.any(v > hi):
        raise ConfigError(f"a speed of {v[(v < lo) | (v > hi)][0]:g} m/s is outside the range of the points",
                          key=key, value=points, allowed=f"speeds in [{lo:g}, {hi:g}] m/s")
    t_spec = KEYS[f"{key.rsplit('.', 1)[0]}.t0"]
    if np.any(np.abs(t) > t_spec.hi):
        raise ConfigError(f"a thrust of {t[np.abs(t) > t_spec.hi][0]:g} N is outside the range of the points",
                          key=key, value=points, allowed=f"thrusts in {t_spec.allowed()}")
    gaps = np.diff(np.sort(v))
    if gaps.size and gaps.min() < POINT_MIN_SPACING:
        raise ConfigError(f"two speeds are {gaps.min():.3g} m/s apart; the fit needs speeds at least "
                          f"{POINT_MIN_SPACING:g} m/s (about 1 kt) apart", key=key, value=points)
    deg = min(2, len(v) - 1)
    try:
        c = np.polynomial.polynomial.polyfit(v, t, deg)
    except (np.linalg.LinAlgError, ValueError):
        raise ConfigError("the points cannot be fitted", key=key, value=points) from None
    c = np.concatenate([c, np.zeros(3 - len(c))])
    fitted = {"t0": float(c[0]), "t1": float(c[1]), "t2": float(c[2])}
    for name, x in fitted.items():
        spec = KEYS[f"{key.rsplit('.', 1)[0]}.{name}"]
        if not spec.contains(x):
            raise ConfigError(f"the fit gives {name} = {x:.4g} {shown_unit(spec.unit)}, outside its allowed "
                              "range; check the points or give t0, t1, t2", key=key, value=points,
                              allowed=f"{name} in {_allowed(spec)}")
    return fitted


def _quantity(spec: Key, value: Any) -> float:
    try:
        if spec.kind == "quantity" and isinstance(value, int) and not isinstance(value, bool) and \
                abs(value) > MAX_INT:
            raise UnitError("the number is too large")
        if spec.name == "conditions.pressure_altitude" and has_dimension(value, "Pa"):
            # A station pressure (QFE) instead of an altitude: its ISA pressure altitude.
            p = to_unit(value, "Pa")
            try:
                x = float(isa_pressure_altitude(p))
            except ValueError:
                raise UnitError(f"pressure {p:g} Pa is outside the standard atmosphere's range") from None
        else:
            x = to_unit(value, spec.unit, difference=spec.name == "conditions.isa_deviation")
    except BareNumberError as exc:
        raise ConfigError(str(exc), key=spec.name, value=value) from None
    except UnitError as exc:
        raise ConfigError(str(exc), key=spec.name, value=value, allowed=_allowed(spec)) from None
    if not spec.contains(x):
        shown = f" (= {x:g} {shown_unit(spec.unit)})".replace(" )", ")") if isinstance(value, str) else ""
        raise ConfigError(f"outside the allowed range{shown}", key=spec.name, value=value,
                          allowed=_allowed(spec))
    return x


def _allowed(spec: Key) -> str:
    """The key's allowed range with its unit as users write it (``m^2``, ``%``)."""
    text = spec.allowed()
    return text[: -len(spec.unit)] + shown_unit(spec.unit) if spec.unit and text.endswith(spec.unit) else text


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
    if spec.choices and value and value not in spec.choices:  # "" is the key's "not set"
        raise ConfigError("is not one of the choices", key=spec.name, value=value, allowed=spec.allowed())
    return value


def _values(
    raw: Mapping[str, Any], source: str, origin: Mapping[str, str], optional: set[str]
) -> tuple[dict[str, Any], dict[str, Any]]:
    """Every key's value (``optional``: required keys that may be missing, being uncertain)."""
    try:
        flat = _flatten(raw)
    except ConfigError as exc:  # a thrust coefficient given by --set is checked here
        raise (exc.with_file(f"{source} (--set)") if exc.key in origin else exc) from None
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
