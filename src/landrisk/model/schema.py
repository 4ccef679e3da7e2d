"""The keys of a scenario: unit, default, allowed range and meaning of each.

This table is the one description of the scenario file. The reader (``landrisk.io``) parses and checks
values against it, the starter file is written from it, ``--set`` and the uncertain-input tables address
its keys, and the solver's adapter reads the values it names. Values are held in the key's unit below: SI
for every physical quantity, except ``procedure.approach_angle`` (degrees) and ``runway.slope`` (percent).
In the file a key with a unit is written with one (``"7200 ft"``, ``"3 deg"``, ``"-0.3 %"``); a key
without a unit takes a bare number.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np

__all__ = ["ALTERNATIVES", "KEYS", "Alternative", "Key", "conflicting_forms", "keys_markdown", "replaced_by"]

Kind = Literal["quantity", "int", "bool", "str"]


@dataclass(frozen=True)
class Key:
    """One key of the scenario file.

    Attributes
    ----------
    name : str
        Dotted path, e.g. ``"runway.lda"``.
    unit : str
        Unit of the stored value (a unit-library expression, or ``""`` for a pure number, the only kind
        written as a bare number). Quantities such as ``"7200 ft"`` are converted to it.
    default : Any
        Value used when the key is absent; ``None`` with ``required=False`` means "not given".
    lo, hi : float
        Allowed range of the value.
    lo_open, hi_open : bool
        Whether the range excludes its end.
    kind : str
        ``quantity``, ``int``, ``bool`` or ``str``.
    required : bool
        Whether the file must give it.
    choices : tuple of str
        For a text key, the values it may take (empty: any text).
    doc : str
        Meaning, as shown in the starter file and the documentation.
    """

    name: str
    unit: str
    doc: str
    default: Any = None
    lo: float = -math.inf
    hi: float = math.inf
    lo_open: bool = False
    hi_open: bool = False
    kind: Kind = "quantity"
    required: bool = False
    choices: tuple[str, ...] = ()

    @property
    def scalar(self) -> bool:
        """True for keys that hold a number (the ones that may be overridden by samples)."""
        return self.kind in ("quantity", "int", "bool")

    def allowed(self) -> str:
        """The allowed range as text, e.g. ``(0, 1.5] (unit: -)``."""
        if self.kind == "bool":
            return "true or false"
        if self.kind == "str":
            return (" or ".join(self.choices) + ' (or "" for none)') if self.choices else "text"
        left = "(" if self.lo_open else "["
        right = ")" if self.hi_open else "]"
        rng = f"{left}{self.lo:g}, {self.hi:g}{right}"
        if self.kind == "int":
            rng = f"integer {self.lo:g}..{self.hi:g}"
        return f"{rng} {self.unit}".rstrip() if self.unit else rng

    def cast(self, value: Any) -> Any:
        """A number (e.g. a sample) in the key's own type: true/false, a whole number, or a float.

        True/false keys are true above 1/2; whole-number keys are rounded to the nearest integer.
        """
        if self.kind == "bool":
            return bool(value > 0.5)
        if self.kind == "int":
            return round(value)
        return float(value)

    def cast_array(self, values: Any) -> Any:
        """:meth:`cast` for an array of samples (a numpy array of bools, ints or floats)."""
        x = np.asarray(values)
        if self.kind == "bool":
            return x > 0.5
        if self.kind == "int":
            return np.rint(x).astype(int)
        return x

    def contains(self, value: float) -> bool:
        """Whether ``value`` lies in the allowed range."""
        if not math.isfinite(value):
            return False
        above = value > self.lo if self.lo_open else value >= self.lo
        below = value < self.hi if self.hi_open else value <= self.hi
        return above and below


def _k(*args: Any, **kw: Any) -> Key:
    return Key(*args, **kw)


_KEYS: list[Key] = [
    _k("scenario.name", "", "Short name of the scenario", default="unnamed", kind="str"),
    _k("scenario.description", "", "Free text: what the scenario is and where its data come from",
       default="", kind="str"),
    _k("scenario.units", "", "How results are shown: si (m, m/s, kg) or aviation (ft, kt, lb); empty: "
       "metres with feet beside them. --units overrides it; JSON stays SI", default="", kind="str",
       choices=("si", "aviation")),
    # --- aircraft -------------------------------------------------------------------------------------
    _k("aircraft.name", "", "Name of the aircraft type (free text)", default="", kind="str"),
    _k("aircraft.mass", "kg", "Landing mass", lo=100.0, hi=700_000.0, required=True),
    _k("aircraft.wing_area", "m**2", "Reference wing area S", lo=1.0, hi=1_000.0, required=True),
    _k("aircraft.wing_span", "m", "Wing span b", lo=2.0, hi=100.0, required=True),
    _k("aircraft.wing_height", "m", "Height of the wing above the runway (for the ground effect)",
       lo=0.0, hi=15.0, required=True),
    _k("aircraft.cl_max", "", "Maximum lift coefficient, landing configuration", lo=0.5, hi=5.0,
       required=True),
    _k("aircraft.cd0", "", "Zero-lift drag coefficient on the ground roll (landing flaps, gear down, "
       "spoilers out)", lo=0.0, hi=0.5, required=True),
    _k("aircraft.oswald", "", "Oswald span efficiency e", default=0.8, lo=0.3, hi=1.0),
    _k("aircraft.cl_ground", "", "Lift coefficient during the ground roll (spoilers or lift dumpers "
       "deployed)", lo=-0.5, hi=3.0, required=True),
    _k("aircraft.reverse_cutoff_speed", "m/s", "Airspeed below which reverse thrust is stowed "
       "(idle forward thrust below it)", default=0.0, lo=0.0, hi=100.0),
    _k("aircraft.thrust.idle.t0", "N", "Idle thrust: T = t0 + t1 V + t2 V^2, static term",
       default=0.0, lo=-2e6, hi=2e6),
    _k("aircraft.thrust.idle.t1", "N*s/m", "Idle thrust, linear term", default=0.0, lo=-1e5, hi=1e5),
    _k("aircraft.thrust.idle.t2", "N*s**2/m**2", "Idle thrust, quadratic term", default=0.0,
       lo=-1e4, hi=1e4),
    _k("aircraft.thrust.reverse.t0", "N", "Reverse thrust (negative retards), static term",
       default=0.0, lo=-2e6, hi=2e6),
    _k("aircraft.thrust.reverse.t1", "N*s/m", "Reverse thrust, linear term", default=0.0,
       lo=-1e5, hi=1e5),
    _k("aircraft.thrust.reverse.t2", "N*s**2/m**2", "Reverse thrust, quadratic term", default=0.0,
       lo=-1e4, hi=1e4),
    # --- conditions -----------------------------------------------------------------------------------
    _k("conditions.pressure_altitude", "m", "Pressure altitude of the runway, or the station "
       "pressure (QFE, e.g. \"1003 hPa\") converted to its pressure altitude", default=0.0,
       lo=-1_000.0, hi=11_000.0),
    _k("conditions.temperature", "K", "Outside air temperature (give this or isa_deviation)",
       lo=180.0, hi=340.0),
    _k("conditions.isa_deviation", "K", "Temperature above standard (give this or temperature)",
       default=0.0, lo=-80.0, hi=60.0),
    _k("conditions.headwind", "m/s", "Headwind component along the runway; negative for a tailwind",
       default=0.0, lo=-40.0, hi=60.0),
    # --- runway ---------------------------------------------------------------------------------------
    _k("runway.name", "", "Name of the runway (free text)", default="", kind="str"),
    _k("runway.lda", "m", "Landing distance available, from the threshold", lo=100.0, hi=10_000.0,
       required=True),
    _k("runway.resa_length", "m", "Runway end safety area beyond the runway end, for the probability "
       "of stopping beyond it (ICAO Annex 14 recommends 240 m; from memory)", default=240.0, lo=0.0,
       hi=2_000.0),
    _k("runway.slope", "percent", "Mean slope along the landing direction, positive uphill",
       default=0.0, lo=-20.0, hi=20.0),
    _k("runway.rolling_mu", "", "Rolling friction coefficient, brakes off (default 0.04, paved)",
       lo=0.0, hi=1.5, lo_open=True),
    _k("runway.braking_mu", "", "Effective braking friction coefficient, brakes on", lo=0.0, hi=1.5,
       lo_open=True),
    _k("runway.condition_code", "", "Runway condition code 0..6 (ICAO GRF); sets both friction "
       "coefficients from the documented table instead of rolling_mu and braking_mu",
       lo=0, hi=6, kind="int"),
    # --- procedure ------------------------------------------------------------------------------------
    _k("procedure.screen_height", "m", "Height over the threshold where the landing distance starts",
       default=15.24, lo=0.0, hi=100.0, lo_open=True),
    _k("procedure.approach_angle", "deg", "Approach flight-path angle", default=3.0, lo=0.0, hi=12.0,
       lo_open=True),
    _k("procedure.approach_speed_ratio", "", "Approach speed over stall speed V_A / V_S",
       default=1.3, lo=1.0, hi=2.0, lo_open=True),
    _k("procedure.flare_speed_ratio", "", "Mean flare speed over stall speed V_F / V_S (default: the "
       "mean of the approach and touchdown ratios)", lo=1.0, hi=2.0, lo_open=True),
    _k("procedure.flare_load_factor", "", "Load factor in the flare n", default=1.2, lo=1.0, hi=2.5,
       lo_open=True),
    _k("procedure.touchdown_speed_ratio", "", "Touchdown speed over stall speed V_TD / V_S",
       default=1.15, lo=1.0, hi=2.0, lo_open=True),
    _k("procedure.reaction_time", "s", "Free-roll time from touchdown to brake application",
       default=2.0, lo=0.0, hi=15.0),
    _k("procedure.use_reverse", "", "Whether reverse thrust is used on the braking roll",
       default=False, kind="bool"),
    _k("procedure.touchdown_distance", "m", "Touchdown point past the threshold; when given it "
       "replaces the flare model", lo=0.0, hi=5_000.0),
]

#: Every key of the scenario file, by dotted name, in file order.
KEYS: dict[str, Key] = {k.name: k for k in _KEYS}


@dataclass(frozen=True)
class Alternative:
    """Two ways of giving one thing; a scenario uses one form or the other, never both.

    Attributes
    ----------
    what : str
        What the forms give, in words (``"the runway friction"``).
    forms : tuple of tuple of str
        The forms, each a group of keys (``("runway.condition_code",)`` or the two coefficients).
    required : bool
        Whether one form must be given (friction: yes; temperature: no, a standard day by default).
    """

    what: str
    forms: tuple[tuple[str, ...], tuple[str, ...]]
    required: bool = False

    def form_of(self, key: str) -> int | None:
        """0 or 1, the form that ``key`` belongs to; None if it belongs to neither."""
        for i, keys in enumerate(self.forms):
            if key in keys:
                return i
        return None

    def others(self, key: str) -> tuple[str, ...]:
        """The keys of the other form than ``key``'s (empty if ``key`` is in neither)."""
        i = self.form_of(key)
        return () if i is None else self.forms[1 - i]


