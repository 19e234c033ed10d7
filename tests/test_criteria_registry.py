"""The criteria registry keeps every consumer honest (DEVELOPERS.md, "How to add a criterion").

Every registered criterion has a label, a unit, a docs entry, a report row and a preset
source, and its measure is what the evaluation, the verdict and the JSON read. The checks
are against the things outside the registry a newcomer would forget: docs/*.md, the presets'
tables, the report's rows, the case schema (common practice: one registration, every
consumer reads it).
"""

import glob
import importlib
import os
import pickle

import numpy as np
import pytest

from damper.requirements import presets
from damper.requirements.kind import NO_PRESET
from damper.requirements.registry import BAND_KEYS, CRITERIA, KINDS

from .conftest import ROOT

PINT_UNITS = {"-", "1/s", "rad/s", "s", "dB", "deg", "(rad/s^2)/g"}  # the units the outputs know [common practice]


def _docs():
    text = ""
    for path in sorted(glob.glob(os.path.join(ROOT, "docs", "*.md"))):
        with open(path, encoding="utf-8") as fh:
            text += fh.read()
    return text


def _every_band_requirements(model="longitudinal"):
    """The requirements of a case naming a band on every registered criterion."""
    from damper.case.requirements_schema import REQUIREMENTS
    from damper.requirements.spec import build_requirements

    raw = REQUIREMENTS.check({k: {"min": 0.001} for k in BAND_KEYS}, "requirements")
    return build_requirements(raw, model=model)


def test_names_are_unique_and_the_registry_is_not_empty():
    names = [k.name for k in CRITERIA]
    assert len(names) == len(set(names)) and "stability" in names and len(names) >= 10


@pytest.mark.parametrize("kind", CRITERIA, ids=lambda k: k.name)
def test_every_criterion_has_label_unit_floor_and_a_picklable_measure(kind):
    assert kind.label.strip() and "_" not in kind.label  # plain words, not the key
    assert kind.unit in PINT_UNITS, kind.unit
    assert kind.floor > 0
    assert callable(kind.measure) and kind.measure.__name__ != "<lambda>"
    assert pickle.loads(pickle.dumps(kind)) == kind  # plot and study workers receive criteria


@pytest.mark.parametrize("kind", [k for k in CRITERIA if k.band_kind], ids=lambda k: k.name)
def test_every_band_is_in_the_schema_and_in_the_docs(kind):
    from damper.case.requirements_schema import REQUIREMENTS

    assert kind.name in REQUIREMENTS.fields
    assert kind.doc in REQUIREMENTS.fields[kind.name].doc
    docs = _docs()
    assert f"## `requirements.{kind.name}`" in docs  # docs/case-file.md, generated from the schema
    assert kind.doc in docs


def test_stability_is_documented_as_a_criterion_of_its_own():
    # the one criterion a case cannot name: docs/theory.md says it is always there
    assert not KINDS["stability"].band_kind
    assert "closed-loop stability is" in _docs()


def _preset_values():
    out = []
    for level in presets.LEVELS:
        for cat in presets.CATEGORIES:
            for cls in (None, *presets.AIRCRAFT_CLASSES):
                out += presets.handling_preset(level, cat, cls)
        out += presets.phugoid_preset(level)
    for rng in presets.SPEED_RANGES:
        out += presets.margin_preset(rng)
    return out


def test_every_preset_value_names_its_criterion_and_the_criterion_names_the_preset():
    values = _preset_values()
    supplied = {v.criterion for v in values}
    assert supplied == {k.name for k in CRITERIA if k.preset_source not in (NO_PRESET, KINDS["stability"].preset_source)}
    for v in values:
        assert v.source.startswith(KINDS[v.criterion].preset_source), (v.criterion, v.source)


def test_stability_source_is_what_every_case_gets():
    from damper.requirements.spec import build_requirements

    default = build_requirements(None)
    assert default.criteria[0].name == "stability"
    assert default.criteria[0].source == KINDS["stability"].preset_source


def test_every_criterion_has_a_report_row_with_its_label_and_unit():
    from damper.output.documents.design import requirements_list
    from damper.output.report.conditions import _requirements_view
    from damper.output.report.format import requirement_label, unit_text

    class _Case:
        requirements = _every_band_requirements()

    rows = _requirements_view({"requirements": requirements_list(_Case)})
    names = [c.name for c in _Case.requirements.criteria]
    assert names == [k.name for k in CRITERIA]  # every registered criterion, in the registry's order
    for name, row in zip(names, rows):
        assert row["name"] == KINDS[name].label == requirement_label(name)
        assert row["unit"] == unit_text(KINDS[name].unit)


