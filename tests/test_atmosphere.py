"""U.S. Standard Atmosphere 1976 against published table values."""

import numpy as np
import pytest

from damper.atmosphere import (
    RHO0,
    geometric_from_geopotential,
    geopotential_from_geometric,
    standard_atmosphere,
)

# Source: U.S. Standard Atmosphere 1976 table by geometric altitude, read to 4-6
# significant figures in a mechanical engineers' handbook (shared/references.md s.4).
TABLE = [
    # Z (m), T (K), p (Pa), rho (kg/m^3), a (m/s)
    (0, 288.150, 101325, 1.22500, 340.294),
    (1000, 281.651, 89876, 1.11166, 336.435),
    (3000, 268.659, 70121, 0.90925, 328.584),
    (5000, 255.676, 54048, 0.73643, 320.546),
    (8000, 236.215, 35652, 0.52579, 308.105),
    (11000, 216.774, 22700, 0.36480, 295.154),
]


@pytest.mark.parametrize("z, t, p, rho, a", TABLE)
def test_table_by_geometric_altitude(z, t, p, rho, a):
    air = standard_atmosphere(geopotential_from_geometric(z))
    assert air.temperature == pytest.approx(t, abs=2e-3)
    assert air.pressure == pytest.approx(p, rel=5e-5)
    assert air.density == pytest.approx(rho, rel=5e-5)
    assert air.speed_of_sound == pytest.approx(a, abs=2e-3)


def test_tropopause_by_geopotential_altitude():
    # Source: 1976 standard (ICAO tables run by geopotential altitude) [derived in references.md]
    air = standard_atmosphere(11000.0)
    assert air.temperature == pytest.approx(216.65, abs=1e-9)
    assert air.pressure == pytest.approx(22632, rel=5e-5)
    assert air.density == pytest.approx(0.36392, rel=5e-5)


def test_sea_level_density_imperial():
    # Source: standard sea-level density 0.0023769 slug/ft^3 (references.md s.4)
    slug_per_ft3 = 14.593902937 / 0.3048**3
    assert RHO0 / slug_per_ft3 == pytest.approx(0.0023769, rel=5e-5)


def test_batched_equals_scalar_and_altitude_conversion_roundtrip():
    h = np.linspace(-1000, 80000, 57)
    batched = standard_atmosphere(h)
    for i in (0, 10, 30, 56):
        one = standard_atmosphere(h[i])
        assert one.pressure == batched.pressure[i]
    assert np.allclose(geopotential_from_geometric(geometric_from_geopotential(h)), h)


def test_outside_model_is_refused():
    with pytest.raises(ValueError, match="outside the standard atmosphere"):
        standard_atmosphere(90000.0)
