"""The JSON keys of result fields come from the fields' metadata (damper/quantities.py).

Checks: the unit-suffix rule against a table written here (common practice: the unit spelled
in the key, lower case, ``/`` and spaces as ``_``); every annotated unit is an SI unit of
damper's unit table or one of the few non-SI units the documents publish on purpose; the keys
an ``assess`` document and a case summary write for annotated fields are the metadata's keys,
and each value there is the field's value (read back through the metadata, not through the
serializer); no document module types such a key by hand; docs/json-keys.md is current.
"""

from __future__ import annotations

import ast
import dataclasses
import importlib
import math
import os

import numpy as np
import pytest

from damper.quantities import quantities, quantity, quantity_property, rule_key, unit_suffix
from damper.quantity_docs import TYPES, page

from .conftest import ROOT

DOCUMENTS = os.path.join(ROOT, "damper", "output", "documents")

#: unit -> key suffix (common practice: the unit in the key, lower case, "/" and spaces as "_",
#: powers as plain digits, nothing for a dimensionless value).
SUFFIXES = {
    "rad/s": "_rad_s",
    "1/s": "_1_s",
    "1/s^2": "_1_s2",
    "dB": "_db",
    "deg": "_deg",
    "s": "_s",
    "rad": "_rad",
    "m": "_m",
    "m/s": "_m_s",
    "m/s^2": "_m_s2",
    "m^2": "_m2",
    "kg": "_kg",
    "kg m^2": "_kg_m2",
    "kg/m^3": "_kg_m3",
    "1/(m s)": "_1_m_s",
    "Pa": "_pa",
    "Hz": "_hz",
    "g": "_g",
    "": "",
}

#: Units the documents publish in other than SI on purpose (common practice in handling
#: qualities: margins in dB and deg, load factor in g).
NOT_SI = {"dB", "deg", "g", "g/rad"}

#: Fields whose JSON key is not the rule's, each with why (the published documents keep it).
EXPLICIT = {
    ("Condition", "altitude"): "geopotential_altitude_m",  # the atmosphere's altitude
    ("Condition", "altitude_input"): "altitude_m",  # the altitude as the case gave it
    ("LoopSpec", "delay"): "computation_delay_s",
    ("LoopSpec", "rate_limit"): "actuator_rate_limit_rad_s",
    ("LoopSpec", "travel"): "actuator_travel_rad",
    ("ServoLimits", "rate_limit"): "actuator_rate_limit_rad_s",
    ("ServoLimits", "travel"): "actuator_travel_rad",
    ("AttitudeBandwidth", "phase_crossover"): "attitude_phase_crossover_rad_s",
    ("Assessment", "gains"): "gain_s",  # one gain per point of the batch
    ("Assessment", "n_alpha"): "n_alpha_g_per_rad",
    ("CaseResponses", "gains"): "gain_s",
    ("FailureRun", "gains"): "gain_s",
    ("ResponseMeasures", "settling_time"): "settling_time_5pct_s",
    ("ResponseMeasures", "overshoot"): "overshoot_ratio",
    ("ResponseMeasures", "time_at_position_limit"): "time_at_travel_limit_s",
    ("BreakpointDesign", "gains"): "gain_s",
    ("Verification", "gains"): "gain_s",
    ("Verification", "smallest_margin_db"): "smallest_gain_margin_db",
    ("WorstCase", "start_slack"): "worst_evaluated_slack",
    ("WorstCase", "damping"): "damping_ratio",
    # per second, written "_per_s" in the published turbulence contract (issue 22)
    ("TurbulenceResult", "rate_limit_exceedances_per_s"): "rate_limit_exceedances_per_s",
    ("TurbulenceResult", "authority_exceedances_per_s"): "authority_exceedances_per_s",
}


def _types():
    return [getattr(importlib.import_module(m), n) for m, n in TYPES]


@pytest.mark.parametrize("unit,suffix", sorted(SUFFIXES.items()))
def test_unit_suffix_rule(unit, suffix):
    assert ("_" + unit_suffix(unit) if unit_suffix(unit) else "") == suffix
    assert rule_key("natural_frequency", unit) == "natural_frequency" + suffix
    assert rule_key("x" + suffix, unit) == "x" + suffix  # a name that already carries its unit


