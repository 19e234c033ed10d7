"""One invented aircraft written six ways gives the same derivatives and the same assessment.

Forms: SI plain numbers; imperial unit strings; force/moment-dimension derivatives
(N/rad, N*m/rad, N*m*s/rad and lbf, lbf*ft: divided by mass or pitch inertia);
non-dimensional coefficients per radian and per degree ("0.0775 1/deg"); and the
speed given as true airspeed, Mach number or equivalent airspeed.

Conversion factors are the exact definitions: 1 ft = 0.3048 m, 1 lb = 0.45359237 kg,
1 kt = 1852/3600 m/s, g0 = 9.80665 m/s^2 (so 1 lbf = 0.45359237 * 9.80665 N and
1 slug = 1 lbf s^2/ft), 1 deg = pi/180 rad. Source: the international yard and pound
agreement and the standard gravity definition (from memory; [derived] products below).
Every aircraft number is invented.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from damper.analysis.assess import assess
from damper.case import load_case_text
from damper.model.airframe import from_coefficients

FT = 0.3048  # m
LB = 0.45359237  # kg
G0 = 9.80665  # m/s^2
LBF = LB * G0  # N  [derived]
SLUG = LBF / FT  # kg  [derived]: lbf s^2 / ft
KT = 1852.0 / 3600.0  # m/s
DEG = math.pi / 180.0  # rad

# --- the invented aircraft, in imperial units -------------------------------
MASS_LB = 15_900.0
IY_SLUG_FT2 = 30_250.0
ALT_FT = 10_000.0
SPEED_KT = 350.0
Z_ALPHA_FT = -1050.0  # ft/s^2 per rad
Z_DELTA_FT = -95.0  # ft/s^2 per rad
Z_Q_FT = -6.5  # ft/s per rad/s
M_ALPHA = -6.2  # 1/s^2
M_ALPHA_DOT = -0.35  # 1/s
M_Q = -1.9  # 1/s
M_DELTA = -14.0  # 1/s^2
GAIN = 0.1  # s (the equivalent-system fit converges for both invented airframes here)

#: Measures found by iteration (the low-order equivalent-system fit stops at its own
#: tolerance, about 1e-9 relative): compared to this looser tolerance. Every exactly
#: computed measure (modes, margins, bare airframe) is compared to 1e-9.
ITERATIVE_RTOL = {"equivalent": 1e-6, "bandwidth": 1e-6}

# --- the same, in SI [derived] ----------------------------------------------
MASS = MASS_LB * LB
IY = IY_SLUG_FT2 * SLUG * FT**2
ALT = ALT_FT * FT
SPEED = SPEED_KT * KT
Z_ALPHA = Z_ALPHA_FT * FT
Z_DELTA = Z_DELTA_FT * FT
Z_Q = Z_Q_FT * FT

LOOP_SI = """loop:
  actuator:
    bandwidth: 30
    rate_limit: {rate}
    travel: {travel}
  rate_sensor:
    time_constant: 0.01
  filters:
    - kind: notch
      frequency: 75.0
      depth_damping: 0.05
      width_damping: 0.5
  delay: 0.025
  sample_rate: 80
""".format(rate=repr(60 * DEG), travel=repr(10 * DEG))

LOOP_UNITS = """loop:
  actuator:
    bandwidth: 30 rad/s
    rate_limit: 60 deg/s
    travel: 10 deg
  rate_sensor:
    time_constant: 10 ms
  filters:
    - kind: notch
      frequency: 75 rad/s
      depth_damping: 0.05
      width_damping: 0.5
  delay: 25 ms
  sample_rate: 80 Hz
"""


def _case(aircraft, speed, derivatives, loop=LOOP_SI, extra_aircraft=""):
    return f"""title: Invented unit-equivalence case
aircraft:
  name: Invented twin
{aircraft}{extra_aircraft}conditions:
  - name: climb
{speed}    altitude: {{alt}}
{derivatives}{loop}"""


SI_AIRCRAFT = f"  mass: {MASS!r}\n  pitch_inertia: {IY!r}\n"
UNIT_AIRCRAFT = f"  mass: {MASS_LB:g} lb\n  pitch_inertia: {IY_SLUG_FT2:g} slug*ft^2\n"

SI_DERIVATIVES = f"""    derivatives:
      Z_alpha: {Z_ALPHA!r}
      Z_q: {Z_Q!r}
      Z_delta: {Z_DELTA!r}
      M_alpha: {M_ALPHA!r}
      M_alpha_dot: {M_ALPHA_DOT!r}
      M_q: {M_Q!r}
      M_delta: {M_DELTA!r}
