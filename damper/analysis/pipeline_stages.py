"""The stages of the design pipeline, each callable on its own (commands run one or all of them).

Every stage takes the case and what the earlier stages found, runs the analysis, and returns
its frozen result (:mod:`damper.analysis.pipeline_types`) or None when it does not apply. Stages
that stream conditions in batches (search, responses) hand each batch to `emit` as it is
computed, so the caller can write its files and queue its figures while memory holds one batch
only (damper/analysis/batches.py). `progress` is the reporter of the run (an object with
``stage(name, total, unit)`` and ``__call__(done, total, stage)``, see :data:`QUIET`); nothing
here writes files or prints.

``batches.condition_batches`` is looked up at call time (tests replace it to see the batches).
"""

from __future__ import annotations

import math

import numpy as np

from . import batches
from .pipeline_types import (DesignStage, FailuresStage, FigureBatch, ResponseBatch, ResponsesStage, RobustnessStage,
                             ScheduleStage, SearchBatch, TurbulenceBatch)


class _QuietStage:
    """A progress stage that shows nothing."""

    def update(self, done, total=None, unit=None) -> None:
        """Ignore the count of items done."""

    def finish(self) -> None:
        """Ignore the end."""

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        return False


class _Quiet:
    """A progress reporter that shows nothing (the default of every stage)."""

    def stage(self, name, total=None, unit="") -> _QuietStage:
        """A stage that shows nothing."""
        return _QuietStage()

    def __call__(self, done, total, stage) -> None:
        """Ignore a count."""


#: The reporter used when none is given.
QUIET = _Quiet()


def _ignore(event) -> None:
    """The default `emit`: events are dropped."""


def turbulence_stage(case, gains) -> TurbulenceBatch | None:
    """Continuous turbulence of `case` at `gains` (K, s, one per condition); None without the section."""
    from .turbulence_case import case_turbulence, check_turbulence, turbulence_items

    study = case_turbulence(case, gains)
    if study is None:
        return None
    checks = tuple(check_turbulence(case, study.closed_loop))
    return TurbulenceBatch(study, checks, tuple(turbulence_items(case, checks)))


def figure_conditions(conds, worst, limit) -> tuple:
    """The conditions that get figures: infeasible first, then the least worst slack (NaN first), by index.

    Parameters
    ----------
    conds : sequence of damper.analysis.search.ConditionDesign
    worst : ndarray, shape (n_conditions,)
        Worst signed normalised slack at the chosen gain (dimensionless).
    limit : int
        Conditions to keep at most.
    """

    def key(i):
        w = worst[i]
        return (conds[i].feasible, -math.inf if w != w else w, i)

    return tuple(sorted(sorted(range(len(conds)), key=key)[:limit]))


def design_stage(case, options, progress=QUIET, emit=_ignore) -> DesignStage | None:
    """Search every condition of `case` in batches (each a :class:`SearchBatch` to `emit`).

    When the case has more conditions than ``options.max_figures`` and figures are wanted, the
    conditions that get them are searched again afterwards (each batch a :class:`FigureBatch`).
    None for a case without conditions (an envelope case: the schedule part judges it).
    """
    from .search import search
    from .verdicts import design_misses, design_verdict

    if not case.conditions:
        return None
    settings = options.search_settings()
    n = len(case.conditions)
    every = n <= options.max_figures
    conds, worst, misses, turbulence_misses = [], [], [], []
    stage = progress.stage("search", n, "conditions")
    for a, b in batches.condition_batches(n):  # memory: one batch's sweep at a time
        sub = batches.sub_case(case, range(a, b))
        d = search(sub, settings)
        turbulence = turbulence_stage(sub, np.array([c.chosen_gain for c in d.conditions]))
        emit(SearchBatch(a, sub, d, turbulence, every and options.figures))
        turbulence_misses += [] if turbulence is None else list(turbulence.misses)
        conds += d.conditions
        misses += design_misses(sub.names, d)
        worst.append(np.asarray(d.chosen.criteria.worst_slack, dtype=float).reshape(-1))
        stage.update(b)
    stage.finish()
    worst = np.concatenate(worst)
    figures = None if every else figure_conditions(conds, worst, options.max_figures)
    for a, b in batches.condition_batches(len(figures)) if figures is not None and options.figures else ():
        idx = figures[a:b]
        sub = batches.sub_case(case, idx)
        emit(FigureBatch(tuple(idx), sub, search(sub, settings)))
    verdict = design_verdict(case.names, [c.feasible for c in conds], misses, turbulence_misses)
    return DesignStage(settings, tuple(conds), worst, figures, verdict)


