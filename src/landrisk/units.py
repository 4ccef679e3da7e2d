"""The one place that reads quantities with units (``"7200 ft"``, ``"15 degC"``), through pint.

A value in a scenario file is either a plain number, taken in the key's own unit (SI, or degrees and
percent where the key says so), or a string ``"<number> <unit>"`` that pint parses and converts.
The registry is created once, on first use (it takes a few tenths of a second).
"""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Any

__all__ = ["UnitError", "convert", "has_dimension", "to_unit"]


class UnitError(ValueError):
    """A quantity that cannot be read or converted; the message says why."""


@lru_cache(maxsize=1)
def _registry() -> Any:
    import pint

    # Offset units ("15 degC") parse to kelvin only with this option (REFERENCES.md, pint pitfalls).
    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


_OFFSET_UNITS = ("degree_Celsius", "degree_Fahrenheit", "degree_Rankine", "degree_Reaumur")


def to_unit(value: Any, unit: str, *, difference: bool = False) -> float:
    """Read ``value`` as a quantity in ``unit`` and return its magnitude in that unit.

    Parameters
    ----------
    value : int, float or str
        A number (already in ``unit``) or a string such as ``"135 kt"``; a string without a unit is a
        number in ``unit``.
    unit : str
        Target unit as a pint expression (``"m/s"``, ``"K"``, ``"deg"``, ``"percent"``); ``""`` for a
        pure number.
    difference : bool
        The quantity is a temperature difference (ISA deviation): ``"10 K"`` or ``"10 delta_degC"``;
        ``"10 degC"`` would be the absolute temperature 283.15 K and is refused.

    Raises
    ------
    UnitError
        For text that is not a quantity, an unknown unit, or a unit of the wrong kind.
    """
    if isinstance(value, bool):
        raise UnitError("expected a number or a quantity string, got a boolean")
    if isinstance(value, int | float):
        x = float(value)
    elif isinstance(value, str):
        x = _parse(value, unit, difference)
    else:
        raise UnitError(f"expected a number or a quantity string such as '12 {unit or 'm'}'")
    if not math.isfinite(x):
        raise UnitError("the value is not a finite number")
    return x


def _parse(text: str, unit: str, difference: bool) -> float:
    import pint

    ureg = _registry()
    try:
        q = ureg.Quantity(text.strip())
    except Exception as exc:  # pint raises many kinds on malformed text
        raise UnitError(f"cannot read {text!r} as a quantity ({exc})") from None
    if not isinstance(q, ureg.Quantity):  # a plain number in a string
        return float(q)
    if str(q.units) == "dimensionless":  # no unit written: the key's own unit
        return float(q.magnitude)
    if difference and str(q.units) in _OFFSET_UNITS:
        raise UnitError(
            f"{text!r} is an absolute temperature; write a temperature difference as '10 K' or "
            "'10 delta_degC'"
        )
    try:
        return float(q.to(unit or "dimensionless").magnitude)
    except pint.errors.DimensionalityError:
        raise UnitError(f"{text!r} has units of {q.dimensionality}, not {unit or 'a pure number'}") from None


def convert(value: float, from_unit: str, to: str) -> float:
    """Convert a magnitude between two units, e.g. ``convert(69.45, "m/s", "kt")``."""
    return float(_registry().Quantity(value, from_unit).to(to).magnitude)


def has_dimension(value: Any, unit: str) -> bool:
    """Whether ``value`` is a string quantity with the dimension of ``unit`` (e.g. a pressure)."""
    if not isinstance(value, str):
        return False
    try:
        q = _registry().Quantity(value.strip())
        return bool(q.check(_registry().Quantity(1, unit).dimensionality))
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