"""

CASES = {
    "si_plain": _case(SI_AIRCRAFT, f"    airspeed: {SPEED!r}\n", SI_DERIVATIVES).replace("{alt}", repr(ALT)),
    "imperial_strings": _case(
        UNIT_AIRCRAFT,
        f"    airspeed: {SPEED_KT:g} kt\n",
        f"""    derivatives:
      Z_alpha: {Z_ALPHA_FT:g} ft/s^2
      Z_q: {Z_Q_FT:g} ft/s
      Z_delta: {Z_DELTA_FT:g} ft/s**2
      M_alpha: {M_ALPHA:g} 1/s^2
      M_alpha_dot: {M_ALPHA_DOT:g} 1/s
      M_q: {M_Q:g} 1/s
      M_delta: {M_DELTA:g} 1/s^2
""",
        LOOP_UNITS,
    ).replace("{alt}", f"{ALT_FT:g} ft"),
    "si_force_and_moment": _case(
        SI_AIRCRAFT,
        f"    airspeed: {SPEED!r}\n",
        f"""    derivatives:
      Z_alpha: {Z_ALPHA * MASS!r} N/rad
      Z_q: {Z_Q * MASS!r} N*s/rad
      Z_delta: {Z_DELTA * MASS!r} N
      M_alpha: {M_ALPHA * IY!r} N*m/rad
      M_alpha_dot: {M_ALPHA_DOT * IY!r} N*m*s/rad
      M_q: {M_Q * IY!r} N*m*s/rad
      M_delta: {M_DELTA * IY!r} N*m/rad
""",
    ).replace("{alt}", repr(ALT)),
    "imperial_force_and_moment": _case(
        UNIT_AIRCRAFT,
        f"    airspeed: {SPEED_KT:g} kt\n",
        f"""    derivatives:
      Z_alpha: {Z_ALPHA * MASS / LBF!r} lbf/rad
      Z_q: {Z_Q * MASS / LBF!r} lbf*s/rad
      Z_delta: {Z_DELTA * MASS / LBF!r} lbf
      M_alpha: {M_ALPHA * IY / (LBF * FT)!r} lbf*ft/rad
      M_alpha_dot: {M_ALPHA_DOT * IY / (LBF * FT)!r} lbf*ft*s/rad
      M_q: {M_Q * IY / (LBF * FT)!r} ft*lbf*s
      M_delta: {M_DELTA * IY / (LBF * FT)!r} lbf*ft
