"""Property tests of input handling: nothing a person types crashes the tool.

* A case built from random but type-valid values either validates and analyses
  (``assess`` returns arrays that are finite or NaN, never raises) or is refused
  with a :class:`CaseError` -- never any other exception.
* Random junk text, random bytes, YAML-looking token soup and random nested
  structures (also planted into an otherwise valid case) give a Case or a
  CaseError from :func:`damper.case.load_case_text`, never anything else.

Example counts are modest and derandomized so that CI runs are reproducible.
Every value is invented; no check value needs a source (the properties are
"no exception other than CaseError" and "finite or NaN").
"""

from __future__ import annotations

import dataclasses
import warnings

import numpy as np
import yaml
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from damper.analysis.assess import assess
from damper.case import load_case_text
from damper.errors import CaseError

SETTINGS = dict(derandomize=True, deadline=None, suppress_health_check=[HealthCheck.too_slow], database=None)

# --------------------------------------------------------------------------
# strategies
# --------------------------------------------------------------------------

ANY_FINITE = st.floats(allow_nan=False, allow_infinity=False)
EDGES = st.sampled_from([0.0, -0.0, -1.0, 1e-300, -1e-300, 1e300, -1e300, 5e-324])


_PICK = st.sampled_from(["plausible"] * 22 + ["any", "edge"])  # about one wild value per case


def number(lo, hi):
    """Mostly a plausible value in [lo, hi]; sometimes any finite float or an edge value."""
    plausible = st.floats(lo, hi)
    return _PICK.flatmap(lambda pick: {"plausible": plausible, "any": ANY_FINITE, "edge": EDGES}[pick])


def maybe(strategy):
    return st.one_of(st.none(), strategy)


@st.composite
def derivatives(draw):
    d = {
        "Z_alpha": draw(number(-2000.0, 100.0)),
        "M_alpha": draw(number(-60.0, 10.0)),
        "M_q": draw(number(-10.0, 1.0)),
        "M_delta": draw(number(-80.0, 20.0)),
    }
    for key, strat in (("Z_q", number(-50.0, 50.0)), ("Z_delta", number(-200.0, 50.0)), ("M_alpha_dot", number(-3.0, 1.0))):
        value = draw(maybe(strat))
        if value is not None:
            d[key] = value
    return d


@st.composite
def coefficients(draw):
    d = {
        "CL_alpha": draw(number(0.5, 7.0)),
        "CD": draw(number(0.0, 0.2)),
        "Cm_alpha": draw(number(-3.0, 0.5)),
        "Cm_q": draw(number(-40.0, 0.0)),
        "Cm_delta": draw(number(-3.0, 0.5)),
    }
    for key, strat in (("CL_delta", number(-1.0, 1.0)), ("Cm_alpha_dot", number(-15.0, 0.0)), ("CL_q", number(0, 10))):
        value = draw(maybe(strat))
        if value is not None:
            d[key] = value
    return d


@st.composite
def condition(draw, i):
    c = {"name": f"point {i}", "altitude": draw(number(-1000.0, 20000.0))}
    speed = draw(st.sampled_from(["airspeed", "equivalent_airspeed", "mach"]))
    c[speed] = draw(number(0.05, 2.0) if speed == "mach" else number(20.0, 400.0))
    if draw(st.booleans()):
        c["derivatives"] = draw(derivatives())
    else:
        c["coefficients"] = draw(coefficients())
    if draw(st.booleans()):
        c["mass"] = draw(number(100.0, 1e5))
    return c


@st.composite
def second_order(draw):
    return {"natural_frequency": draw(number(5.0, 300.0)), "damping_ratio": draw(number(0.05, 2.0))}


@st.composite
def actuator(draw):
    form = draw(st.sampled_from(["bandwidth", "time_constant", "second_order"]))
    if form == "second_order":
        a = draw(second_order())
    elif form == "bandwidth":
        a = {"bandwidth": draw(number(2.0, 200.0))}
    else:
        a = {"time_constant": draw(number(0.002, 0.5))}
    if draw(st.booleans()):
        a["rate_limit"] = draw(number(0.2, 3.0))
    if draw(st.booleans()):
        a["travel"] = draw(number(0.02, 0.5))
    return a


@st.composite
def a_filter(draw):
    kind = draw(st.sampled_from(["lag", "lead_lag", "notch", "second_order"]))
    if kind == "lag":
        return {"kind": kind, "time_constant": draw(number(0.001, 0.5))}
    if kind == "lead_lag":
        return {"kind": kind, "lead_time_constant": draw(number(0.0, 1.0)), "lag_time_constant": draw(number(0.001, 1.0))}
    if kind == "notch":
        return {
            "kind": kind,
            "frequency": draw(number(5.0, 300.0)),
            "depth_damping": draw(number(0.0, 0.3)),
            "width_damping": draw(number(0.05, 1.5)),
        }
    return {"kind": kind, **draw(second_order())}


