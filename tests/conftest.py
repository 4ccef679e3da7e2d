"""Shared fixtures: cases built from published worked examples (never from the invented demo data)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from landrisk.model import LandingCase

FT = 0.3048  # m, exact by definition
LBF = 4.4482216152605  # N, exact by definition (0.45359237 kg x 9.80665 m/s^2)
SLUG_FT3 = 14.59390294 / FT**3  # kg/m^3 per slug/ft^3

#: The tests' own scenario file (Anderson 1999, Example 6.7's aircraft in SI, rounded; not a check
#: value): ``{friction}`` takes the [runway] friction lines.
_SCENARIO = """
[aircraft]
mass = "33112 kg"
wing_area = "88.26 m^2"
wing_span = "22.86 m"
wing_height = "1.71 m"
cl_max = 2.39
cd0 = 0.0276
oswald = 0.9
cl_ground = 0.1
[runway]
lda = "1200 m"
{friction}
[procedure]
reaction_time = "3 s"
"""
DRY_FRICTION = 'rolling_mu = 0.03\nbraking_mu = 0.4'


#: A small study of the invented study base scenario: two cases, a paired comparison and the yearly
#: risk against a target (3 000 Monte Carlo samples per case in chunks of 1 000).
SMALL_STUDY = """
[study]
scenario = "{base}"
samples = 3000
split = 1000
seed = 5
method = "mc"

[[case]]
name = "base"

[[case]]
name = "quick"
'uncertain."procedure.reaction_time".mode' = "1.5 s"

[[comparison]]
baseline = "base"
alternative = "quick"

[exposure]
landings_per_year = 8000
target_per_year = 50
"""


def small_study_text() -> str:
    """:data:`SMALL_STUDY` on configs/study-base-invented.toml."""
    from pathlib import Path

    base = Path(__file__).resolve().parents[1] / "configs" / "study-base-invented.toml"
    return SMALL_STUDY.format(base=base.as_posix())


def scenario_text(friction: str = DRY_FRICTION) -> str:
    """The tests' own scenario file as text, with ``friction`` as its runway friction lines."""
    return _SCENARIO.format(friction=friction)


def anderson_example_6_7() -> LandingCase:
    """Anderson, *Aircraft Performance and Design*, McGraw-Hill 1999, §6.8, Example 6.7 (pp. 374-375).

    W = 73 000 lb, S = 950 ft^2, C_Lmax = 2.39, mu_r = 0.4, gamma = 3 deg, N = 3 s, C_L = 0.1 on the
    ground, C_D0 = 0.015 + 0.0124 (gear), k1 = 0.02, ground-effect factor 0.588, e = 0.9, AR = 5.92,
    V_a = 1.3, V_f = 1.23, V_TD = 1.15 V_stall, n = 1.2, sea level rho = 0.002377 slug/ft^3,
    g = 32.2 ft/s^2, no thrust during the roll. The book's k1 C_L^2 term (drag that ground effect
    does not reduce) is constant on the ground roll, so it is carried in C_D0 here.
    """
    g = 32.2 * FT
    weight = 73_000 * LBF
    area = 950 * FT**2
    span = np.sqrt(5.92 * area)
    ratio = 0.588 / (1 - 0.588)  # McCormick's phi = r / (1 + r) with r = (16 h / b)^2
    height = np.sqrt(ratio) * span / 16
    return LandingCase(
        mass=weight / g, wing_area=area, wing_span=span, wing_height=height, cl_max=2.39,
        cd0=0.015 + 0.0124 + 0.02 * 0.1**2, oswald=0.9, cl_ground=0.1, reverse_cutoff_speed=0.0,
        idle_t0=0.0, idle_t1=0.0, idle_t2=0.0, reverse_t0=0.0, reverse_t1=0.0, reverse_t2=0.0,
        use_reverse=False, density=0.002377 * SLUG_FT3, headwind=0.0, slope_angle=0.0, rolling_mu=0.0,
        braking_mu=0.4, screen_height=50 * FT, approach_angle=np.radians(3.0), approach_speed_ratio=1.3,
        flare_speed_ratio=1.23, flare_load_factor=1.2, touchdown_speed_ratio=1.15, reaction_time=3.0,
        touchdown_given=False, touchdown_distance=0.0, lda=10_000 * FT, g=g,
    )


@pytest.fixture
def anderson() -> LandingCase:
    return anderson_example_6_7()


def general_cases(n: int, seed: int) -> list[LandingCase]:
    """Varied single landings around the Anderson aircraft: thrust laws, reverse with cut-off, slope,
    head- and tailwind, friction; ranges are physically plausible, not data of any aircraft."""
    rng = np.random.default_rng(seed)
    base = anderson_example_6_7()
    out = []
    for _ in range(n):
        out.append(replace(
            base,
            g=9.80665,
            mass=base.mass * rng.uniform(0.5, 1.2),
            reaction_time=rng.uniform(0.0, 5.0),
            headwind=rng.uniform(-12.0, 20.0),
            slope_angle=np.arctan(rng.uniform(-0.03, 0.03)),
            use_reverse=bool(rng.integers(2)),
            reverse_t0=-rng.uniform(0, 60_000), reverse_t1=-rng.uniform(0, 200),
            reverse_t2=-rng.uniform(0, 2), reverse_cutoff_speed=rng.uniform(10, 40),
            idle_t0=rng.uniform(0, 8_000), idle_t1=-rng.uniform(0, 30), idle_t2=rng.uniform(-0.3, 0.3),
            rolling_mu=rng.uniform(0.02, 0.1), braking_mu=rng.uniform(0.05, 0.5),
            cl_ground=rng.uniform(0.0, 0.8),
        ))
    return out
