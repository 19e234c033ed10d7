"""The main job of damper, stage by stage: one call, one result object.

:func:`run_pipeline` runs, in order, the gain search at every condition (with continuous
turbulence at the chosen gains), the gain schedule, the time responses, the failure study and
the robustness study, as far as the case has the sections and the options ask for them, and
returns a :class:`~damper.analysis.pipeline_types.PipelineResult`: each stage's frozen result,
None for the stages that did not run, and why they did not.

Output stays out: the caller (``damper design``) passes `on_event`, called with each batch of
conditions as it is computed (:class:`SearchBatch`, :class:`FigureBatch`,
:class:`ResponseBatch`) and with :class:`StageDone` when a stage ends, so that it writes the
run's documents and queues its figures as the results arrive (memory holds one batch). The
stages are in :mod:`damper.analysis.pipeline_stages` for commands that run one of them.
"""

from __future__ import annotations

from .pipeline_stages import (QUIET, design_stage, failures_stage, response_batches, responses_stage, robustness_stage,
                              schedule_stage, turbulence_stage)
from .pipeline_types import (STAGES, DesignStage, FailuresStage, FigureBatch, PipelineOptions, PipelineResult,
                             ResponseBatch, ResponsesStage, RobustnessStage, ScheduleStage, SearchBatch, Skipped,
                             StageDone, TurbulenceBatch)

NOT_ASKED = "switched off"


def _ignore(event) -> None:
    """The default `on_event`: nothing is streamed."""


def _failures(case, options, design, progress):
    """(FailuresStage or None, Skipped or None) of the failure study at the chosen gains."""
    if not options.failures:
        return None, Skipped("failures", NOT_ASKED)
    if case.failures is None:
        return None, Skipped("failures", "the case has no failures: section")
    if design is None:
        return None, Skipped("failures", "the case has no conditions of its own (its gains come from the schedule; "
                             "the failure study of a schedule's points is not available yet)", wanted=True)
    stage = failures_stage(case, design.gains, progress)
    return stage, None if stage is not None else Skipped("failures", "the case has no failures: section")


def _robustness(case, options, design, schedule, progress):
    """(RobustnessStage or None, Skipped or None) at the scheduled gains, else at the chosen gains."""
    if not options.robustness:
        return None, Skipped("robustness", NOT_ASKED)
    if case.uncertainty is None:
        return None, Skipped("robustness", "the case has no uncertainty: section")
    if design is None and schedule is None:
        return None, Skipped("robustness", "no gains to study (neither conditions nor a schedule)", wanted=True)
    if schedule is not None:  # the schedule is what flies: its tightest verification points
        return robustness_stage(case, schedule=schedule.result, progress=progress, cluster=options.cluster), None
    return robustness_stage(case, design.gains, progress=progress, cluster=options.cluster), None


def run_pipeline(case, options: PipelineOptions | None = None, *, on_event=None, progress=None) -> PipelineResult:
    """Run the design stages of `case` (docs/design.md's run) and return every result.

    Parameters
    ----------
    case : damper.case.model.Case
    options : PipelineOptions, optional
        What runs and how (default: everything the case has sections for).
    on_event : callable, optional
        Called with each batch event and each :class:`StageDone` (in :data:`STAGES` order,
        also for skipped stages), in the order they happen.
    progress : object, optional
        The run's progress reporter (``stage(name, total, unit)``, ``__call__(done, total,
        stage)``); default: none shown.

    Returns
    -------
    PipelineResult
    """
    options = options or PipelineOptions()
    emit = on_event or _ignore
    progress = progress or QUIET
    results, skipped = {}, []

    def done(stage, result, skip=None):
        results[stage] = result
        if result is None and skip is not None:
            skipped.append(skip)
        emit(StageDone(stage, result, skip if result is None else None))

    design = design_stage(case, options, progress, emit)
    done("design", design, Skipped("design", "the case has no conditions (an envelope case: the schedule part "
                                   "judges it)"))
    schedule = schedule_stage(case, progress)
    done("schedule", schedule, Skipped("schedule", "the case has no schedule: section"))
    if design is None or not options.responses:
        done("responses", None, Skipped("responses", NOT_ASKED if design is not None else "no chosen gains"))
    else:
        done("responses", responses_stage(case, design.gains, progress, emit))
    done("failures", *_failures(case, options, design, progress))
    done("robustness", *_robustness(case, options, design, schedule, progress))
    return PipelineResult(case, options, skipped=tuple(skipped), **results)


__all__ = ["NOT_ASKED", "QUIET", "STAGES", "DesignStage", "FailuresStage", "FigureBatch", "PipelineOptions",
           "PipelineResult", "ResponseBatch", "ResponsesStage", "RobustnessStage", "ScheduleStage", "SearchBatch",
           "Skipped", "StageDone", "TurbulenceBatch", "design_stage", "failures_stage", "response_batches",
           "responses_stage", "robustness_stage", "run_pipeline", "schedule_stage", "turbulence_stage"]