def test_metadata_survives_a_frozen_dataclass_and_a_property():
    @dataclasses.dataclass(frozen=True)
    class Example:
        period: float = quantity("s")
        label: str = "a"
        margin: float = quantity("dB", key="smallest_margin_db", default=1.0)

        @quantity_property("rad/s")
        def frequency(self):
            return 2 * math.pi / self.period

    e = Example(2.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        e.period = 3.0
    got = [(q.attribute, q.key, q.unit) for q in quantities(e)]
    assert got == [("period", "period_s", "s"), ("margin", "smallest_margin_db", "dB"),
                   ("frequency", "frequency_rad_s", "rad/s")]
    assert [q.key for q in quantities(Example, ("frequency", "period"))] == ["frequency_rad_s", "period_s"]
    with pytest.raises(KeyError):
        quantities(e, ("label",))


def test_point_writes_the_named_values_in_the_given_order():
    from damper.output.documents.serialize import point, series

    @dataclasses.dataclass(frozen=True)
    class Result:
        natural_frequency: np.ndarray = quantity("rad/s")
        time_delay: np.ndarray = quantity("s")
        limit: float | None = quantity("rad", default=None)

    r = Result(np.array([[1.5, np.nan], [2.0, np.inf]]), np.array([0.1]))
    assert point(r, (1, 0), ("natural_frequency",)) == {"natural_frequency_rad_s": 2.0}
    # NaN and infinities are JSON null (docs/theory.md: null = no such value); None stays None
    assert point(r, (0, 1), ("natural_frequency", "limit")) == {"natural_frequency_rad_s": None, "limit_rad": None}
    # the order is the caller's, not the declaration's
    assert list(point(r, 2, ("time_delay", "natural_frequency"), flat=True)) == ["time_delay_s", "natural_frequency_rad_s"]
    # flat: a single value stands for every index (a value broadcast over the conditions)
    assert point(r, 2, ("time_delay", "natural_frequency"), flat=True) == {"time_delay_s": 0.1, "natural_frequency_rad_s": 2.0}
    assert series(r, ("natural_frequency",)) == {"natural_frequency_rad_s": [1.5, None, 2.0, None]}


def test_every_annotated_key_follows_the_rule_or_is_listed():
    found = {}
    for cls in _types():
        for q in quantities(cls):
            if q.key != rule_key(q.attribute, q.unit):
                found[(cls.__name__, q.attribute)] = q.key
    assert found == EXPLICIT


def test_every_annotated_unit_is_si_in_the_unit_table_or_a_published_exception():
    from damper.unit_table import evaluate

    for cls in _types():
        for q in quantities(cls):
            if q.unit in NOT_SI or not unit_suffix(q.unit):
                continue
            factor, _, _ = evaluate(q.unit)  # raises NotInTable for a unit the table does not know
            assert factor == 1.0, f"{cls.__name__}.{q.attribute}: {q.unit} is not SI"


def _annotated_classes_in(path):
    """Names of the classes of a module that declare a field with quantity(...) or quantity_property(...)."""
    with open(path, encoding="utf-8") as fh:
        tree = ast.parse(fh.read(), path)
    out = []
    for node in tree.body:
        if isinstance(node, ast.ClassDef):
            calls = [c for c in ast.walk(node) if isinstance(c, ast.Call) and isinstance(c.func, ast.Name)]
            if any(c.func.id in ("quantity", "quantity_property") for c in calls):
                out.append(node.name)
    return out


def test_the_page_lists_every_annotated_type_and_is_current():
    listed = set(TYPES)
    for base, _, names in os.walk(os.path.join(ROOT, "damper")):
        for name in names:
            if name.endswith(".py") and name != "quantities.py":
                path = os.path.join(base, name)
                module = os.path.relpath(path, ROOT)[:-3].replace(os.sep, ".")
                for cls in _annotated_classes_in(path):
                    assert (module, cls) in listed, f"add ({module!r}, {cls!r}) to damper.quantity_docs.TYPES"
    with open(os.path.join(ROOT, "docs", "json-keys.md"), encoding="utf-8") as fh:
        assert fh.read() == page(), "run: python -m damper.quantity_docs > docs/json-keys.md"


# ---------------------------------------------------------------------------------------
# documents
# ---------------------------------------------------------------------------------------
def _by_key(obj):
    return {q.key: q.attribute for q in quantities(obj)}


def _check_object(json_obj, obj, index, where):
    """Every key of `json_obj` that is a metadata key of `obj` holds that field's value at `index`."""
    seen = []
    for key, attr in _by_key(obj).items():
        if key not in json_obj:
            continue
        value = getattr(obj, attr)
        if value is not None and index is not None:
            value = value[index]
        expected = None if value is None or not math.isfinite(float(value)) else float(value)
        assert json_obj[key] == expected, f"{where}.{key} (field {type(obj).__name__}.{attr})"
        seen.append(key)
    return seen


def _assess(name):
    from damper.analysis.assess import assess
    from damper.case import load_case
    from damper.output.documents.jsonout import assess_document

    case = load_case(os.path.join(ROOT, "cases", f"{name}.yaml"))
    result = assess(case, np.full(len(case.conditions), 0.1))
    return case, result, assess_document(case, result)


# The keys of the published assess document (docs/theory.md section 8 and damper's JSON
# since its first version; written here, not read from the code).
ASSESS_KEYS = {
    "flight": ["airspeed_m_s", "equivalent_airspeed_m_s", "altitude_m", "mach", "dynamic_pressure_pa", "mass_kg"],
    "bare.short_period": ["damping_ratio", "natural_frequency_rad_s", "period_s", "time_to_half_s",
                          "time_to_double_s", "roots"],
    "closed_loop.short_period": ["damping_ratio", "natural_frequency_rad_s", "period_s", "time_to_half_s",
                                 "ambiguous"],
    "closed_loop.equivalent": ["damping_ratio", "natural_frequency_rad_s", "time_delay_s", "gain_1_s2",
                               "inv_t_theta2_1_s", "mismatch", "converged", "large_mismatch", "delay_model"],
    "closed_loop.handling": ["n_alpha_g_per_rad", "cap_equivalent", "cap_modal", "attitude_phase_crossover_rad_s",
                             "bandwidth_phase_rad_s", "bandwidth_gain_rad_s", "bandwidth_rad_s", "phase_delay_s"],
}


def _at(doc, path):
    for part in path.split("."):
        doc = doc[part]
    return doc


@pytest.mark.parametrize("name", ["utility_single_aft_cg", "survey_uav_loiter_longitudinal"])
def test_assess_document_keys_are_the_metadata_keys_with_the_fields_values(name):
    case, result, doc = _assess(name)
    longitudinal = result.bare_phugoid is not None
    for i, entry in enumerate(doc["conditions"]):
        ix = (i,)
        bi = (i,) + (0,) * (np.ndim(result.bare.damping_ratio) - 1)
        for path, keys in ASSESS_KEYS.items():
            extra = ["flight_path_angle_rad"] if (path == "flight" and longitudinal) else []
            extra += ["phugoid_factor_removed", "plain_form"] if (path == "closed_loop.equivalent" and longitudinal) else []
            assert list(_at(entry, path)) == keys + extra, path
        cl = entry["closed_loop"]
        pairs = [
            (entry["flight"], case.conditions[i], None, "flight"),
            (entry["bare"]["short_period"], result.bare, bi, "bare.short_period"),
            (cl["short_period"], result.modes.short_period, ix, "closed_loop.short_period"),
            (cl["equivalent"], result.equivalent, ix, "closed_loop.equivalent"),
            (cl["handling"], result, ix, "closed_loop.handling"),
            (cl["handling"], result.bandwidth, ix, "closed_loop.handling"),
            (entry["margins"], result.margins, ix, "margins"),
        ]
        if longitudinal:
            pairs += [
                (entry["bare"]["phugoid"], result.bare_phugoid, bi, "bare.phugoid"),
                (cl["phugoid"], result.modes.phugoid, ix, "closed_loop.phugoid"),
                (cl["short_period_two_state"], result.two_state, ix, "closed_loop.short_period_two_state"),
                (cl["equivalent"]["plain_form"], result.equivalent_plain, ix, "closed_loop.equivalent.plain_form"),
            ]
        for json_obj, obj, index, where in pairs:
            assert _check_object(json_obj, obj, index, where), f"{where}: no annotated key"
        margin_keys = [k for k in entry["margins"] if k.endswith(("_db", "_deg", "_rad_s", "_s")) or k == "disk_margin"]
        assert set(margin_keys) <= set(_by_key(result.margins)), margin_keys


def test_case_summary_keys_are_the_metadata_keys_with_the_fields_values():
    from damper.case import load_case
    from damper.output.documents.design import case_summary

    case = load_case(os.path.join(ROOT, "cases", "survey_uav_loiter_longitudinal.yaml"))
    summary = case_summary(case)
    assert len(_check_object(summary["aircraft"], case.aircraft, None, "aircraft")) == 4
    assert len(_check_object(summary["loop"], case.loop, None, "loop")) == 5  # authority keys: failures.json only
    for c, entry in zip(case.conditions, summary["conditions"]):
        assert len(_check_object(entry, c, None, "conditions[]")) == 9
        d = _check_object(entry["derivatives"], c.derivatives, None, "derivatives")
        assert d == [k for k in entry["derivatives"]]  # every derivative key is a field's, in field order


# The keys of a response's measures in responses.json (docs/responses.md; written here).
RESPONSE_KEYS = ["time_to_half_s", "settling_time_5pct_s", "overshoot_ratio", "peak_pitch_rate_rad_s", "peak_alpha_rad",
                 "peak_load_factor_g", "peak_surface_rad", "peak_surface_rate_rad_s", "time_at_rate_limit_s",
                 "time_at_travel_limit_s", "input_end_s"]
AUTHORITY_KEYS = ["time_at_authority_limit_s", "time_at_authority_rate_limit_s", "peak_damper_demand_rad"]


def _check_flat(json_obj, obj, i, where):
    """As :func:`_check_object`, each value flattened and a single value standing for every condition."""
    seen = []
    for key, attr in _by_key(obj).items():
        if key in json_obj:
            a = np.asarray(getattr(obj, attr), dtype=float).reshape(-1)
            value = float(a[i] if a.size > 1 else a[0])
            assert json_obj[key] == (value if math.isfinite(value) else None), f"{where}.{key}"
            seen.append(key)
    return seen


@pytest.mark.slow
def test_responses_document_keys_are_the_metadata_keys_with_the_fields_values():
    from damper.analysis.response import respond_case
    from damper.case import load_case
    from damper.output.documents.responses import response_document

    case = load_case(os.path.join(ROOT, "cases", "light_twin_damper_authority.yaml"))  # authority and limits
    result = respond_case(case, np.full(len(case.conditions), 0.1))
    doc = response_document(case, result)
    assert _check_object(doc["limits"], result, None, "limits") == ["rate_limit_rad_s", "travel_rad"]
    for i, entry in enumerate(doc["conditions"]):
        assert list(entry)[:3] == ["name", "gain_s", "airspeed_m_s"]
        _check_object(entry, result, (i,), "conditions[]")
        _check_object(entry, case.conditions[i], None, "conditions[]")
        for res, run in zip(result.responses, entry["responses"]):
            assert list(run["bare"]) == RESPONSE_KEYS
            assert list(run["augmented"]) == RESPONSE_KEYS + AUTHORITY_KEYS
            assert _check_flat(run["bare"], res.bare_measures, i, "bare") == RESPONSE_KEYS
            assert len(_check_flat(run["augmented"], res.augmented_measures, i, "augmented")) == 14
            got = _check_flat(run["input"], res.input, i, "input")
            assert sorted(got) == sorted(k for k in run["input"] if k not in ("name", "kind"))


# ---------------------------------------------------------------------------------------
# no key typed by hand
# ---------------------------------------------------------------------------------------
def _metadata_keys():
    """{attribute: {its JSON keys}} over every annotated type."""
    out = {}
    for cls in _types():
        for q in quantities(cls):
            out.setdefault(q.attribute, set()).add(q.key)
    return out


def hand_written(source, known):
    """(line, key) of each dict entry ``"key": <expr reading .attr>`` whose key is attr's metadata key."""
    bad = []
    for node in ast.walk(ast.parse(source)):
        if not isinstance(node, ast.Dict):
            continue
        for k, v in zip(node.keys, node.values):
            if not (isinstance(k, ast.Constant) and isinstance(k.value, str)):
                continue
            attrs = {a.attr for a in ast.walk(v) if isinstance(a, ast.Attribute)}
            if any(k.value in known.get(a, ()) for a in attrs):
                bad.append((k.lineno, k.value))
    return bad


def test_the_check_finds_a_hand_written_key():
    known = _metadata_keys()
    old = 'x = {"natural_frequency_rad_s": num(eq.natural_frequency[index]), "name": c.name}\n'
    assert hand_written(old, known) == [(1, "natural_frequency_rad_s")]
    assert hand_written('x = {"gain_margin_db": num(w.gain_margin)}\n', known) == [(1, "gain_margin_db")]
    assert hand_written('x = {**point(eq, index, ("natural_frequency",))}\n', known) == []


def test_no_document_module_writes_an_annotated_fields_key_by_hand():
    known = _metadata_keys()
    found = []
    for name in sorted(os.listdir(DOCUMENTS)):
        if name.endswith(".py"):
            with open(os.path.join(DOCUMENTS, name), encoding="utf-8") as fh:
                found += [(name, line, key) for line, key in hand_written(fh.read(), known)]
    assert found == [], "write these through damper/output/documents/serialize.point"


def test_the_reports_key_labels_read_back_the_unit_of_every_annotated_key():
    """The report labels generic tables by key suffix; that must be the documents' own rule.

    Every annotated key whose unit the report knows reads back as that unit; the label is the
    key without its suffix. The expected unit text is the metadata's unit with ``^2``/``^3`` as
    superscripts (common practice for display).
    """
    from damper.output.report.format import KEY_UNITS, key_label

    checked = 0
    for cls in _types():
        for q in quantities(cls):
            if q.unit not in KEY_UNITS or q.key != rule_key(q.attribute, q.unit):
                continue
            label, unit = key_label(q.key)
            assert unit == q.unit.replace("^2", "\u00b2").replace("^3", "\u00b3"), (cls.__name__, q.key)
            assert label == q.key[: -len("_" + unit_suffix(q.unit))].replace("_", " ")
            checked += 1
    assert checked > 40
    assert key_label("damping_ratio") == ("damping ratio", "")  # dimensionless: no unit


def test_the_reports_equivalent_system_rows_show_the_fields_own_keys_and_units():
    """The report's equivalent-system table reads each value by the field's JSON key and shows
    the field's unit: a hand-written unit once showed the gain K of the LOES form in 1/s, while
    K multiplies ``(s + 1/T_theta2)`` over a second-order denominator, so for q (rad/s) per rad
    of command K is in 1/s^2 ([derived] from the form, docs/theory.md)."""
    from damper.measures.equivalent import EquivalentFit
    from damper.output.report.conditions import EQUIVALENT_ROWS, _equivalent_rows

    by_key = {q.key: q for q in quantities(EquivalentFit)}
    eq = {key: 1.25 for _, key, _ in EQUIVALENT_ROWS} | {"converged": True}
    rows = _equivalent_rows(eq)
    assert len(rows) == len(EQUIVALENT_ROWS) + 1
    for (label, key, _), (shown, unit, value) in zip(EQUIVALENT_ROWS, rows):
        assert key in by_key, key
        assert shown == label and value == "1.25"
        want = by_key[key].unit.replace("^2", "\u00b2") or "\u2013"
        assert unit == want, (key, unit, want)
    assert dict((r[0], r[1]) for r in rows)["gain Kq"] == "1/s\u00b2"
