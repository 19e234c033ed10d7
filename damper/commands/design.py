"""``damper design CASE --out DIR``: choose the gain at every condition and write the run.

The command parses its arguments, runs :func:`damper.analysis.pipeline.run_pipeline` and hands
the results to :class:`damper.stages.design_run.DesignRunWriter` (the run's files, as each
stage ends) and to the terminal.
"""

from __future__ import annotations

from ..output.progress import add_quiet_option, configure, current
from ..output.options import add_figures_option

NAME = "design"
#: Conditions that get their own figures by default (docs/performance.md: a 2,000-condition run
#: would otherwise draw about 6,000 figure files and a report too large to open).
FIGURE_CONDITIONS = 48


def register(sub) -> str:
    p = sub.add_parser(NAME, help="find the feasible gains and choose one at every condition; write a run directory")
    p.add_argument("case", help="case file (YAML)")
    p.add_argument("--out", required=True, metavar="DIR", help="run directory to create (refused if it holds an earlier run)")
    p.add_argument("--force", action="store_true", help="replace the files of an earlier run in DIR")
    p.add_argument(
        "--policy",
        choices=("balanced", "least_gain", "damping_target"),
        default="balanced",
        help="how to choose the gain inside the feasible set (default: balanced = most slack to the tightest requirement)",
    )
    p.add_argument("--target-damping", type=float, metavar="ZETA", help="damping ratio for --policy damping_target")
    p.add_argument("--gain-min", type=float, metavar="K", help="lowest gain of the sweep, s")
    p.add_argument("--gain-max", type=float, metavar="K", help="highest gain of the sweep, s")
    p.add_argument("--points", type=int, default=161, help="gains in the sweep (default 161)")
    p.add_argument("--no-plots", action="store_true", help="skip the plots")
    add_figures_option(p)
    p.add_argument("--max-figures", type=int, default=FIGURE_CONDITIONS, metavar="N",
                   help=f"per-condition figures for at most N conditions (default {FIGURE_CONDITIONS}): every condition "
                   "when the case has no more, else the infeasible ones and those with the least slack")
    p.add_argument("--no-responses", action="store_true", help="skip the time responses at the chosen gains")
    p.add_argument("--no-robustness", action="store_true", help="skip the robustness study of the case's uncertainty section")
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="run the robustness study on the workers of a Dask scheduler at ADDRESS (needs "
                   "pip install 'damper[cluster]'); same result as the local run (docs/cluster.md)")
    p.add_argument("--no-failures", action="store_true", help="skip the failure study of the case's failures section")
    p.add_argument("--no-report", action="store_true", help="skip the HTML report (rebuild it later with 'damper report DIR')")
    add_quiet_option(p)
    return NAME


def _check_args(args):
    import math

    from ..errors import DamperError

    if args.policy == "damping_target" and args.target_damping is None:
        raise DamperError("--policy damping_target needs --target-damping ZETA")
    if args.target_damping is not None and not (math.isfinite(args.target_damping) and args.target_damping > 0):
        raise DamperError(f"--target-damping = {args.target_damping}: must be a positive number")
    for name in ("gain_min", "gain_max"):
        v = getattr(args, name)
        if v is not None and not (math.isfinite(v) and v > 0):
            raise DamperError(f"--{name.replace('_', '-')} = {v}: must be a positive number of seconds")
    if args.gain_min and args.gain_max and not args.gain_min < args.gain_max:
        raise DamperError(f"--gain-min ({args.gain_min:g}) must be below --gain-max ({args.gain_max:g})")
    if not 8 <= args.points <= 5000:
        raise DamperError(f"--points = {args.points}: must be between 8 and 5000")
    if not 0 <= args.max_figures <= 2000:
        raise DamperError(f"--max-figures = {args.max_figures}: must be between 0 and 2000")