@st.composite
def loop(draw):
    out = {}
    if draw(st.booleans()):
        out["actuator"] = draw(actuator())
    if draw(st.booleans()):
        out["rate_sensor"] = (
            draw(second_order()) if draw(st.booleans()) else {"time_constant": draw(number(0.001, 0.1))}
        )
    if draw(st.booleans()):
        out["washout"] = {"time_constant": draw(number(0.2, 10.0))}
    if draw(st.booleans()):
        out["filters"] = draw(st.lists(a_filter(), max_size=2))
    if draw(st.booleans()):
        out["delay"] = draw(number(0.0, 0.1))
    if draw(st.booleans()):
        out["sample_rate"] = draw(number(20.0, 400.0))
    if draw(st.booleans()):
        out["pade_order"] = draw(st.integers(-2, 10))
    return out


@st.composite
def case_dict(draw):
    aircraft = {"mass": draw(number(100.0, 1e5)), "pitch_inertia": draw(number(100.0, 1e6))}
    if draw(st.integers(0, 4)):  # mostly give the geometry that coefficients need
        aircraft["wing_area"] = draw(number(2.0, 200.0))
        aircraft["mean_chord"] = draw(number(0.3, 8.0))
    doc = {
        "title": "Invented random case",
        "aircraft": aircraft,
        "conditions": [draw(condition(i)) for i in range(draw(st.integers(1, 3)))],
    }
    if draw(st.booleans()):
        doc["atmosphere"] = {"altitude_kind": draw(st.sampled_from(["geopotential", "geometric"]))}
    if draw(st.booleans()):
        doc["loop"] = draw(loop())
    if draw(st.booleans()):
        doc["analysis"] = {
            "frequency_low": draw(number(1e-3, 1.0)),
            "frequency_high": draw(number(10.0, 1e3)),
            "points_per_decade": draw(st.integers(10, 300)),
        }
    return doc


GAINS = st.floats(-20.0, 20.0)


def _assert_finite_or_nan(obj, where="result", seen=None):
    """Every float array of the measures in a (nested) dataclass result is finite or NaN (no +-inf).

    Requirement evaluation (``damper.requirements``) is skipped: its bounds and
    slacks use +-inf for "no bound" by design.
    """
    seen = set() if seen is None else seen
    if id(obj) in seen or type(obj).__module__.startswith("damper.requirements"):
        return
    seen.add(id(obj))
    if isinstance(obj, np.ndarray) or isinstance(obj, (float, complex, np.floating, np.complexfloating)):
        a = np.asarray(obj)
        if a.dtype.kind in "fc":
            assert not np.any(np.isinf(a)), f"{where} has infinite values"
        return
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        for f in dataclasses.fields(obj):
            _assert_finite_or_nan(getattr(obj, f.name), f"{where}.{f.name}", seen)
    elif isinstance(obj, (tuple, list)):
        for i, item in enumerate(obj):
            _assert_finite_or_nan(item, f"{where}[{i}]", seen)


def _load(text):
    """Case or None (for a CaseError); any other exception fails the test."""
    try:
        case = load_case_text(text, "random.yaml")
    except CaseError as exc:
        line = str(exc)
        assert line.startswith("random.yaml"), line
        assert "\n" not in line
        event("refused: " + exc.message.split("(")[0].split(";")[0][:40])
        return None
    event("accepted")
    return case


# --------------------------------------------------------------------------
# properties
# --------------------------------------------------------------------------


@settings(max_examples=120, **SETTINGS)
@given(case_dict(), GAINS)
def test_random_valid_typed_case_analyses_or_is_refused(doc, gain):
    case = _load(yaml.safe_dump(doc, sort_keys=False))
    if case is None:
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        result = assess(case, gain)
    _assert_finite_or_nan(result)


@settings(max_examples=40, **SETTINGS)
@given(case_dict().filter(lambda d: True), GAINS)
def test_random_case_with_unit_strings(doc, gain):
    """The same random cases with every plain number written as a unit string."""

    def with_units(obj, key=""):
        if isinstance(obj, dict):
            return {k: with_units(v, k) for k, v in obj.items()}
        if isinstance(obj, list):
            return [with_units(v, key) for v in obj]
        if isinstance(obj, float) and key in UNIT_OF:
            return f"{obj!r} {UNIT_OF[key]}"
        return obj

    case = _load(yaml.safe_dump(with_units(doc), sort_keys=False))
    if case is None:
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        _assert_finite_or_nan(assess(case, gain))


