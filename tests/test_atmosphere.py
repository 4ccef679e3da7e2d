"""ISA density against the ICAO table and against the `ambiance` package (an independent implementation)."""

import numpy as np
import pytest
from ambiance import Atmosphere

from landrisk.physics import isa_density, isa_pressure, isa_pressure_altitude, isa_temperature

FT = 0.3048


# ICAO, Manual of the ICAO Standard Atmosphere, Doc 7488, 3rd ed. 1993 (= U.S. Standard Atmosphere 1976
# below 32 km), density at pressure altitude: 0 ft 1.22500, 2 000 ft 1.15490, 5 000 ft 1.05555,
# 8 000 ft 0.96287 kg/m^3 (its density table; the ambiance package checks the same model below).
@pytest.mark.parametrize(
    ("feet", "rho"), [(0, 1.22500), (2_000, 1.15490), (5_000, 1.05555), (8_000, 0.96287)]
)
def test_density_matches_icao_table(feet: float, rho: float) -> None:
    assert isa_density(feet * FT) == pytest.approx(rho, abs=6e-5)


def test_density_isa_plus_20_at_5000_ft() -> None:
    # ICAO Doc 7488 (1993) pressure at 5 000 ft with the temperature raised 20 K: rho = p / (R T) =
    # 0.98480 kg/m^3 (the ideal-gas law on the tabulated pressure).
    assert isa_density(5_000 * FT, isa_deviation=20.0) == pytest.approx(0.98480, abs=6e-5)


def test_density_against_ambiance() -> None:
    # ambiance implements ICAO 1993 on geometric height; pressure altitude is geopotential.
    h = np.linspace(-500.0, 10_500.0, 23)
    atm = Atmosphere(Atmosphere.geop2geom_height(h))
    np.testing.assert_allclose(isa_density(h), atm.density, rtol=2e-6)
    np.testing.assert_allclose(isa_pressure(h), atm.pressure, rtol=2e-6)
    np.testing.assert_allclose(isa_temperature(h), atm.temperature, rtol=1e-9)


def test_stratosphere_against_ambiance() -> None:
    h = np.array([11_500.0, 15_000.0, 19_000.0])
    atm = Atmosphere(Atmosphere.geop2geom_height(h))
    np.testing.assert_allclose(isa_density(h), atm.density, rtol=2e-6)


def test_given_temperature_overrides_deviation() -> None:
    # Ideal gas with the standard pressure: rho = p / (R T), R = 287.05287 J/(kg K) (ICAO Doc 7488).
    p = float(Atmosphere(Atmosphere.geop2geom_height(1_000.0)).pressure[0])
    assert isa_density(1_000.0, temperature=300.0) == pytest.approx(p / (287.05287 * 300.0), rel=2e-6)


def test_pressure_altitude_inverts_the_pressure_law() -> None:
    h = np.array([-400.0, 0.0, 1_234.5, 10_999.0, 12_000.0])
    np.testing.assert_allclose(isa_pressure_altitude(isa_pressure(h)), h, atol=1e-6)
    # 1013.25 hPa is sea level by definition (ICAO Doc 7488).
    assert isa_pressure_altitude(101_325.0) == pytest.approx(0.0, abs=1e-9)


def test_out_of_range_altitude_raises() -> None:
    with pytest.raises(ValueError, match="pressure altitude"):
        isa_density(25_000.0)