def options(args):
    """The pipeline's options from the command line."""
    from ..analysis.pipeline import PipelineOptions

    return PipelineOptions(gain_min=args.gain_min, gain_max=args.gain_max, points=args.points, policy=args.policy,
                           damping_target=args.target_damping, figures=not args.no_plots, max_figures=args.max_figures,
                           responses=not args.no_responses, failures=not args.no_failures,
                           robustness=not args.no_robustness, cluster=args.cluster)


def _check_case(case) -> None:
    """Refuse, before any output, a case that gives the design nothing to do.

    An envelope case without a ``schedule:`` section is valid input for ``assess``, ``sweep``
    and ``robust --gain`` (they are given their gains), but it names no condition to design at
    and no breakpoints to design a schedule on.
    """
    from ..errors import DamperError

    if not case.conditions and case.schedule is None:
        raise DamperError(
            f"{case.file}: nothing to design: the case gives an envelope but no schedule: section "
            "(its breakpoints are where the gains are designed); add one (docs/case-file.md), or "
            "use damper assess / sweep at gains you give"
        )


def run(args, argv) -> int:
    _check_args(args)
    from ..output.style import use_option

    use_option(args.figures)  # before anything is drawn (the plot worker inherits it)
    import dataclasses

    from ..analysis.pipeline import run_pipeline
    from ..case import load_case
    from ..cli import warn_case
    from ..output.background import PlotJobs
    from ..output.journal import part
    from ..output.rundir import RunDirectory
    from ..stages.design_run import DesignRunWriter

    case = load_case(args.case)
    _check_case(case)
    from ..analysis.runners import check_cluster

    check_cluster(args.cluster)  # an unreachable cluster is an error before any output
    configure(args.quiet)
    command = " ".join(["damper", *argv])
    with RunDirectory(args.out, command, case.sha256, mode="new", force=args.force) as run:
        out = run.root
        warn_case(case)
        # figures are drawn by a worker process while the analysis goes on (see PlotJobs)
        rob_planned = case.uncertainty is not None and not args.no_robustness
        with PlotJobs(enabled=(bool(case.conditions) or rob_planned) and not args.no_plots) as jobs:
            writer = DesignRunWriter(out, case, command, jobs, plots=not args.no_plots, max_figures=args.max_figures)
            result = run_pipeline(case, options(args), on_event=writer, progress=current())
            wrote = writer.finish(result)
        if not args.no_report:
            from ..output.report.build import write_report
            from ..output.runfiles import RunFiles

            with part("report"), current().stage("report"):
                write_report(out, RunFiles.verified(out, run.files()))
            wrote = dataclasses.replace(wrote, written=(*wrote.written, "report.html"))
        run.finish()
    _print(args, result, dataclasses.replace(wrote, written=(*wrote.written, "manifest.json")), out)
    return result.verdict.exit_status()


def _print(args, result, wrote, out) -> None:
    """The run on the terminal: what was understood, the tables, the files, the verdict, the caution."""
    from ..cli import CAUTION_SHORT
    from ..output.documents.design import design_table

    case, design, schedule, rob = result.case, result.design, result.schedule, result.robustness
    print(f"{case.title}")
    if design is not None:
        from ..output.documents.understood import echo_for, with_level_legend

        print(echo_for(case, wrote.design_doc))
        print(with_level_legend(design_table(wrote.design_doc), case))
        if design.figures is not None and not args.no_plots:
            print(f"figures drawn for {len(design.figures)} of {len(design.conditions)} conditions (the infeasible ones "
                  "and those with the least slack; --max-figures N to change)")
    if schedule is not None:
        from ..output.documents.schedule import schedule_summary

        print(schedule_summary(schedule.result))
    if rob is not None:
        from ..output.documents.robustness import robustness_table

        where = "the scheduled gains, at the tightest verification points" if schedule is not None else "the chosen gains"
        print(f"robustness at {where} ({rob.spec.samples} samples, seed {rob.spec.seed}):")
        print(robustness_table(wrote.robustness_doc))
    if wrote.failures_text is not None:
        print(wrote.failures_text)
    print(f"wrote {', '.join(wrote.written)} to {out}")
    print("\n".join(result.verdict.lines()))
    print(CAUTION_SHORT)
