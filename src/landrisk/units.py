"""The one place that reads quantities with units (``"7200 ft"``, ``"15 degC"``), through pint.

A physical value in a scenario is written as ``"<number> <unit>"``: a bare number for a key that has a
unit is refused, because nothing says which unit it was meant in (6 kt or 6 m/s). Pure numbers (ratios,
coefficients, counts) are written bare.

The text is checked against a strict pattern before pint sees it: an optional sign, digits with an
optional decimal point and exponent, optional spaces, then an optional unit expression made of unit names,
``*``, ``/``, ``^`` or ``**`` with a small whole exponent, and ``%`` -- nothing else. The number is read
by Python's ``float`` and only the unit expression is given to pint, so pint never evaluates arithmetic
(``"9**9**9 m"``), juxtaposed numbers (``"1 900 m"``) or separators (``"1,900 m"``, ``"1,5 s"``).

The registry is created once, on first use; pint's definition cache (in the user's cache folder) makes
that about 0.05 s instead of 0.4 s. Where the cache cannot be used the registry is built without it.
pint is imported without its dask support (see :func:`_pint`): quantities never leave this module as
pint objects, only as floats and numpy arrays, so pint never meets a dask array.
"""

from __future__ import annotations

import math
import re
import sys
from functools import lru_cache
from types import ModuleType
from typing import Any

import numpy as np

__all__ = [
    "BareNumberError",
    "UnitError",
    "check_unit",
    "convert",
    "convert_array",
    "example",
    "has_dimension",
    "parse_quantity",
    "shown_unit",
    "to_unit",
]

#: The longest number (in characters) that a quantity may be written with.
MAX_NUMBER_CHARS = 40

_NUMBER = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]{1,3})?"
_NAME = r"(?:[A-Za-z_°µΩ][A-Za-z_°µΩ0-9]*|%)"
_POWER = r"(?:\^|\*\*)[+-]?[1-9]"
_TERM = rf"{_NAME}(?:[ \t]*{_POWER})?"
_UNIT = rf"{_TERM}(?:(?:[ \t]*[*/][ \t]*|[ \t]+){_TERM})*"
_QUANTITY_RE = re.compile(rf"[ \t]*(?P<number>{_NUMBER})[ \t]*(?P<unit>{_UNIT})?[ \t]*", re.ASCII)
_UNIT_RE = re.compile(rf"[ \t]*{_UNIT}[ \t]*")
_NUMBER_RE = re.compile(rf"[ \t]*{_NUMBER}[ \t]*", re.ASCII)

_OFFSET_UNITS = ("degree_Celsius", "degree_Fahrenheit", "degree_Rankine", "degree_Reaumur")

#: For the example in the error on a bare number: a unit of the same kind that users often write, and
#: whether to show it first (the number read in it) or second (the number read in the key's unit).
_EXAMPLE_UNITS: dict[str, tuple[str, bool]] = {
    "m": ("ft", True),
    "m/s": ("kt", True),
    "kg": ("lb", True),
    "m**2": ("ft**2", True),
    "N": ("kN", False),
    "K": ("degC", False),
}


class UnitError(ValueError):
    """A quantity that cannot be read or converted; the message says why."""


class BareNumberError(UnitError):
    """A number without a unit where the key has a unit; the message gives an example to write."""


def _pint() -> ModuleType:
    """The pint package, imported without its dask support when dask is not loaded yet.

    ``pint.compat`` imports ``dask.base`` whenever dask is installed (``importlib.util.find_spec``), which
    costs about 0.2 s. While pint is imported, ``sys.modules["dask"]`` is None, for which ``find_spec``
    answers "not installed"; the entry is removed right after, so ``landrisk study --dask`` imports dask
    as usual. Where dask is loaded already (a dask worker), pint is imported as it is.
    """
    if "pint" in sys.modules or "dask" in sys.modules:
        import pint

        return pint
    sys.modules["dask"] = None  # type: ignore[assignment]
    try:
        import pint
    finally:
        if "dask" in sys.modules and sys.modules["dask"] is None:
            del sys.modules["dask"]
    return pint


@lru_cache(maxsize=1)
def _registry() -> Any:
    pint = _pint()

    # Offset units ("15 degC") parse to kelvin only with this option (pint documentation, "Temperature
    # conversion").
    try:
        ureg: Any = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=":auto:")
        ureg.parse_units("kt")
        return ureg
    except Exception:  # an unwritable or damaged cache folder: build the registry without it
        return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def shown_unit(unit: str) -> str:
    """A unit as written in messages and examples: ``m^2`` for ``m**2``, ``%`` for ``percent``."""
    return "%" if unit == "percent" else unit.replace("**", "^")