def test_every_measure_evaluates_on_an_assessment():
    # a four-state case (the phugoid criteria need it) at two gains: every measure gives one
    # value per condition and gain, finite or NaN (undefined), and the evaluation's values
    # are the registry's measures
    from damper.analysis.assess import assess
    from damper.case import load_case
    from damper.requirements.criteria import evaluate

    case = load_case(os.path.join(ROOT, "cases", "survey_uav_loiter_longitudinal.yaml"))
    gains = np.array([[0.0, 0.2]] * len(case.conditions))
    a = assess(case, gains)
    req = _every_band_requirements()
    res = evaluate(req.criteria, a)
    assert res.values.shape == (len(CRITERIA), len(case.conditions), 2)
    for k, c in enumerate(req.criteria):
        v = np.asarray(c.kind.measure(a, c.measure), float)
        np.testing.assert_array_equal(np.broadcast_to(v, res.values[k].shape), res.values[k])
    # K = 0 is the bare airframe: the closed loop is stable in this demo, and its largest real part is negative
    assert np.all(res.values[0, :, 0] < 0)


def _recipe(title):
    with open(os.path.join(ROOT, "DEVELOPERS.md"), encoding="utf-8") as fh:
        text = fh.read()
    start = text.index(f"## {title}")
    end = text.find("\n## ", start + 3)
    return text[start:end if end > 0 else None]


def recipe_paths_exist(title):
    """Every file or folder the recipe names (`damper/...`, `tests/...`, `docs/...`) exists."""
    import re

    paths = re.findall(r"`((?:damper|tests|docs)/[\w/.]+?)`", _recipe(title))
    assert paths, title
    missing = [p for p in paths if not os.path.exists(os.path.join(ROOT, p))]
    assert missing == [], missing


def test_the_developers_recipe_names_what_exists():
    from damper.requirements import kind, kinds, registry

    recipe_paths_exist("How to add a criterion")
    text = _recipe("How to add a criterion")
    for family in ("short_period", "margins", "bandwidth", "phugoid"):
        module = importlib.import_module(f"{kinds.__name__}.{family}")
        assert f"`{family}`" in text and any(k.measure.__module__ == module.__name__ for k in CRITERIA)
    for name in ("CRITERIA", "NO_PRESET", "CriterionKind"):
        assert f"`{name}`" in text and (hasattr(registry, name) or hasattr(kind, name))
    for field in ("needs_stability", "which", "level", "longitudinal_only"):
        assert f"`{field}`" in text and field in kind.CriterionKind.__dataclass_fields__


@pytest.mark.parametrize("kind", [k for k in CRITERIA if k.band_kind], ids=lambda k: k.name)
def test_a_case_naming_only_this_band_gets_every_measure_it_needs(kind):
    # assess_loop computes the bandwidth only when a criterion says it needs it: a criterion
    # whose measure reads the bandwidth and does not say so would fail here
    from damper.analysis.assess import assess_loop, build_loop
    from damper.case import load_case
    from damper.case.requirements_schema import REQUIREMENTS
    from damper.requirements.spec import build_requirements

    case = load_case(os.path.join(ROOT, "cases", "survey_uav_loiter_longitudinal.yaml"))
    req = build_requirements(REQUIREMENTS.check({kind.name: {"min": 0.001}}, "requirements"), model="longitudinal")
    a = assess_loop(build_loop(case, 0.1), requirements=req, with_bandwidth=False)
    assert (a.bandwidth is not None) == kind.needs_bandwidth
    assert [c.name for c in a.criteria.criteria] == ["stability", kind.name]
    assert a.criteria.values.shape == (2, len(case.conditions))
    # the criteria's scope (the gain search, schedules, robustness samples) leaves out the
    # disk-margin search unless the criterion says it needs it, and the longitudinal extras;
    # what it computes is the full assessment's, bit for bit (a criterion reading the disk
    # margin without saying so would read None here and fail)
    c = assess_loop(build_loop(case, 0.1), requirements=req, with_bandwidth=False, scope="criteria")
    assert (c.margins.disk_margin is not None) == kind.needs_disk_margin
    assert c.two_state is None and c.equivalent_plain is None and a.two_state is not None
    np.testing.assert_array_equal(c.criteria.values, a.criteria.values)
    np.testing.assert_array_equal(c.criteria.slacks, a.criteria.slacks)
    for name in ("gain_margin_db", "phase_margin_deg", "delay_margin_s", "phase_crossings_rad_s"):
        np.testing.assert_array_equal(getattr(c.margins, name), getattr(a.margins, name))
    np.testing.assert_array_equal(c.equivalent.damping_ratio, a.equivalent.damping_ratio)
    np.testing.assert_array_equal(c.modes.eigenvalues, a.modes.eigenvalues)
