"""Plain-text reports of results, as the command line prints them."""

from __future__ import annotations

from landrisk import CAUTION, __version__
from landrisk.model import SingleLanding
from landrisk.units import convert

__all__ = ["render_solve"]


def _m_ft(label: str, metres: float, note: str = "") -> str:
    return f"  {label:<28}{metres:10.1f} m {convert(metres, 'm', 'ft'):10.0f} ft  {note}".rstrip()


def _kt(label: str, speed: float) -> str:
    return f"  {label:<28}{convert(speed, 'm/s', 'kt'):10.1f} kt {speed:9.1f} m/s"


def render_solve(landing: SingleLanding) -> str:
    """The deterministic landing as a readable table: phases in m and ft, speeds in kt, the margin."""
    s = landing.scenario
    v = s.values
    lines = [
        f"landrisk {__version__} - deterministic landing distance",
        f"Scenario: {s.name} ({s.source})" + (f" with {', '.join(s.overrides)}" if s.overrides else ""),
    ]
    if v["scenario.description"]:
        lines.append(f"  {v['scenario.description']}")
    lines += ["", "Distances from the screen height over the threshold"]
    if v["procedure.touchdown_distance"] is None:
        lines += [_m_ft("approach (in the air)", landing.approach_m),
                  _m_ft("flare (in the air)", landing.flare_m)]
    lines += [
        _m_ft("air distance", landing.air_distance_m,
              "(given touchdown point)" if v["procedure.touchdown_distance"] is not None else ""),
        _m_ft("free roll", landing.free_roll_m, f"({v['procedure.reaction_time']:g} s, brakes off)"
              if not landing.stopped_in_free_roll else "(stopped before the brakes came on)"),
        _m_ft("braking roll", landing.braking_m),
        _m_ft("total landing distance", landing.total_m),
        _m_ft("landing distance available", landing.lda_m),
        _m_ft("margin (LDA - total)", landing.margin_m,
              f"({100 * landing.margin_m / landing.lda_m:.1f} % of LDA)"),
        "",
        "Speeds (true airspeed unless stated)",
        _kt("stall V_S", landing.stall_speed),
        _kt("touchdown V_TD", landing.touchdown_speed),
        _kt("touchdown ground speed", landing.touchdown_ground_speed),
        _kt("at brake application", landing.brake_speed),
        f"  {'touchdown to stop':<28}{landing.time_to_stop_s:10.1f} s",
        "",
    ]
    if landing.overrun:
        lines.append(
            f"OVERRUN: {landing.beyond_end_m:.0f} m ({convert(landing.beyond_end_m, 'm', 'ft'):.0f} ft) "
            f"beyond the runway end, crossing it at "
            f"{convert(landing.runway_end_ground_speed, 'm/s', 'kt'):.0f} kt ground speed."
        )
    else:
        lines.append("The aircraft stops within the landing distance available.")
    d = landing.derived
    lines += [
        f"Inputs used: density {d['density_kg_m3']:.4f} kg/m^3, rolling mu {d['rolling_mu']:.3f}, "
        f"braking mu {d['braking_mu']:.3f}, "
        f"headwind {convert(v['conditions.headwind'], 'm/s', 'kt'):.1f} kt, "
        f"reverse thrust {'used' if v['procedure.use_reverse'] else 'not used'}.",
        "",
        CAUTION,
    ]
    return "\n".join(lines)