def _fmt(x: float) -> str:
    """A number to about 3 significant digits, without an exponent for ordinary magnitudes."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    if 1e-4 <= abs(x) < 1e15:
        return np.format_float_positional(float(f"{x:.3g}"), trim="-")
    return f"{x:.3g}"


def _fmt_given(x: float) -> str:
    return np.format_float_positional(x, trim="-") if 1e-4 <= abs(x) < 1e15 else f"{x:g}"


def example(x: float, unit: str, *, difference: bool = False) -> str:
    """Text that says how to write the bare number ``x`` with a unit, e.g. ``write "-6 kt" or "-3.09 m/s"``.

    ``unit`` is the key's unit; the example shows ``x`` in a common unit of the same kind and the same
    quantity in ``unit`` (or the other way round where ``x`` most likely is in the key's unit already).
    """
    given = _fmt_given(x)
    key_unit = shown_unit(unit)
    alt = _EXAMPLE_UNITS.get(unit)
    if alt is None or not math.isfinite(x):
        return f'write "{given} {key_unit}"'
    other, other_first = alt
    if difference and other == "degC":
        other = "delta_degF"
    try:
        if other_first:
            return f'write "{given} {shown_unit(other)}" or "{_fmt(convert(x, other, unit))} {key_unit}"'
        return f'write "{given} {key_unit}" or "{_fmt(convert(x, unit, other))} {shown_unit(other)}"'
    except Exception:  # an overflowing conversion: the key's unit alone
        return f'write "{given} {key_unit}"'


def parse_quantity(text: str, unit: str = "m") -> tuple[float, str]:
    """The number and the unit expression of ``text`` (``""`` if none), checked by the strict pattern.

    ``unit`` is only used in the message, for an example of what to write.

    Raises
    ------
    UnitError
        For text that is not a plain number optionally followed by a unit expression, a number written
        with more than :data:`MAX_NUMBER_CHARS` characters, or a number that is not finite.
    """
    m = _QUANTITY_RE.fullmatch(text)
    if m is None:
        like = f"1.5 {shown_unit(unit)}".strip()
        raise UnitError(
            f'is not a number and a unit such as "{like}" (no thousands separators, no spaces inside '
            "the number, no arithmetic)"
        )
    number = m.group("number")
    if len(number) > MAX_NUMBER_CHARS:
        raise UnitError(f"the number has more than {MAX_NUMBER_CHARS} characters")
    x = float(number)
    if not math.isfinite(x):
        raise UnitError("the value is not a finite number")
    return x, (m.group("unit") or "").strip()


def check_unit(text: Any) -> Any:
    """The pint unit of the unit expression ``text`` (``"ft"``, ``"m/s"``); refuses anything else."""
    if not isinstance(text, str) or _UNIT_RE.fullmatch(text) is None:
        raise UnitError("is not a unit (write a unit such as m, ft, kt, m/s, kg, lb)")
    try:
        return _registry().parse_units(text.strip())
    except Exception:  # pint raises many kinds for unknown names
        raise UnitError(f"{text.strip()!r} is not a known unit") from None


def _number(value: Any) -> float:
    if isinstance(value, bool):
        raise UnitError("expected a number or a quantity string, got true/false")
    try:
        x = float(value)
    except OverflowError:
        raise UnitError("the number is too large") from None
    if not math.isfinite(x):
        raise UnitError("the value is not a finite number")
    return x


def to_unit(value: Any, unit: str, *, difference: bool = False, bare: bool | None = None) -> float:
    """Read ``value`` as a quantity in ``unit`` and return its magnitude in that unit.

    Parameters
    ----------
    value : int, float or str
        A quantity string such as ``"135 kt"``; a plain number (or a string without a unit) only where
        bare numbers are allowed.
    unit : str
        Target unit as a pint expression (``"m/s"``, ``"K"``, ``"deg"``, ``"percent"``); ``""`` for a
        pure number.
    difference : bool
        The quantity is a temperature difference (ISA deviation, a spread): ``"10 K"`` or
        ``"10 delta_degC"``; ``"10 degC"`` would be the absolute temperature 283.15 K and is refused.
    bare : bool, optional
        Whether a number without a unit is accepted (read in ``unit``); by default only for a pure
        number (``unit == ""``).

    Raises
    ------
    BareNumberError
        For a number without a unit where ``unit`` is not ``""`` (the message gives an example).
    UnitError
        For text that is not a quantity, an unknown unit, or a unit of the wrong kind.
    """
    if bare is None:
        bare = unit == ""
    if isinstance(value, str):
        x, written = parse_quantity(value, unit)
        if written:
            return _convert_written(x, written, unit, difference, value)
    elif isinstance(value, int | float) and not isinstance(value, bool):
        x = _number(value)
    else:
        wanted = f'a quantity such as "12 {shown_unit(unit)}"' if unit else "a number"
        raise UnitError(f"expected {wanted}")
    if not bare:
        raise BareNumberError(f"a bare number has no unit; {example(x, unit, difference=difference)}")
    return x


def _convert_written(x: float, written: str, unit: str, difference: bool, text: str) -> float:
    pint = _pint()
    units = check_unit(written)
    if difference and str(units) in _OFFSET_UNITS:
        raise UnitError(
            f"{text.strip()!r} is an absolute temperature; write a temperature difference as "
            "\"10 K\" or \"10 delta_degC\""
        )
    try:
        y = float(_registry().Quantity(x, units).to(unit or "dimensionless").magnitude)
    except pint.errors.DimensionalityError:
        target = shown_unit(unit) if unit else "a pure number"
        raise UnitError(f"{text.strip()!r} has units of {_registry().Quantity(1.0, units).dimensionality}, "
                        f"not {target}") from None
    except (OverflowError, ArithmeticError):
        raise UnitError("the value is too large") from None
    except Exception:  # e.g. offset units inside a compound unit
        raise UnitError(f"cannot convert {text.strip()!r} to {shown_unit(unit) or 'a pure number'}") from None
    if not math.isfinite(y):
        raise UnitError(f"the value is not a finite number in {shown_unit(unit) or 'pure numbers'}")
    return y


def convert(value: float, from_unit: str, to: str) -> float:
    """Convert a magnitude between two units, e.g. ``convert(69.45, "m/s", "kt")``."""
    return float(_registry().Quantity(value, from_unit).to(to).magnitude)


def convert_array(values: Any, from_unit: str, to: str, *, difference: bool = False) -> np.ndarray:
    """Convert an array of magnitudes written in the unit expression ``from_unit`` to ``to``.

    ``from_unit`` is checked like a unit in a scenario (:func:`check_unit`); for a temperature difference
    an absolute temperature unit (``degC``) is refused.
    """
    pint = _pint()
    units = check_unit(from_unit)
    if difference and str(units) in _OFFSET_UNITS:
        raise UnitError(f"{from_unit!r} is an absolute temperature; a difference is in K or delta_degC")
    x = np.asarray(values, dtype=float)
    try:
        with np.errstate(over="ignore", invalid="ignore"):
            return np.asarray(_registry().Quantity(x, units).to(to or "dimensionless").magnitude, dtype=float)
    except pint.errors.DimensionalityError:
        raise UnitError(f"{from_unit!r} has units of {_registry().Quantity(1.0, units).dimensionality}, "
                        f"not {shown_unit(to) or 'a pure number'}") from None


def has_dimension(value: Any, unit: str) -> bool:
    """Whether ``value`` is a quantity string whose unit has the dimension of ``unit`` (e.g. a pressure)."""
    if not isinstance(value, str):
        return False
    try:
        _, written = parse_quantity(value)
        if not written:
            return False
        reg = _registry()
        return bool(reg.Quantity(1.0, check_unit(written)).check(reg.Quantity(1.0, unit).dimensionality))
    except Exception:  # not a quantity at all
        return False


# --- display of results -----------------------------------------------------------------------------

#: Unit systems for showing results (the computation and the JSON stay SI): quantity kind -> unit
#: (pint spelling) and its printed symbol.
DISPLAY_SYSTEMS: dict[str, dict[str, tuple[str, str]]] = {
    "si": {"length": ("m", "m"), "speed": ("m/s", "m/s"), "mass": ("kg", "kg"),
           "temperature": ("degC", "°C"), "pressure": ("Pa", "Pa")},
    "aviation": {"length": ("ft", "ft"), "speed": ("kt", "kt"), "mass": ("lb", "lb"),
                 "temperature": ("degC", "°C"), "pressure": ("hPa", "hPa")},
}
#: The SI unit each kind of result is held in.
_SI_UNIT = {"length": "m", "speed": "m/s", "mass": "kg", "temperature": "K", "pressure": "Pa"}
#: Unit of a scenario key (schema spelling) -> quantity kind.
_KIND_OF_UNIT = {"m": "length", "m/s": "speed", "kg": "mass", "K": "temperature", "Pa": "pressure"}


class DisplayUnits:
    """How results are shown: ``DisplayUnits("aviation").length(100.0) -> 328.08``; symbols by kind.

    Values come in SI (m, m/s, kg, K, Pa) and go out in the chosen system, converted through pint.
    """

    def __init__(self, system: str = "si") -> None:
        if system not in DISPLAY_SYSTEMS:
            raise UnitError(f"unknown unit system {system!r}; allowed: {', '.join(DISPLAY_SYSTEMS)}")
        self.system = system
        self._units = DISPLAY_SYSTEMS[system]

    def __repr__(self) -> str:
        return f"DisplayUnits({self.system!r})"

    def unit(self, kind: str) -> str:
        """The printed symbol of ``kind`` (``length``, ``speed``, ``mass``, ``temperature``, ...)."""
        return self._units[kind][1]

    def value(self, kind: str, si: Any) -> Any:
        """``si`` (a number or an array, in the SI unit of ``kind``) in this system's unit."""
        import numpy as np

        target = self._units[kind][0]
        if target == _SI_UNIT[kind]:
            return si
        out = _registry().Quantity(np.asarray(si, dtype=float), _SI_UNIT[kind]).to(target).magnitude
        return float(out) if np.ndim(out) == 0 else out

    def length(self, metres: Any) -> Any:
        return self.value("length", metres)

    def speed(self, mps: Any) -> Any:
        return self.value("speed", mps)

    def key_unit(self, unit: str) -> tuple[str | None, str]:
        """For a scenario key's SI unit: (the kind, or None if not converted, and the printed symbol)."""
        kind = _KIND_OF_UNIT.get(unit)
        return (kind, self.unit(kind)) if kind else (None, unit.replace("**", "^"))
