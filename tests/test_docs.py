"""docs/case-file.md is generated from the schema and must be current (common practice)."""

import os

from damper.case.docgen import render

from .conftest import ROOT


def test_case_file_reference_is_current():
    path = os.path.join(ROOT, "docs", "case-file.md")
    with open(path, encoding="utf-8") as fh:
        assert fh.read() == render(), "run: python -m damper.case.docgen > docs/case-file.md"
