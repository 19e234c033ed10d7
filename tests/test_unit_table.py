"""damper's small unit table against the pint units library (the oracle): every entry's factor,
dimension and canonical name, and random products, powers and quotients of them, give what pint
gives. Source of the factors: pint's own definitions file (default_en.txt), which these tests
read through pint; the exact definitions in damper/unit_table.py (international foot and pound,
standard gravity, nautical mile) are those of NIST SP 811 (from memory)."""

from __future__ import annotations

import functools
import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from damper.unit_table import UNITS, evaluate
from damper.units import _dims, _table_dims, parse_quantity

@functools.lru_cache(maxsize=None)
def ureg():
    """pint's registry, built once by the first test that needs it (not at collection: importing
    pint and building it took about 0.6 s of CPU, which every pytest worker paid)."""
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def pint_parse(text):
    q = ureg().Quantity(text)
    b = q.to_base_units()
    return float(b.magnitude), _dims(b.dimensionality), tuple(n for n, _ in q.unit_items())


@pytest.mark.parametrize("name", sorted(UNITS))
def test_every_entry_is_pints_unit(name):
    factor, exps, names = evaluate(name)
    magnitude, dims, pint_names = pint_parse("1 " + name)
    assert factor == pytest.approx(magnitude, rel=2e-16)
    assert _table_dims(exps) == dims
    assert names == pint_names
    angle = UNITS[name][2]
    assert angle == ("radian" in str(ureg().get_root_units(pint_names[0])[1]))


NAMES = sorted(UNITS)


@st.composite
def expressions(draw):
    parts = []
    for k in range(draw(st.integers(1, 4))):
        name = draw(st.sampled_from(NAMES))
        p = draw(st.sampled_from(["", "**2", "**-1", "^3", "**(1/2)", "**(-2)"]))
        if k:
            parts.append(draw(st.sampled_from([" * ", " / ", " ", "*", "/"])))
        parts.append(name + p)
    text = "".join(parts)
    if draw(st.booleans()):
        text = "1/" + text if not text.startswith("1/") and " " not in text else text
    return text


@settings(max_examples=300, deadline=None)
@given(expressions(), st.floats(min_value=1e-6, max_value=1e6))
def test_random_products_equal_pint(unit, number):
    text = f"{number!r} {unit}"
    factor, exps, names = evaluate(unit)
    magnitude, dims, pint_names = pint_parse(text)
    assert number * factor == pytest.approx(magnitude, rel=1e-14)  # [derived] a few roundings of 1.1e-16
    assert _table_dims(exps) == dims
    assert sorted(names) == sorted(pint_names)  # a set: only "any hertz" and "any angle" are asked of it


@pytest.mark.parametrize(
    "text,allowed,expected",
    [
        ("120 kt", ("speed",), 120 * 1852 / 3600),  # Source: 1 kt = 1852 m / 3600 s (exact by definition)
        ("8000 ft", ("length",), 8000 * 0.3048),  # Source: international foot, 0.3048 m exact
        ("-0.05 1/deg", ("dimensionless",), -0.05 * 180 / math.pi),
        ("9800 kg*m**2", ("inertia",), 9800.0),
        ("2.5 slug*ft**2", ("inertia",), 2.5 * 14.593902937206364 * 0.3048**2),  # Source: slug = lbf s^2/ft
        ("40 deg/s", ("angular_rate",), 40 * math.pi / 180),
        ("-2.1e6 N*m/rad", ("moment",), -2.1e6),
        ("101.325 kPa", ("pressure",), 101325.0),
    ],
)
def test_quantities_through_the_table(text, allowed, expected):
    value, dim = parse_quantity(text, allowed)
    assert value == pytest.approx(expected, rel=1e-15) and dim == allowed[0]


def test_names_outside_the_table_still_parse_through_pint():
    value, dim = parse_quantity("3 yard", ("length",))  # not in the table: pint answers
    assert value == pytest.approx(3 * 0.9144, rel=1e-15)  # Source: international yard, 0.9144 m exact
    value, _ = parse_quantity("50 km/h", ("speed",))
    assert value == pytest.approx(50 / 3.6, rel=1e-15)
