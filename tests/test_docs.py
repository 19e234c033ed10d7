"""docs/case-file.md is generated from the schema and must be current (common practice)."""

import os

from damper.case.docgen import render

from .conftest import ROOT


def test_case_file_reference_is_current():
    path = os.path.join(ROOT, "docs", "case-file.md")
    with open(path, encoding="utf-8") as fh:
        assert fh.read() == render(), "run: python -m damper.case.docgen > docs/case-file.md"


def _schema_paths(section, path=""):
    """(section path, key) of every key of the schema, sections and lists included."""
    from damper.case import schema

    for key, spec in section.fields.items():
        yield path, key
        full = f"{path}.{key}" if path else key
        if isinstance(spec, schema.Section):
            yield from _schema_paths(spec, full)
        elif isinstance(spec, schema.Items) and isinstance(spec.item, schema.Section):
            yield from _schema_paths(spec.item, f"{full}[]")


def test_every_key_is_in_the_table_of_its_own_section():
    # docs/case-file.md, read as a user reads it: under each "## `section`" heading a table
    # whose first column names that section's own keys (loop.delay under `loop`, not under
    # `loop.filters[]`; requirements.cap.min under `requirements.cap`).
    import re

    from damper.case import schema

    tables, current = {}, None
    for line in render().splitlines():
        m = re.match(r"^## (?:`(.+)`|top level)$", line)
        if m:
            current = m.group(1) or ""
            tables.setdefault(current, set())
            continue
        m = re.match(r"^\| `([^`]+)` \|", line)
        if m and current is not None:
            tables[current].add(m.group(1))
    paths = list(_schema_paths(schema.CASE))
    assert ("loop", "delay") in paths and ("requirements.cap", "min") in paths  # the check is live
    missing = [f"{sec}.{key}" if sec else key for sec, key in paths if key not in tables.get(sec, set())]
    assert missing == [], missing
    for sec, keys in tables.items():  # and no key is listed under a section it does not belong to
        own = {k for s, k in paths if s == sec}
        assert keys <= own, (sec, keys - own)


def _tables():
    """{section path: {key: type cell}} of the generated reference, read as a user reads it."""
    import re

    tables, current = {}, None
    for line in render().splitlines():
        m = re.match(r"^## (?:`(.+)`|top level)$", line)
        if m:
            current = m.group(1) or ""
            tables.setdefault(current, {})
            continue
        m = re.match(r"^\| `([^`]+)` \| ([^|]*) \|", line)
        if m and current is not None:
            tables[current][m.group(1)] = m.group(2).strip()
    return tables


def test_the_key_paths_named_in_issue_19_are_in_their_own_sections():
    # issue 19: loop.delay, sample_rate and pade_order sat under loop.filters items,
    # requirements.damping_measure and free_zero under margins_preset, the envelope limits
    # under envelope.mach, uncertainty.schedule_points under cg_shift.
    tables = _tables()
    for path in ("loop.delay", "loop.sample_rate", "loop.pade_order", "requirements.damping_measure",
                 "requirements.free_zero", "requirements.cap.min", "envelope.max_mach",
                 "envelope.min_equivalent_airspeed", "uncertainty.schedule_points", "conditions[].airspeed",
                 "conditions[].derivatives.M_delta"):
        section, key = path.rsplit(".", 1)
        assert key in tables[section], path
    # every full key path of the schema is reachable: section tables cover every key once
    n_rows = sum(len(t) for t in tables.values())
    from damper.case import schema

    assert n_rows == len(list(_schema_paths(schema.CASE)))


def test_type_names_are_readable():
    # issue 19: Mach and the coefficients showed "quantity (1 (rad where an angle))".
    tables = _tables()
    cells = [cell for t in tables.values() for cell in t.values()]
    assert not [c for c in cells if "rad where an angle" in c or c.startswith("quantity (")]
    assert tables["conditions[]"]["mach"].startswith("Mach number")
    assert tables["envelope.mach"]["max"].startswith("Mach number")
    assert tables["conditions[].coefficients"]["Cm_alpha"].startswith("per rad")
    assert tables["conditions[].coefficients"]["CD"] == "number"
    # a plain number's SI unit is named (docs/theory.md: SI inside; the schema's unit of each key)
    assert tables["conditions[]"]["airspeed"].startswith("speed in m/s (plain number: m/s)")
    assert tables["conditions[]"]["altitude"] == "length in m (plain number: m)"
    assert tables["loop"]["sample_rate"] == "frequency in Hz (plain number: Hz)"
    assert tables["loop.actuator"]["travel"].startswith("angle in rad (plain number: rad")


def test_the_sign_conventions_are_stated_where_the_derivatives_are():
    # docs/theory.md section 1: elevator positive trailing-edge down, M_delta < 0 for a
    # conventional airframe, pilot command positive nose-up.
    import re

    text = render()
    for section in ("conditions[].derivatives", "conditions[].coefficients", "aerodynamics"):
        body = re.split(r"\n## ", text.split(f"\n## `{section}`\n", 1)[1], maxsplit=1)[0]
        assert "trailing-edge down" in body and "M_delta < 0" in body and "nose-up" in body, section
