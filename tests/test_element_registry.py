"""The element registry keeps every consumer honest (DEVELOPERS.md, "How to add a hardware element").

Every registered element has a schema entry, a description in docs/case-file.md, and models
(exact response, factors, state space) checked against python-control: the transfer function
of each kind is written below, in this test, from its textbook form (common practice), and
python-control evaluates it and the element's realisation independently.
"""

import os

import control
import numpy as np
import pytest

from damper.model.elements import ELEMENTS, FILTER_KINDS, build, parameter_names

from .conftest import ROOT

W = np.array([0.05, 0.7, 3.0, 12.0, 55.0, 400.0])  # rad/s, a few frequencies across the loop's range

#: kind -> (parameters, python-control transfer function written from the textbook form)
#: (common practice: e.g. a lag 1/(T s + 1), a notch (s^2 + 2 zn w s + w^2)/(s^2 + 2 zd w s + w^2)).
ORACLES = {
    "lag": ({"time_constant": 0.05}, control.tf([1.0], [0.05, 1.0])),
    "second_order": ({"natural_frequency": 40.0, "damping_ratio": 0.6}, control.tf([1600.0], [1.0, 48.0, 1600.0])),
    "washout": ({"time_constant": 1.5}, control.tf([1.5, 0.0], [1.5, 1.0])),
    "lead_lag": ({"lead_time_constant": 0.2, "lag_time_constant": 0.05}, control.tf([0.2, 1.0], [0.05, 1.0])),
    "notch": ({"frequency": 60.0, "depth_damping": 0.02, "width_damping": 0.5},
              control.tf([1.0, 2.4, 3600.0], [1.0, 60.0, 3600.0])),
    # exp(-T s): the exact response against exp written here; the realisation against
    # python-control's own Pade approximant of the same order
    "delay": ({"time": 0.03}, control.tf(*control.pade(0.03, 2))),
}


def _docs():
    with open(os.path.join(ROOT, "docs", "case-file.md"), encoding="utf-8") as fh:
        return fh.read()


def test_every_registered_element_has_an_oracle_here():
    # a new element needs its transfer function written in this test
    assert set(ORACLES) == set(ELEMENTS)


@pytest.mark.parametrize("kind", sorted(ELEMENTS))
def test_registry_entry_is_complete(kind):
    cls = ELEMENTS[kind]
    assert cls.kind == kind and cls.label and cls.formula and cls.parameters
    for p in cls.parameters:
        assert p.unit in ("s", "rad/s", "-") and p.doc
        assert (p.unit == "-") == (p.dimension == "dimensionless")
    element = build(kind, ORACLES[kind][0])
    assert isinstance(element, cls) and element.describe()


@pytest.mark.parametrize("kind", sorted(ELEMENTS))
def test_response_matches_python_control(kind):
    params, tf = ORACLES[kind]
    element = build(kind, params)
    s = 1j * W
    if kind == "delay":
        np.testing.assert_allclose(element.response(s), np.exp(-params["time"] * s), rtol=1e-14)
    else:
        np.testing.assert_allclose(element.response(s), [complex(tf(x)) for x in s], rtol=1e-12)


@pytest.mark.parametrize("kind", sorted(ELEMENTS))
def test_state_space_matches_python_control(kind):
    params, tf = ORACLES[kind]
    element = build(kind, params)
    sys = control.ss(*element.state_space())
    s = 1j * W
    np.testing.assert_allclose([complex(sys(x)) for x in s], [complex(tf(x)) for x in s], rtol=1e-9, atol=1e-12)
    assert element.n_states == sys.nstates


@pytest.mark.parametrize("kind", sorted(k for k in ELEMENTS if k != "delay"))
def test_factors_match_python_control(kind):
    params, tf = ORACLES[kind]
    k, num, den = build(kind, params).factors()
    s = 1j * W
    got = k * np.ones_like(s)
    for c0, c1, c2 in num:
        got = got * (c0 + c1 * s + c2 * s * s)
    for c0, c1, c2 in den:
        got = got / (c0 + c1 * s + c2 * s * s)
    np.testing.assert_allclose(got, [complex(tf(x)) for x in s], rtol=1e-12)


@pytest.mark.parametrize("kind", FILTER_KINDS)
def test_every_filter_kind_is_in_the_schema(kind):
    from damper.case.schema import FILTER, LOOP

    assert LOOP.fields["filters"].item is FILTER
    assert kind in FILTER.fields["kind"].options
    for p in ELEMENTS[kind].parameters:
        spec = FILTER.fields[p.name]
        assert kind in spec.doc and p.doc in spec.doc
        if p.dimension != "dimensionless":
            assert spec.dims == (p.dimension,) and spec.positive == p.positive


def test_non_filter_elements_have_their_own_keys():
    from damper.case.schema import LOOP

    assert [k for k, c in ELEMENTS.items() if not c.in_filters] == ["washout", "delay"]
    assert parameter_names("washout") == tuple(LOOP.fields["washout"].fields)
    assert "delay" in LOOP.fields


@pytest.mark.parametrize("kind", sorted(ELEMENTS))
def test_every_element_is_described_in_the_case_file_reference(kind):
    docs = _docs()
    cls = ELEMENTS[kind]
    assert cls.formula in docs
    if cls.in_filters:
        assert f"`{kind}`: {cls.label} {cls.formula}" in docs
        for p in cls.parameters:
            assert f"| `{p.name}` |" in docs


def test_a_case_filter_builds_the_registered_element():
    # the loader's keys per filter kind are the registry's, and the case builds that element
    from damper.case import load_case_text

    text = open(os.path.join(ROOT, "cases", "light_twin_damper_authority.yaml"), encoding="utf-8").read()
    case = load_case_text(text.replace("loop:\n", "loop:\n  filters:\n    - {kind: notch, frequency: 60, "
                                       "depth_damping: 0.02, width_damping: 0.5}\n", 1))
    (notch,) = case.loop.filters
    element = notch.build()
    assert isinstance(element, ELEMENTS["notch"]) and notch.params == tuple(
        (k, ORACLES["notch"][0][k]) for k in parameter_names("notch"))


def test_the_developers_recipe_names_what_exists():
    from damper.model import elements

    from .test_criteria_registry import _recipe, recipe_paths_exist

    recipe_paths_exist("How to add a hardware element")
    text = _recipe("How to add a hardware element")
    for name in ("ELEMENTS", "ORACLES", "Parameter"):
        assert f"`{name}`" in text
    assert hasattr(elements, "ELEMENTS") and hasattr(elements, "Parameter") and ORACLES
    for attr in ("kind", "label", "formula", "parameters", "in_filters", "n_states"):
        assert f"`{attr}`" in text and all(hasattr(cls, attr) for cls in ELEMENTS.values())