""",
        LOOP_UNITS,
    ).replace("{alt}", f"{ALT_FT:g} ft"),
}


def _load(name, text):
    case = load_case_text(text, f"{name}.yaml")
    return case


def _assert_same(a, b, where="result", rtol=1e-9):
    """Every array in two (nested) dataclass results agrees to `rtol` (NaN equal to NaN)."""
    if dataclasses.is_dataclass(a) and not isinstance(a, type):
        assert type(a) is type(b), where
        for f in dataclasses.fields(a):
            sub_rtol = max(rtol, ITERATIVE_RTOL.get(f.name, rtol)) if where == "result" else rtol
            _assert_same(getattr(a, f.name), getattr(b, f.name), f"{where}.{f.name}", sub_rtol)
    elif isinstance(a, (tuple, list)):
        assert len(a) == len(b), where
        for i, (x, y) in enumerate(zip(a, b)):
            _assert_same(x, y, f"{where}[{i}]", rtol)
    elif isinstance(a, (np.ndarray, float, complex, np.floating, np.complexfloating)):
        x, y = np.asarray(a), np.asarray(b)
        if x.dtype.kind in "fc":
            np.testing.assert_allclose(x, y, rtol=rtol, atol=1e-12, equal_nan=True, err_msg=where)
        else:
            np.testing.assert_array_equal(x, y, err_msg=where)
    elif isinstance(a, (int, bool, str, type(None))):
        assert a == b, where


@pytest.fixture(scope="module")
def reference():
    case = _load("si_plain", CASES["si_plain"])
    result = assess(case, GAIN)
    assert np.all(result.equivalent.converged)
    return case, result


def test_reference_case_is_the_invented_aircraft(reference):
    case, _ = reference
    c = case.conditions[0]
    assert c.airspeed == pytest.approx(180.0555555555, rel=1e-12)  # [derived] 350 kt * 1852/3600
    assert c.altitude_input == pytest.approx(3048.0, rel=1e-12)  # [derived] 10000 ft * 0.3048
    assert c.mass == pytest.approx(7212.118683, rel=1e-9)  # [derived] 15900 lb * 0.45359237
    assert case.loop.total_delay == pytest.approx(0.025 + 0.5 / 80.0, rel=1e-12)  # [derived]


@pytest.mark.parametrize("name", [n for n in CASES if n != "si_plain"])
def test_same_derivatives_and_assessment(name, reference):
    ref_case, ref_result = reference
    case = _load(name, CASES[name])
    _assert_same(case.derivatives(), ref_case.derivatives(), "derivatives")
    for field in ("airspeed", "mass", "pitch_inertia", "altitude", "density", "dynamic_pressure"):
        assert getattr(case.conditions[0], field) == pytest.approx(getattr(ref_case.conditions[0], field), rel=1e-9)
    _assert_same(case.loop, ref_case.loop, "loop")
    _assert_same(assess(case, GAIN), ref_result)


def test_speed_as_mach_or_equivalent_airspeed(reference):
    ref_case, ref_result = reference
    c = ref_case.conditions[0]
    mach = c.airspeed / c.speed_of_sound
    eas = c.equivalent_airspeed
    for speed in (f"    mach: {mach!r}\n", f"    equivalent_airspeed: {eas!r}\n", f"    equivalent_airspeed: {eas / KT!r} kt\n"):
        text = _case(SI_AIRCRAFT, speed, SI_DERIVATIVES).replace("{alt}", repr(ALT))
        case = _load("speed", text)
        assert case.conditions[0].airspeed == pytest.approx(c.airspeed, rel=1e-12)
        _assert_same(assess(case, GAIN), ref_result)


# --- coefficients: per radian, per degree, and the derivative form they imply ----

S_FT2 = 290.0  # invented wing area, ft^2
C_FT = 7.5  # invented mean chord, ft
COEF_PER_RAD = {"CL_alpha": 4.44, "CD": 0.031, "CL_delta": 0.42, "Cm_alpha": -0.64, "Cm_delta": -1.35}
COEF_RATE = {"Cm_q": -15.5, "Cm_alpha_dot": -5.2, "CL_q": 3.1}  # per rad of c/(2V)-scaled rates


def _coefficient_case(block, geometry):
    return _case(
        SI_AIRCRAFT, f"    airspeed: {SPEED!r}\n", block, extra_aircraft=geometry
    ).replace("{alt}", repr(ALT))


SI_GEOMETRY = f"  wing_area: {S_FT2 * FT**2!r}\n  mean_chord: {C_FT * FT!r}\n"
FT_GEOMETRY = f"  wing_area: {S_FT2:g} ft^2\n  mean_chord: {C_FT:g} ft\n"


def _block(values):
    lines = "".join(f"      {k}: {v}\n" for k, v in values.items())
    return "    coefficients:\n" + lines


def test_coefficients_per_degree_equal_per_radian():
    per_rad = {**COEF_PER_RAD, **COEF_RATE}
    per_deg = {k: (f"{v * DEG!r} 1/deg" if k != "CD" else v) for k, v in per_rad.items()}
    a = _load("per_rad", _coefficient_case(_block(per_rad), SI_GEOMETRY))
    b = _load("per_deg", _coefficient_case(_block(per_deg), FT_GEOMETRY))
    assert b.conditions[0].source == "coefficients"
    _assert_same(b.derivatives(), a.derivatives(), "derivatives")
    ra = assess(a, GAIN)
    assert np.all(ra.equivalent.converged)
    _assert_same(assess(b, GAIN), ra)


def test_the_usual_slip_per_degree_as_plain_number_warns():
    per_rad = {**COEF_PER_RAD, **COEF_RATE, "CL_alpha": 0.0775}  # a per-degree value without its unit
    case = _load("slip", _coefficient_case(_block(per_rad), SI_GEOMETRY))
    assert any("CL_alpha" in w and "1/deg" in w for w in case.warnings)


def test_coefficients_match_their_derivative_form():
    case = _load("coef", _coefficient_case(_block({**COEF_PER_RAD, **COEF_RATE}), SI_GEOMETRY))
    c = case.conditions[0]
    # [derived] the coefficient formulas of damper.model.airframe.from_coefficients, evaluated here
    d = from_coefficients(
        dynamic_pressure=c.dynamic_pressure,
        airspeed=c.airspeed,
        mass=c.mass,
        pitch_inertia=c.pitch_inertia,
        wing_area=S_FT2 * FT**2,
        mean_chord=C_FT * FT,
        **COEF_PER_RAD,
        **COEF_RATE,
    )
    block = "    derivatives:\n" + "".join(
        f"      {k}: {float(getattr(d, k))!r}\n"
        for k in ("Z_alpha", "Z_q", "Z_delta", "M_alpha", "M_alpha_dot", "M_q", "M_delta")
    )
    other = _load("deriv", _case(SI_AIRCRAFT, f"    airspeed: {SPEED!r}\n", block).replace("{alt}", repr(ALT)))
    _assert_same(other.derivatives(), case.derivatives(), "derivatives")
    _assert_same(assess(other, GAIN), assess(case, GAIN))
