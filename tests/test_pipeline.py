"""The design pipeline (damper/analysis/pipeline.py, issue 18 item 3): one call runs the stages
in order and returns one frozen result; batches and finished stages reach the caller as events.
And the layering it relies on: analysis imports no output, no command, no CLI (DEVELOPERS.md,
"data flows one way"; common practice for a layered package).
"""

from __future__ import annotations

import ast
import dataclasses
import os

import numpy as np
import pytest

import damper.analysis.batches as batches
from damper.analysis.pipeline import (STAGES, FigureBatch, PipelineOptions, ResponseBatch, SearchBatch, StageDone,
                                      run_pipeline)
from damper.case import load_case, load_case_text

from .conftest import ROOT
from .test_run_directory import ONE

ANALYSIS = os.path.join(ROOT, "damper", "analysis")
DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
#: What analysis must not import (the layers above it).
HIGHER = ("damper.output", "damper.commands", "damper.stages", "damper.cli")


def _imports(source, package="damper.analysis"):
    """Absolute names of the modules `source` (a module of `package`) imports, relative imports resolved."""
    names = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            names += [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                parts = package.split(".")
                parent = ".".join(parts[: len(parts) - node.level + 1])
                base = f"{parent}.{base}" if base else parent
            names += [base] + [f"{base}.{a.name}" for a in node.names]
    return names


def _higher(names):
    return [n for n in names if any(n == h or n.startswith(h + ".") for h in HIGHER)]


def test_the_import_check_sees_relative_and_absolute_imports():
    # [derived: the examples are written here; a checker that saw nothing would pass the next test]
    assert _higher(_imports("from ..output.jsonout import dumps")) == ["damper.output.jsonout",
                                                                       "damper.output.jsonout.dumps"]
    assert _higher(_imports("def f():\n    from .. import commands\n")) == ["damper.commands"]
    assert _higher(_imports("import damper.stages.responses")) == ["damper.stages.responses"]
    assert _higher(_imports("from .search import search\nfrom ..verdict import Verdict")) == []


def test_analysis_imports_no_output_no_command():
    modules = sorted(n for n in os.listdir(ANALYSIS) if n.endswith(".py"))
    assert "pipeline.py" in modules
    bad = {}
    for name in modules:
        with open(os.path.join(ANALYSIS, name), encoding="utf-8") as fh:
            found = _higher(_imports(fh.read()))
        if found:
            bad[name] = found
    assert bad == {}


def _run(case, options, monkeypatch, size=3):
    monkeypatch.setattr(batches, "BATCH_CONDITIONS", size)
    events = []
    return run_pipeline(case, options, on_event=events.append), events


def test_the_stages_run_in_order_and_stream_their_batches(monkeypatch):
    case = load_case(DEMO)  # 7 conditions, no schedule, uncertainty or failures section
    options = PipelineOptions(figures=False, responses=False)
    result, events = _run(case, options, monkeypatch)
    starts = [e.start for e in events if isinstance(e, SearchBatch)]
    assert starts == [0, 3, 6]  # [derived: 7 conditions in batches of 3]
    done = [e for e in events if isinstance(e, StageDone)]
    assert [e.stage for e in done] == list(STAGES)
    assert events.index(done[0]) == 3  # the design ends after its three batches [derived]
    assert [c.name for c in result.design.conditions] == list(case.names)
    streamed = np.concatenate([[c.chosen_gain for c in e.design.conditions] for e in events
                               if isinstance(e, SearchBatch)])
    np.testing.assert_array_equal(result.design.gains, streamed)  # what was written is what was kept
    assert result.schedule is result.responses is result.failures is result.robustness is None
    assert [s.stage for s in result.skipped] == ["schedule", "responses", "failures", "robustness"]
    assert result.skip_of("responses").reason == "switched off" and result.skip_of("design") is None
    assert not any(s.wanted for s in result.skipped)  # nothing asked for was left out
    assert result.verdict.items == result.design.verdict.items
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.design = None


def test_figures_go_to_the_tightest_conditions(monkeypatch):
    case = load_case(DEMO)
    result, events = _run(case, PipelineOptions(max_figures=2, responses=False), monkeypatch)
    assert not any(e.figures for e in events if isinstance(e, SearchBatch))  # 7 > 2: not every condition
    figured = [i for e in events if isinstance(e, FigureBatch) for i in e.indices]
    d = result.design
    # the rule (docs: infeasible first, then the least worst slack at the chosen gain) [derived from its text]
    # (no slack at all, NaN, counts as the least)
    slack = np.where(np.isnan(d.worst_slack), -np.inf, d.worst_slack)
    ranked = sorted(range(len(d.conditions)), key=lambda i: (d.conditions[i].feasible, slack[i], i))
    assert figured == sorted(ranked[:2]) and d.figures == tuple(figured)
    again = [c.chosen_gain for e in events if isinstance(e, FigureBatch) for c in e.design.conditions]
    np.testing.assert_array_equal(again, d.gains[list(figured)])  # the same search [derived: per-condition result]


def test_responses_stream_per_batch_and_keep_each_note_once(monkeypatch):
    case = load_case_text(ONE, "one.yaml")
    result, events = _run(case, PipelineOptions(figures=False), monkeypatch, size=1)
    batches_seen = [e for e in events if isinstance(e, ResponseBatch)]
    assert [e.start for e in batches_seen] == [0]  # [derived: one condition]
    np.testing.assert_array_equal(result.responses.gains, result.design.gains)
    notes = [n for e in batches_seen for n in e.result.notes]
    assert list(result.responses.notes) == list(dict.fromkeys(notes))  # [derived: each note once, first order]


def test_an_envelope_case_skips_the_search_and_says_why_failures_cannot_run(monkeypatch):
    case = load_case(DEMO)
    from damper.case.failures import failures_from_values

    case = dataclasses.replace(case, conditions=(), failures=failures_from_values({}))
    result, events = _run(case, PipelineOptions(figures=False), monkeypatch)
    assert result.design is None and result.skip_of("design") is not None
    skip = result.skip_of("failures")
    assert skip.wanted and "no conditions of its own" in skip.reason
    assert not any(isinstance(e, SearchBatch) for e in events)
