"""``damper respond CASE (--gain K | --design RUN_DIR | --schedule FILE)``: time responses to pilot inputs and gusts with actuator limits."""

from __future__ import annotations

from ..output.progress import add_quiet_option, configure
from ..output.options import add_figures_option

NAME = "respond"


def register(sub) -> str:
    from .gain_source import add_gain_options

    a = sub.add_parser(
        NAME,
        help="simulate pilot inputs and gusts with the actuator's rate and travel limits, bare and with the damper",
    )
    a.add_argument("case", help="case file (YAML); inputs from its 'responses' section (default: a 2 deg doublet)")
    add_gain_options(a)
    a.add_argument("--out", metavar="DIR", help="write CSV (one per condition and input), JSON and PNG/SVG plots here")
    a.add_argument("--force", action="store_true",
                   help="replace the responses of an earlier damper run in DIR (its other files are kept)")
    a.add_argument("--no-plots", action="store_true", help="with --out: skip the plots")
    add_figures_option(a)
    add_quiet_option(a)
    return NAME


def run(args, argv) -> int:
    from ..stages.responses import write_responses

    from ..output.style import use_option

    use_option(args.figures)  # before anything is drawn (the plot worker inherits it)
    import sys

    from ..cli import CAUTION_SHORT, warn_case
    from ..case import load_case
    from .gain_source import check_gain, resolve_gains

    check_gain(args.gain)
    from ..analysis.schedule_points import design_points_case

    case = design_points_case(load_case(args.case))  # an envelope case: its design points
    warn_case(case)
    configure(args.quiet)
    gains = resolve_gains(case, args)
    for note in gains.notes:
        print(f"damper: note: {note}", file=sys.stderr)
    command = " ".join(["damper", *argv])
    if not args.out:
        doc, notes = write_responses(None, case, gains.values, command)
        _print(case, gains, doc, notes)
        print("no files written (give --out DIR for CSV, JSON and plots)")
        print(CAUTION_SHORT)
        return 0
    from ..output.journal import part
    from ..output.report.build import refresh_report
    from ..output.rundir import RunDirectory

    with RunDirectory(args.out, command, case.sha256, mode="add", parts=("responses",), force=args.force) as run:
        with part("responses"):
            doc, notes = write_responses(run.root, case, gains.values, command, plots=not args.no_plots,
                                         gain_text=gains.text)
        rebuilt = refresh_report(run)
        run.finish()
    _print(case, gains, doc, notes)
    print(f"wrote responses.json, CSV and plots to {run.root}" + ("; rebuilt report.html" if rebuilt else ""))
    print(CAUTION_SHORT)
    return 0


def _print(case, gains, doc, notes):
    from ..output.documents.responses import response_table

    default = doc["simulation"]["default_inputs"]
    print(f"{case.title}: time responses with {gains.text}" + (" (default doublet)" if default else ""))
    print(response_table(doc))
    for note in notes:
        print(f"note: {note}")