def schedule_stage(case, progress=QUIET) -> ScheduleStage | None:
    """Design and verify the case's gain schedule; None without a ``schedule:`` section."""
    if case.schedule is None:
        return None
    from .schedule import design_schedule
    from .verdicts import schedule_verdict

    result = design_schedule(case, progress=progress)
    return ScheduleStage(result, schedule_verdict(result))


def response_batches(case, gains, progress=QUIET):
    """Simulate every input at every condition, a batch of conditions at a time.

    Parameters
    ----------
    gains : float or array_like, shape (n_conditions,)
        K, s.

    Yields
    ------
    ResponseBatch
        In condition order; memory holds one batch's time histories.
    """
    from .response import respond_case, resolve_responses

    n = len(case.conditions)
    gains = np.broadcast_to(np.asarray(gains, dtype=float), (n,))
    stage = progress.stage("responses", n, "conditions")
    for a, b in batches.condition_batches(n):
        sub = batches.sub_case(case, range(a, b))
        spec = resolve_responses(sub)
        yield ResponseBatch(a, sub, respond_case(sub, gains[a:b], spec), spec)
        stage.update(b)
    stage.finish()


def responses_stage(case, gains, progress=QUIET, emit=_ignore) -> ResponsesStage:
    """The time responses at `gains` (K, s, one per condition), each batch a :class:`ResponseBatch` to `emit`."""
    notes = []
    for batch in response_batches(case, gains, progress):
        emit(batch)
        notes += [note for note in batch.result.notes if note not in notes]
    n = len(case.conditions)
    return ResponsesStage(np.array(np.broadcast_to(np.asarray(gains, dtype=float), (n,))), tuple(notes))


def failures_stage(case, gains, progress=QUIET) -> FailuresStage | None:
    """The failure study of the case's ``failures:`` section at `gains` (K, s, one per condition)
    (docs/failures.md); None without the section or without conditions."""
    from .failure_run import run_failures
    from .failure_verdict import failure_verdict

    with progress.stage("failures"):
        run = run_failures(case, gains)
    return None if run is None else FailuresStage(run, failure_verdict(run))


def robustness_stage(case, gains=None, schedule=None, progress=QUIET, spec=None, schedule_name="the schedule",
                     **study) -> RobustnessStage:
    """The robustness study of the case's ``uncertainty:`` section.

    With a `schedule` (:class:`damper.analysis.schedule_types.ScheduleResult` or
    :class:`damper.analysis.schedule_points.CheckedSchedule`) the study runs at its tightest
    verification points at the scheduled gain (the schedule is what flies; `schedule_name` names
    it in :attr:`RobustnessStage.where`); else at the
    conditions of `case` with `gains` (K, s, one per condition). `spec` defaults to the case's
    :func:`damper.analysis.uncertainty.uncertainty_spec`; `study` goes on to
    :func:`damper.analysis.robustness.robustness` (``workers=...``).
    """
    from .robustness import robustness, uncertainty_spec
    from .verdicts import robustness_verdict

    spec = spec if spec is not None else uncertainty_spec(case)
    where = None
    if schedule is not None:
        from .schedule_points import schedule_study_case, study_description

        case, gains, _ = schedule_study_case(case, schedule, spec.schedule_points)
        where = study_description(len(gains), schedule_name)
    result = robustness(case, gains, spec, progress=progress, **study)
    verdict = robustness_verdict(result, spec.required_fraction)
    return RobustnessStage(case, np.asarray(gains, dtype=float), spec, result, where, verdict)


__all__ = ["QUIET", "design_stage", "failures_stage", "figure_conditions", "response_batches", "responses_stage",
           "robustness_stage", "schedule_stage", "turbulence_stage"]
