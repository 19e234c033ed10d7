"""The files of a design run, written as the pipeline's results arrive.

:func:`damper.analysis.pipeline.run_pipeline` computes; :class:`DesignRunWriter` is its
``on_event``: it turns each batch of conditions into its ``design.json`` entries and figures,
each finished stage into its documents (design.json, the gain tables and schedule.json,
responses.json and the CSV files, failures.json), and queues the figures on the run's
:class:`damper.output.background.PlotJobs` so that a worker draws them while the analysis goes
on. :meth:`DesignRunWriter.finish` waits for the figures and writes robustness.json (it lists
the robustness figures). Every file is written inside the journal part it belongs to
(docs/run-directory.md).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

from ..analysis.pipeline_types import FigureBatch, ResponseBatch, SearchBatch, StageDone
from ..output.journal import part
from ..output.progress import current


class WriterState:
    """What a :class:`DesignRunWriter` has gathered so far: the one mutable part of a design run's writing.

    The pipeline hands its results over batch by batch (memory holds one batch of conditions),
    and some files can only be written once later batches or stages have arrived: design.json
    needs every condition's entry, robustness.json the names of figures the worker draws, and
    the terminal summary every document. Those pieces wait here, in one small object, so the
    writer itself stays a frozen record of the run's settings.

    Attributes
    ----------
    entries : list of str
        design.json's condition entries as JSON text, until the design stage ends.
    job_ids : list of int
        Ids of the queued design (and failure) figure groups.
    rob_jobs : list of int or None
        Ids of the queued robustness figure groups (None: none queued).
    responses : damper.stages.responses.ResponseFiles or None
        The responses' files being written.
    design_doc, robustness_doc : dict or None
        The written documents (for the terminal).
    failures_text : str or None
        The failure study's terminal line.
    written : list of str
        What the run wrote so far, in words (for the terminal).
    """

    __slots__ = ("entries", "job_ids", "rob_jobs", "responses", "design_doc", "robustness_doc", "failures_text",
                 "written")

    def __init__(self):
        self.entries, self.job_ids, self.rob_jobs, self.responses = [], [], None, None
        self.design_doc = self.robustness_doc = self.failures_text = None
        self.written = ["design.json"]


@dataclass(frozen=True)
class WrittenRun:
    """What a design run wrote, for the terminal (:meth:`DesignRunWriter.finish`).

    Attributes
    ----------
    design_doc : dict or None
        design.json as written.
    robustness_doc : dict or None
        robustness.json as written (None: no robustness study).
    failures_text : str or None
        The failure study's terminal line (None: not asked for).
    written : tuple of str
        The files written, in words.
    """

    design_doc: dict | None
    robustness_doc: dict | None
    failures_text: str | None
    written: tuple


@dataclass(frozen=True)
class DesignRunWriter:
    """Writes a design run's files from the pipeline's events (see the module notes).

    A frozen record of the run's settings; what arrives between events (entries waiting for
    design.json, queued figure ids, the written documents) lives in its :class:`WriterState`,
    the one mutable part, because the pipeline streams its results.

    Parameters
    ----------
    out : str
        The run directory.
    case : damper.case.model.Case
    command : str
        The command line recorded in the documents.
    jobs : damper.output.background.PlotJobs
    plots : bool
        Whether figures are drawn.
    max_figures : int
        Conditions with per-condition figures at most (for the documents' rule text).
    """

    out: str
    case: object
    command: str
    jobs: object
    plots: bool
    max_figures: int
    slugs: tuple = field(init=False, repr=False)
    state: WriterState = field(init=False, repr=False, compare=False)

    def __post_init__(self):
        from ..output.style import plot_slugs

        object.__setattr__(self, "slugs", tuple(plot_slugs(self.case.names)))
        object.__setattr__(self, "state", WriterState())

    def __call__(self, event) -> None:
        """Write what `event` (a pipeline event) brings."""
        if isinstance(event, SearchBatch):
            self._search_batch(event)
        elif isinstance(event, FigureBatch):
            self.state.job_ids += self._queue_design_plots(event.case, event.design, [self.slugs[i] for i in event.indices])
        elif isinstance(event, ResponseBatch):
            with part("responses"):
                self.state.responses.add(event)
        elif isinstance(event, StageDone):
            getattr(self, f"_{event.stage}_done")(event)

    def _search_batch(self, event) -> None:
        from ..output.documents.design import condition_entries
        from ..output.documents.jsonout import dump_part

        batch = condition_entries(event.case, event.design)
        if event.turbulence is not None:
            from ..output.documents.turbulence import add_turbulence

            add_turbulence({"conditions": batch}, event.turbulence.study, event.turbulence.checks)
        self.state.entries += [dump_part(e) for e in batch]  # text: about 8 kB per condition
        if event.figures:
            a = event.start
            self.state.job_ids += self._queue_design_plots(event.case, event.design, self.slugs[a : a + len(batch)])

    def _queue_design_plots(self, sub, design, slugs) -> list:
        from ..analysis.design_figures import design_figure_inputs
        from ..output.figures.design import KINDS, design_plot_jobs

        plot_jobs = design_plot_jobs(sub, design, design_figure_inputs(sub, design), self.out, slugs)
        n = len(KINDS)  # one group per condition
        with part("design"):
            return [self.jobs.submit_group(plot_jobs[k : k + n]) for k in range(0, len(plot_jobs), n)]

    def _design_done(self, event) -> None:
        from ..output.documents.design import design_document
        from ..output.files import write_atomic
        from ..output.documents.jsonout import dumps, with_verdict
        from ..verdict import Verdict

        design = event.result
        if design is None:  # an envelope case: the schedule part judges it
            doc = with_verdict(design_document(self.case, None, command=self.command), Verdict())
        else:
            drawn = None if design.figures is None or not self.plots else {
                "drawn_for": [self.case.conditions[i].name for i in design.figures],
                "rule": f"per-condition figures for at most {self.max_figures} conditions: the infeasible ones first, "
                "then those with the least slack at the chosen gain (--max-figures)",
            }
            doc = with_verdict(design_document(self.case, None, command=self.command, entries=self.state.entries,
                                               figures=drawn), design.verdict)
            from .responses import ResponseFiles

            self.state.responses = ResponseFiles(self.out, self.command, plots=self.plots, gain_text="chosen gain",
                                           jobs=self.jobs, plot_only=design.figures)
        with part("design"):
            write_atomic(os.path.join(self.out, "design.json"), dumps(doc))
        self.state.design_doc, self.state.entries = doc, []

    def _schedule_done(self, event) -> None:
        if event.result is None:
            return
        from ..output.documents.schedule import write_schedule

        with part("schedule"):
            self.state.written += write_schedule(self.out, self.case, event.result.result, command=self.command,
                                           verdict=event.result.verdict)
            if self.plots:  # drawn here while the worker draws the search's figures
                from ..analysis.schedule_figures import schedule_figure_inputs
                from ..output.figures.schedule import schedule_plots

                with current().stage("schedule plots"):
                    inputs = schedule_figure_inputs(self.case, event.result.result)
                    n = len(schedule_plots(self.case, event.result.result, self.out, inputs))
                self.state.written.append(f"{n} schedule plot files in plots/")

    def _responses_done(self, event) -> None:
        if event.result is None:
            return
        with part("responses"):
            self.state.responses.finish(event.result)
        self.state.written.append("responses.json with time histories")

    def _failures_done(self, event) -> None:
        if event.result is None:
            if event.skipped is not None and event.skipped.wanted:
                self.state.failures_text = f"failures: not studied: {event.skipped.reason}"
            return
        from ..output.documents.failures import write_failures

        with part("failures"):
            self.state.failures_text, files, _ = write_failures(self.out, self.case, event.result.run, self.command,
                                                          event.result.verdict, jobs=self.jobs if self.plots else None)
        self.state.written.append(files)

    def _robustness_done(self, event) -> None:
        if event.result is None or not self.plots:
            return
        from ..analysis.robustness_figures import robustness_figure_inputs
        from ..output.figures.robustness import robustness_plot_jobs

        rob = event.result
        inputs = robustness_figure_inputs(rob.result, limit=self.max_figures)
        rj = robustness_plot_jobs(rob.case, rob.result, inputs, self.out)
        # four groups (the result is sent once per group): the worker and this process share them at the end
        step = max(1, -(-len(rj) // 4))
        with part("robustness"):
            self.state.rob_jobs = [self.jobs.submit_group(rj[k : k + step]) for k in range(0, len(rj), step)]

    def finish(self, result) -> WrittenRun:
        """Wait for every queued figure, then write robustness.json (with its figures' names).

        Parameters
        ----------
        result : damper.analysis.pipeline.PipelineResult

        Returns
        -------
        WrittenRun
            The documents and the list of what was written, for the terminal.
        """
        jobs, out, st = self.jobs, self.out, self.state
        jobs.finish()
        if st.job_ids:
            n = sum(len(jobs.paths(k)) for k in st.job_ids)
            st.written.insert(1, f"{n} plot files in plots/")
        rob = result.robustness
        if rob is not None:
            from ..output.files import write_atomic
            from ..output.documents.jsonout import dumps, with_verdict
            from ..output.documents.robustness import robustness_document

            files = ["robustness.json"]
            if st.rob_jobs is not None:
                files += sorted(os.path.relpath(p, out) for k in st.rob_jobs for p in jobs.paths(k))
            doc = with_verdict(robustness_document(rob.case, rob.result, command=self.command, files=files,
                                                   where=rob.where), rob.verdict)
            with part("robustness"):
                write_atomic(os.path.join(out, "robustness.json"), dumps(doc))
            st.written.append("robustness.json" + (f" with {len(files) - 1} robustness plot files" if len(files) > 1
                                                   else ""))
            st.robustness_doc = doc
        return WrittenRun(st.design_doc, st.robustness_doc, st.failures_text, tuple(st.written))


__all__ = ["DesignRunWriter", "WriterState", "WrittenRun"]
