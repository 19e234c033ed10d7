"""The responses stage of a run: simulate every input at every condition, a batch of conditions
at a time, and write the CSV files, the figures and responses.json.

Shared by ``damper respond`` and ``damper design`` (a command never imports another command); the
simulation is the pipeline's responses stage (damper/analysis/pipeline_stages.py).
"""

from __future__ import annotations

from ..output.progress import current


def write_responses(out, case, gains, command, plots=True, gain_text="chosen gains", jobs=None, plot_only=None):
    """Simulate every input at every condition, a batch of conditions at a time, and write the files.

    Each condition's CSV (and plots) goes into `out` as its batch is simulated, then
    responses.json; nothing is written when `out` is None. Memory holds one batch's time
    histories (damper/analysis/batches.py). With `jobs` (a
    :class:`damper.output.background.PlotJobs`) the plots are queued there; `plot_only`
    (condition indices) limits the plots to those conditions.

    Parameters
    ----------
    gains : float or array_like, shape (n_conditions,)
        K, s.

    Returns
    -------
    doc : dict
        The responses.json document.
    notes : list of str
    """
    from ..analysis.pipeline_stages import responses_stage

    files = ResponseFiles(out, command, plots=plots, gain_text=gain_text, jobs=jobs, plot_only=plot_only)
    stage = responses_stage(case, gains, current(), emit=files.add)
    return files.finish(stage), list(stage.notes)


class ResponseFiles:
    """The responses' files of a run, written batch by batch as the pipeline simulates them.

    Call :meth:`add` with each :class:`damper.analysis.pipeline.ResponseBatch` (its CSV files,
    and plots, go into `out` at once; nothing is written when `out` is None), then
    :meth:`finish` with the :class:`damper.analysis.pipeline.ResponsesStage` for responses.json.
    """

    def __init__(self, out, command, plots=True, gain_text="chosen gains", jobs=None, plot_only=None):
        self.out, self.command, self.plots, self.gain_text = out, command, plots, gain_text
        self.jobs, self.plot_only = jobs, plot_only
        self.conditions, self.doc = [], None

    def add(self, batch) -> None:
        """Write one batch's CSV files (and plots) and keep its entries of responses.json."""
        from ..output.documents.responses import response_document

        out, sub, result, spec = self.out, batch.case, batch.result, batch.spec
        files = {} if out is None else _write_batch(out, sub, batch.start, result, spec, self.plots, self.gain_text,
                                                    self.jobs, self.plot_only)
        self.doc = response_document(sub, result, command=self.command, files=files)
        self.conditions += self.doc["conditions"]

    def finish(self, stage) -> dict:
        """The responses.json document (written into `out` when there is one)."""
        from ..output.documents.jsonout import with_verdict
        from ..verdict import Verdict

        # the case-level keys are the same in every batch
        doc = dict(self.doc, conditions=self.conditions, notes=list(stage.notes))
        doc = with_verdict(doc, Verdict())  # no requirement on the responses yet: nothing judged (docs/verdict.md)
        if self.out is not None:
            import os

            from ..output.files import write_atomic
            from ..output.documents.jsonout import dumps

            write_atomic(os.path.join(self.out, "responses.json"), dumps(doc))
        return doc


def _write_batch(out, sub, start, result, spec, plots, gain_text, jobs, plot_only):
    """CSV (and plots) of one batch of conditions; ``{(i, j): [file names]}`` with i local to the batch."""
    import os
    from functools import partial

    from ..output.files import write_atomic
    from ..output.figures.responses import file_stem, plot_response
    from ..output.documents.responses import response_csv

    files = {}
    stride = max(1, int(round(spec.output_step / spec.step)))
    for j, res in enumerate(result.responses):
        for i, cond in enumerate(sub.conditions):
            bare, aug = res.bare.take(i), res.augmented.take(i)
            stem = os.path.join(out, file_stem(start + i, cond.name, j, res.input.label))
            paths = [write_atomic(stem + ".csv", response_csv(bare, aug, stride))]
            if plots and (plot_only is None or start + i in plot_only):
                draw = partial(
                    plot_response,
                    title=f"{sub.title}: {cond.name}",
                    subtitle=f"{res.input.label}; {gain_text}; dashed: actuator limits",
                    rate_limit=result.rate_limit, travel=result.travel, stride=stride,
                )
                if jobs is None:
                    paths += draw(stem, bare, aug)
                else:  # copies: a view would keep the whole batch's histories alive while the job waits
                    jobs.submit(draw, stem, _owned(bare), _owned(aug))
                    from ..output.style import formats

                    paths += [f"{stem}.{fmt}" for fmt in formats()]  # the names save_figure writes
            files[(i, j)] = [os.path.basename(p) for p in paths]
    return files


def _owned(history):
    """A time history whose arrays are its own (not views into a batch's arrays)."""
    import dataclasses

    import numpy as np

    return dataclasses.replace(history, **{k: np.array(getattr(history, k)) for k in history.SERIES})
