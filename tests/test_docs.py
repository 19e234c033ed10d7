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