UNIT_OF = {
    "mass": "kg",
    "pitch_inertia": "kg*m^2",
    "wing_area": "m^2",
    "mean_chord": "m",
    "altitude": "m",
    "airspeed": "m/s",
    "equivalent_airspeed": "m/s",
    "Z_alpha": "m/s^2",
    "M_alpha": "1/s^2",
    "M_q": "1/s",
    "M_delta": "1/s^2",
    "bandwidth": "rad/s",
    "time_constant": "s",
    "natural_frequency": "rad/s",
    "frequency": "rad/s",
    "delay": "s",
    "sample_rate": "Hz",
    "rate_limit": "rad/s",
    "travel": "rad",
}

YAML_TOKENS = st.sampled_from(
    [
        "title:", "aircraft:", "conditions:", "loop:", "mass:", "name:", "airspeed:", "derivatives:", "M_q:",
        " ", "  ", "\n", "\n  ", "\n    ", "- ", "[", "]", "{", "}", ":", ": ", ",", "&a ", "*a", "<<: ", "? ",
        "!!python/name:os.system", "!!python/object/apply:os.system ['true']", "!!binary ", "!!set ", "!!omap ",
        "!!float ", "!!int ", "!custom ", "'", '"', "\t", "0x1F", "05", "1:30", "1e400", "1" * 70, ".nan", ".inf",
        "---", "...", "|", ">", "#", "%YAML 1.1\n", "~", "null", "yes", "off", "2024-13-45", "150 kt",
        "1/deg", "Hz", "\u00b0", "\ufeff", "\x00", "\x85", "\\", "%", "@", "`",
    ]
)


@settings(max_examples=300, **SETTINGS)
@given(st.lists(YAML_TOKENS, max_size=40).map("".join))
def test_yaml_token_soup_never_crashes(text):
    _load(text)


@settings(max_examples=150, **SETTINGS)
@given(st.text(max_size=300))
def test_random_text_never_crashes(text):
    _load(text)


@settings(max_examples=100, **SETTINGS)
@given(st.binary(max_size=300))
def test_random_bytes_never_crash(data):
    _load(data)


SCALARS = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(),
    st.floats(),
    st.text(max_size=20),
    st.sampled_from(["150 kt", "kt", "5 Hz", "0.0775 1/deg", "-2.1e6 N*m/rad", "inf m/s", "1e400", ""]),
)
NESTED = st.recursive(
    SCALARS,
    lambda children: st.one_of(
        st.lists(children, max_size=4),
        st.dictionaries(st.one_of(st.text(max_size=12), st.integers(), st.booleans()), children, max_size=4),
    ),
    max_leaves=25,
)


@settings(max_examples=150, **SETTINGS)
@given(NESTED)
def test_random_structure_never_crashes(obj):
    _load(yaml.safe_dump(obj, allow_unicode=True))


def _paths(obj, prefix=()):
    """Every key path of a nested dict/list, shortest first."""
    out = [prefix] if prefix else []
    if isinstance(obj, dict):
        for k, v in obj.items():
            out += _paths(v, prefix + (k,))
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            out += _paths(v, prefix + (i,))
    return out


BASE = {
    "title": "Invented base case",
    "aircraft": {"mass": 6000.0, "pitch_inertia": 30000.0, "wing_area": 28.0, "mean_chord": 2.4},
    "conditions": [
        {
            "name": "cruise",
            "airspeed": 160.0,
            "altitude": 4000.0,
            "derivatives": {"Z_alpha": -320.0, "M_alpha": -9.0, "M_q": -1.6, "M_delta": -13.0},
        },
        {
            "name": "approach",
            "mach": 0.2,
            "altitude": 300.0,
            "coefficients": {"CL_alpha": 5.0, "CD": 0.06, "Cm_alpha": -0.7, "Cm_q": -14.0, "Cm_delta": -1.2},
        },
    ],
    "loop": {
        "actuator": {"natural_frequency": 70.0, "damping_ratio": 0.7, "rate_limit": "60 deg/s"},
        "rate_sensor": {"time_constant": 0.01},
        "washout": {"time_constant": 1.5},
        "filters": [{"kind": "notch", "frequency": 90.0, "depth_damping": 0.05, "width_damping": 0.5}],
        "delay": 0.02,
        "sample_rate": 80.0,
    },
    "analysis": {"frequency_low": 0.01, "frequency_high": 500.0},
}
BASE_PATHS = _paths(BASE)


@settings(max_examples=150, **SETTINGS)
@given(st.sampled_from(BASE_PATHS), NESTED, GAINS)
def test_junk_planted_in_a_valid_case(path, junk, gain):
    import copy

    doc = copy.deepcopy(BASE)
    node = doc
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = junk
    case = _load(yaml.safe_dump(doc, allow_unicode=True, sort_keys=False))
    if case is None:
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        _assert_finite_or_nan(assess(case, gain))


def test_base_case_is_valid():
    case = load_case_text(yaml.safe_dump(BASE, sort_keys=False), "base.yaml")
    assert case.names == ("cruise", "approach")
