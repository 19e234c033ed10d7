"""The responses stage of a run: simulate every input at every condition, a batch of conditions
at a time, and write the CSV files, the figures and responses.json.

Shared by ``damper respond`` and ``damper design`` (a command never imports another command).
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
    import numpy as np

    from ..analysis.batches import condition_batches, sub_case
    from ..analysis.response import respond_case, response_spec
    from ..output.documents.responses import response_document

    n = len(case.conditions)
    gains = np.broadcast_to(np.asarray(gains, dtype=float), (n,))
    conditions, notes, doc = [], [], None
    stage = current().stage("responses", n, "conditions")
    for a, b in condition_batches(n):
        sub = sub_case(case, range(a, b))
        spec = response_spec(sub)
        result = respond_case(sub, gains[a:b], spec)
        files = {} if out is None else _write_batch(out, sub, a, result, spec, plots, gain_text, jobs, plot_only)
        doc = response_document(sub, result, command=command, files=files)
        conditions += doc["conditions"]
        notes += [note for note in result.notes if note not in notes]
        stage.update(b)
    stage.finish()
    doc = dict(doc, conditions=conditions, notes=list(notes))  # the case-level keys are the same in every batch
    from ..output.documents.jsonout import with_verdict
    from ..verdict import Verdict

    doc = with_verdict(doc, Verdict())  # no requirement on the responses yet: nothing judged (docs/verdict.md)
    if out is not None:
        import os

        from ..output.files import write_atomic
        from ..output.documents.jsonout import dumps

        write_atomic(os.path.join(out, "responses.json"), dumps(doc))
    return doc, notes


def _write_batch(out, sub, start, result, spec, plots, gain_text, jobs, plot_only):
    """CSV (and plots) of one batch of conditions; ``{(i, j): [file names]}`` with i local to the batch."""
    import os
    from functools import partial

    from ..output.files import write_atomic
    from ..output.documents.responses import response_csv
    from ..output.figures.responses import file_stem, plot_response

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
