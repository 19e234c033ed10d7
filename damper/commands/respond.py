"""``damper respond CASE --gain K``: time responses to pilot inputs and gusts with actuator limits."""

from __future__ import annotations

NAME = "respond"


def register(sub) -> str:
    a = sub.add_parser(
        NAME,
        help="simulate pilot inputs and gusts with the actuator's rate and travel limits, bare and with the damper",
    )
    a.add_argument("case", help="case file (YAML); inputs from its 'responses' section (default: a 2 deg doublet)")
    a.add_argument(
        "--gain", required=True, type=float, metavar="K", help="pitch-rate gain K in seconds (deg per deg/s)"
    )
    a.add_argument("--out", metavar="DIR", help="write CSV (one per condition and input), JSON and PNG/SVG plots here")
    a.add_argument("--force", action="store_true",
                   help="replace the responses of an earlier damper run in DIR (its other files are kept)")
    a.add_argument("--no-plots", action="store_true", help="with --out: skip the plots")
    return NAME


def run(args, argv) -> int:
    import math

    from ..analysis.response import respond_case, response_spec
    from ..case import load_case
    from ..cli import CAUTION_SHORT, warn_case
    from ..errors import DamperError
    from ..output.response_plots import response_document

    if not math.isfinite(args.gain):
        raise DamperError(f"--gain = {args.gain}: must be a finite number of seconds")
    case = load_case(args.case)
    warn_case(case)
    command = " ".join(["damper", *argv])
    if not args.out:
        spec = response_spec(case)
        result = respond_case(case, args.gain, spec)
        doc = response_document(case, result, command=command, files={})
        _print(case, args, spec, result, doc)
        print("no files written (give --out DIR for CSV, JSON and plots)")
        print(CAUTION_SHORT)
        return 0
    from ..output.journal import part
    from ..output.report import refresh_report
    from ..output.rundir import RunDirectory

    with RunDirectory(args.out, command, case.sha256, mode="add", parts=("responses",), force=args.force) as run:
        spec = response_spec(case)
        result = respond_case(case, args.gain, spec)
        with part("responses"):
            doc = write_responses(run.root, case, result, spec, command, plots=not args.no_plots,
                                  gain_text=f"K = {args.gain:g} s")
        rebuilt = refresh_report(run)
        run.finish()
    _print(case, args, spec, result, doc)
    print(f"wrote responses.json, CSV and plots to {run.root}" + ("; rebuilt report.html" if rebuilt else ""))
    print(CAUTION_SHORT)
    return 0


def _print(case, args, spec, result, doc):
    from ..output.response_plots import response_table

    print(f"{case.title}: time responses with K = {args.gain:g} s" + (" (default doublet)" if spec.default else ""))
    print(response_table(doc))
    for note in result.notes:
        print(f"note: {note}")


def write_responses(out, case, result, spec, command, plots=True, gain_text="chosen gains", jobs=None):
    """Write each condition's CSV (and plots) and responses.json into `out`; return the document.

    With `jobs` (a :class:`damper.output.background.PlotJobs`) the plots are queued there
    (drawn by the time its ``finish()`` returns) instead of drawn here.
    """
    import os
    from functools import partial

    from ..output.files import write_atomic
    from ..output.jsonout import dumps
    from ..output.response_plots import file_stem, plot_response, response_csv, response_document

    files = {}
    stride = max(1, int(round(spec.output_step / spec.step)))
    for j, res in enumerate(result.responses):
        for i, cond in enumerate(case.conditions):
            bare, aug = res.bare.take(i), res.augmented.take(i)
            stem = os.path.join(out, file_stem(i, cond.name, j, res.input.label))
            paths = [write_atomic(stem + ".csv", response_csv(bare, aug, stride))]
            if plots:
                draw = partial(
                    plot_response,
                    title=f"{case.title}: {cond.name}",
                    subtitle=f"{res.input.label}; {gain_text}; dashed: actuator limits",
                    rate_limit=result.rate_limit, travel=result.travel, stride=stride,
                )
                if jobs is None:
                    paths += draw(stem, bare, aug)
                else:
                    jobs.submit(draw, stem, bare, aug)
                    paths += [stem + ".png", stem + ".svg"]  # the names save_figure writes
            files[(i, j)] = [os.path.basename(p) for p in paths]
    doc = response_document(case, result, command=command, files=files)
    write_atomic(os.path.join(out, "responses.json"), dumps(doc))
    return doc