#: Keys that exclude each other. Setting a key of one form (with ``--set``) drops the other form from
#: the file; giving both forms, as values or as uncertain inputs, is an error.
ALTERNATIVES: tuple[Alternative, ...] = (
    Alternative("the runway friction", (("runway.condition_code",),
                                        ("runway.braking_mu", "runway.rolling_mu")), required=True),
    Alternative("the temperature", (("conditions.temperature",), ("conditions.isa_deviation",))),
)


def replaced_by(key: str) -> tuple[str, ...]:
    """The keys that giving ``key`` replaces: those of the other form of its alternative."""
    return tuple(k for alt in ALTERNATIVES for k in alt.others(key))


def conflicting_forms(present: set[str]) -> tuple[Alternative, str, str] | None:
    """The first alternative of which ``present`` holds keys of both forms: (it, a key of the first
    form, a key of the second form); None if every alternative is given in one form at most."""
    for alt in ALTERNATIVES:
        first = [k for k in alt.forms[0] if k in present]
        second = [k for k in alt.forms[1] if k in present]
        if first and second:
            return alt, first[0], second[0]
    return None


def keys_markdown() -> str:
    """The table of every key as Markdown, as shown in the README."""
    rows = ["| key | unit (written with the value) | default | allowed | meaning |", "|---|---|---|---|---|"]
    for k in _KEYS:
        shown = "—" if k.default is None else repr(k.default).replace("'", '"')
        default = "required" if k.required else shown
        unit = k.unit.replace("**", "^") if k.unit else "–"
        allowed = k.allowed().replace("**", "^")
        rows.append(f"| `{k.name}` | {unit} | {default} | {allowed} | {k.doc} |")
    return "\n".join(rows) + "\n"
