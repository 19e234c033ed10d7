"""The design pipeline's options, its stages' results, its events and its one result object.

:func:`damper.analysis.pipeline.run_pipeline` runs the stages; this module only holds what they
return. Everything here is a frozen dataclass; gains are K in s (rad of elevator per rad/s of
pitch rate). A stage that did not run is None in :class:`PipelineResult` and has a
:class:`Skipped` entry saying why.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from ..verdict import Verdict

if TYPE_CHECKING:  # the types of the fields, for readers and checkers (not imported at run time)
    from ..case.model import Case
    from .failure_run import FailureRun
    from .response import CaseResponses, ResolvedResponses
    from .robustness_result import RobustnessResult
    from .schedule_types import ScheduleResult
    from .search import DesignResult, SearchSettings
    from .turbulence import TurbulenceStudy
    from .uncertainty import UncertaintySpec

#: The stages of a design run, in the order they run.
STAGES = ("design", "schedule", "responses", "failures", "robustness")


@dataclass(frozen=True)
class PipelineOptions:
    """What the pipeline runs and how (from the command line; no argparse inside analysis).

    Attributes
    ----------
    gain_min, gain_max : float or None
        Range of the gain sweep, s (None: from the airframe's control power).
    points : int
        Gains in the sweep.
    policy : str
        How the gain is chosen inside the feasible set (:data:`damper.analysis.search.POLICIES`).
    damping_target : float or None
        Damping ratio (dimensionless) the ``damping_target`` policy aims at.
    figures : bool
        Whether figures are wanted: the design stage then hands over the searches of the
        conditions that get figures (:class:`FigureBatch`).
    max_figures : int
        Conditions with per-condition figures at most (a count): every condition when the case
        has no more, else the infeasible ones and those with the least slack.
    responses, failures, robustness : bool
        Whether those stages run (each also needs its section of the case, and gains).
    cluster : str or None
        Address of a Dask scheduler whose workers run the robustness study (docs/cluster.md);
        None: local workers. The result is the same.
    """

    gain_min: float | None = None
    gain_max: float | None = None
    points: int = 161
    policy: str = "balanced"
    damping_target: float | None = None
    figures: bool = True
    max_figures: int = 48
    responses: bool = True
    failures: bool = True
    robustness: bool = True
    cluster: str | None = None

    def search_settings(self):
        """The :class:`damper.analysis.search.SearchSettings` of these options."""
        from .search import SearchSettings

        return SearchSettings(gain_min=self.gain_min, gain_max=self.gain_max, points=self.points,
                              policy=self.policy, damping_target=self.damping_target)


@dataclass(frozen=True)
class Skipped:
    """A stage that did not run.

    Attributes
    ----------
    stage : str
        One of :data:`STAGES`.
    reason : str
        Why, one clause (e.g. "the case has no failures: section").
    wanted : bool
        True when the case asked for the stage but the run could not do it (worth telling the
        user); False when it was not asked for (no section, or switched off).
    """

    stage: str
    reason: str
    wanted: bool = False


@dataclass(frozen=True)
class TurbulenceBatch:
    """Continuous turbulence at the chosen gains of a batch of conditions.

    Attributes
    ----------
    study : damper.analysis.turbulence.TurbulenceStudy
        Bare and augmented responses, arrays of shape (n_batch,).
    checks : tuple
        Per condition, the turbulence requirements checked
        (:func:`damper.analysis.turbulence_case.check_turbulence`).
    misses : tuple of damper.verdict.Item
        The requirements not met (verdict items of part ``design``).
    """

    study: TurbulenceStudy
    checks: tuple
    misses: tuple


@dataclass(frozen=True)
class DesignStage:
    """The gain search at every condition (what a run keeps of it; the sweeps are streamed).

    Attributes
    ----------
    settings : damper.analysis.search.SearchSettings
    conditions : tuple of damper.analysis.search.ConditionDesign
        Every condition's feasible intervals, chosen gain K (s) and reason.
    worst_slack : ndarray, shape (n_conditions,)
        Signed normalised slack (dimensionless) of the tightest requirement at the chosen gain.
    figures : tuple of int or None
        Conditions that get figures when not all of them do (None: every condition).
    verdict : damper.verdict.Verdict
        Part ``design`` (the search's misses and the turbulence requirements).
    """

    settings: SearchSettings
    conditions: tuple
    worst_slack: np.ndarray
    figures: tuple | None
    verdict: Verdict

    @property
    def gains(self) -> np.ndarray:
        """The chosen gain K per condition, s, shape (n_conditions,)."""
        return np.array([c.chosen_gain for c in self.conditions])


@dataclass(frozen=True)
class ScheduleStage:
    """The gain schedule, designed and verified.

    Attributes
    ----------
    result : damper.analysis.schedule_types.ScheduleResult
    verdict : damper.verdict.Verdict
        Part ``schedule``.
    """

    result: ScheduleResult
    verdict: Verdict


@dataclass(frozen=True)
class ResponsesStage:
    """The time responses at the chosen gains (the histories are streamed, :class:`ResponseBatch`).

    Attributes
    ----------
    gains : ndarray, shape (n_conditions,)
        K, s.
    notes : tuple of str
        The simulation's notes, each once, in the order they first came.
    """

    gains: np.ndarray
    notes: tuple


@dataclass(frozen=True)
class FailuresStage:
    """The failure study at the chosen gains.

    Attributes
    ----------
    run : damper.analysis.failure_run.FailureRun
    verdict : damper.verdict.Verdict
        Part ``failures``.
    """

    run: FailureRun
    verdict: Verdict


@dataclass(frozen=True)
class RobustnessStage:
    """The robustness study of the case's ``uncertainty:`` section.

    Attributes
    ----------
    case : damper.case.model.Case
        The case studied: the design's, or the schedule's tightest verification points as
        conditions when there is a schedule (the schedule is what flies).
    gains : ndarray, shape (n_conditions,)
        Nominal K per condition of `case`, s.
    spec : damper.analysis.uncertainty.UncertaintySpec
    result : damper.analysis.robustness_result.RobustnessResult
    where : str or None
        Which points were studied, for the documents (None: the design's conditions).
    verdict : damper.verdict.Verdict
        Part ``robustness``.
    """

    case: Case
    gains: np.ndarray
    spec: UncertaintySpec
    result: RobustnessResult
    where: str | None
    verdict: Verdict


@dataclass(frozen=True)
class PipelineResult:
    """Everything a design run found, stage by stage (None: the stage did not run).

    Attributes
    ----------
    case : damper.case.model.Case
    options : PipelineOptions
    design : DesignStage or None
    schedule : ScheduleStage or None
    responses : ResponsesStage or None
    failures : FailuresStage or None
    robustness : RobustnessStage or None
    skipped : tuple of Skipped
        The stages that did not run and why, in :data:`STAGES` order.
    """

    case: Case
    options: PipelineOptions
    design: DesignStage | None = None
    schedule: ScheduleStage | None = None
    responses: ResponsesStage | None = None
    failures: FailuresStage | None = None
    robustness: RobustnessStage | None = None
    skipped: tuple = field(default=())

    @property
    def verdict(self) -> Verdict:
        """The run's verdict: every part that was judged (design, schedule, robustness, failures)."""
        verdict = Verdict()
        for stage in (self.design, self.schedule, self.robustness, self.failures):
            if stage is not None:
                verdict = verdict + stage.verdict
        return verdict

    def skip_of(self, stage: str) -> Skipped | None:
        """Why `stage` did not run (None: it ran)."""
        return next((s for s in self.skipped if s.stage == stage), None)


# ---------------------------------------------------------------------------
# Events: what the pipeline hands to its caller while it runs (output writes as results arrive)
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class SearchBatch:
    """One batch of conditions searched (its sweep is dropped once the caller returns).

    Attributes
    ----------
    start : int
        Index of the batch's first condition in the case.
    case : damper.case.model.Case
        The case restricted to the batch's conditions.
    design : damper.analysis.search.DesignResult
    turbulence : TurbulenceBatch or None
        None without a ``turbulence:`` section.
    figures : bool
        Whether every condition of the batch gets figures (all conditions do).
    """

    start: int
    case: Case
    design: DesignResult
    turbulence: TurbulenceBatch | None
    figures: bool


@dataclass(frozen=True)
class FigureBatch:
    """The search again at a batch of the conditions that get figures (when not all do).

    Attributes
    ----------
    indices : tuple of int
        The conditions' indices in the case.
    case : damper.case.model.Case
        The case restricted to them.
    design : damper.analysis.search.DesignResult
    """

    indices: tuple
    case: Case
    design: DesignResult


@dataclass(frozen=True)
class ResponseBatch:
    """One batch of conditions simulated.

    Attributes
    ----------
    start : int
        Index of the batch's first condition in the case.
    case : damper.case.model.Case
        The case restricted to the batch's conditions.
    result : damper.analysis.response.CaseResponses
    spec : damper.analysis.response.ResolvedResponses
    """

    start: int
    case: Case
    result: CaseResponses
    spec: ResolvedResponses


@dataclass(frozen=True)
class StageDone:
    """A stage has finished (or was skipped: `result` None and `skipped` says why).

    Attributes
    ----------
    stage : str
        One of :data:`STAGES`.
    result : DesignStage or ScheduleStage or ResponsesStage or FailuresStage or RobustnessStage or None
        The stage's result (:class:`DesignStage`, ...) or None.
    skipped : Skipped or None
    """

    stage: str
    result: DesignStage | ScheduleStage | ResponsesStage | FailuresStage | RobustnessStage | None = None
    skipped: Skipped | None = None


__all__ = ["STAGES", "DesignStage", "FailuresStage", "FigureBatch", "PipelineOptions", "PipelineResult",
           "ResponseBatch", "ResponsesStage", "RobustnessStage", "ScheduleStage", "SearchBatch", "Skipped",
           "StageDone", "TurbulenceBatch"]
