"""``damper design CASE --out DIR``: choose the gain at every condition and write the run."""

from __future__ import annotations

import os
from dataclasses import dataclass

from ..output.progress import add_quiet_option, configure, current

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
    p.add_argument("--figures", default="png,svg", metavar="FORMATS",
                   help="figure formats, comma-separated: png, svg or both (default png,svg; the report embeds SVG when there is one; one format draws the figures in about half the time)")
    p.add_argument("--max-figures", type=int, default=FIGURE_CONDITIONS, metavar="N",
                   help=f"per-condition figures for at most N conditions (default {FIGURE_CONDITIONS}): every condition "
                   "when the case has no more, else the infeasible ones and those with the least slack")
    p.add_argument("--no-responses", action="store_true", help="skip the time responses at the chosen gains")
    p.add_argument("--no-robustness", action="store_true", help="skip the robustness study of the case's uncertainty section")
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


def run(args, argv) -> int:
    _check_args(args)
    from ..output.style import use_option

    use_option(args.figures)  # before anything is drawn (the plot worker inherits it)
    from ..case import load_case
    from ..cli import CAUTION_SHORT, warn_case
    from ..output.background import PlotJobs
    from ..output.documents.design import design_table
    from ..output.journal import part
    from ..output.rundir import RunDirectory

    case = load_case(args.case)
    configure(args.quiet)
    command = " ".join(["damper", *argv])
    with RunDirectory(args.out, command, case.sha256, mode="new", force=args.force) as run:
        out = run.root
        warn_case(case)
        written = ["design.json"]
        # figures are drawn by a worker process while the analysis goes on (see PlotJobs)
        rob_planned = case.raw.get("uncertainty") is not None and not args.no_robustness
        with PlotJobs(enabled=(bool(case.conditions) or rob_planned) and not args.no_plots) as jobs:
            design = _design(args, case, out, command, jobs)
            robustness_text, spec, schedule, verdict, failures_text = _analyses(args, case, design, out, command, jobs,
                                                                                written)
            if design is not None:
                verdict = design.verdict + verdict
        if not args.no_report:
            from ..output.report.build import write_report
            from ..output.runfiles import RunFiles

            with part("report"), current().stage("report"):
                write_report(out, RunFiles.verified(out, run.files()))
            written.append("report.html")
        run.finish()
        written.append("manifest.json")
    print(f"{case.title}")
    if design is not None:
        from ..output.documents.understood import echo_for, with_level_legend

        print(echo_for(case, design.doc))
        print(with_level_legend(design_table(design.doc), case))
        if design.figures is not None and not args.no_plots:
            print(f"figures drawn for {len(design.figures)} of {len(design.conditions)} conditions (the infeasible ones "
                  "and those with the least slack; --max-figures N to change)")
    if schedule is not None:
        from ..output.documents.schedule import schedule_summary

        print(schedule_summary(schedule))
    if robustness_text is not None:
        where = "the scheduled gains, at the tightest verification points" if schedule is not None else "the chosen gains"
        print(f"robustness at {where} ({spec.samples} samples, seed {spec.seed}):")
        print(robustness_text)
    if failures_text is not None:
        print(failures_text)
    print(f"wrote {', '.join(written)} to {out}")
    print("\n".join(verdict.lines()))
    print(CAUTION_SHORT)
    return verdict.exit_status()


@dataclass(frozen=True)
class DesignStream:
    """What a design run keeps of its search, condition batch by condition batch.

    Attributes
    ----------
    conditions : tuple of ConditionDesign
        Every condition's result (feasible intervals, chosen gain K in s, reason).
    doc : dict
        The ``design.json`` document.
    figures : tuple of int or None
        Conditions with figures when not all of them have (None: every condition).
    plot_jobs : tuple of int
        Numbers of the design plot jobs queued on the run's PlotJobs.
    verdict : damper.verdict.Verdict
        The ``design`` part of the run's verdict.
    """

    conditions: tuple
    doc: dict
    figures: tuple | None
    plot_jobs: tuple
    verdict: object


def _design(args, case, out, command, jobs):
    """Search every condition in batches, queue the figures, write design.json (None without conditions)."""
    import numpy as np

    from ..analysis.batches import condition_batches, sub_case
    from ..analysis.search import SearchSettings, search
    from ..analysis.verdicts import design_misses, design_verdict
    from ..output.documents.design import condition_entries, design_document
    from ..output.files import write_atomic
    from ..output.journal import part
    from ..output.documents.jsonout import dump_part, dumps, with_verdict
    from ..output.figures.design import plot_slugs
    from ..verdict import Verdict

    if not case.conditions:  # an envelope case: the schedule part judges it
        with part("design"):
            doc = with_verdict(design_document(case, None, command=command), Verdict())
            write_atomic(os.path.join(out, "design.json"), dumps(doc))
        return None
    settings = SearchSettings(gain_min=args.gain_min, gain_max=args.gain_max, points=args.points,
                              policy=args.policy, damping_target=args.target_damping)
    n = len(case.conditions)
    slugs = plot_slugs(case.names)
    draw_all = n <= args.max_figures
    entries, conds, worst, job_ids, misses, turbulence_misses = [], [], [], [], [], []
    stage = current().stage("search", n, "conditions")
    for a, b in condition_batches(n):  # memory: one batch's sweep at a time (damper/analysis/batches.py)
        sub = sub_case(case, range(a, b))
        d = search(sub, settings)
        batch = condition_entries(sub, d)
        turbulence_misses += _add_turbulence(sub, d, batch)
        entries += [dump_part(e) for e in batch]  # text: about 8 kB per condition
        conds += d.conditions
        misses += design_misses(sub.names, d)
        worst.append(np.asarray(d.chosen.criteria.worst_slack, dtype=float).reshape(-1))
        if draw_all and not args.no_plots:
            job_ids += _queue_design_plots(jobs, sub, d, out, slugs[a:b])
        stage.update(b)
    stage.finish()
    figures = None
    if not draw_all:
        figures = _figure_conditions(conds, np.concatenate(worst), args.max_figures)
        for a, b in condition_batches(len(figures)) if not args.no_plots else ():
            idx = figures[a:b]
            sub = sub_case(case, idx)
            job_ids += _queue_design_plots(jobs, sub, search(sub, settings), out, [slugs[i] for i in idx])
    drawn = None if figures is None or args.no_plots else {
        "drawn_for": [case.conditions[i].name for i in figures],
        "rule": f"per-condition figures for at most {args.max_figures} conditions: the infeasible ones first, then "
        "those with the least slack at the chosen gain (--max-figures)",
    }
    verdict = design_verdict(case.names, [c.feasible for c in conds], misses, turbulence_misses)
    doc = with_verdict(design_document(case, None, command=command, entries=entries, figures=drawn), verdict)
    with part("design"):
        write_atomic(os.path.join(out, "design.json"), dumps(doc))
    return DesignStream(tuple(conds), doc, figures, tuple(job_ids), verdict)


def _queue_design_plots(jobs, sub, design, out, slugs):
    from ..analysis.design_figures import design_figure_inputs
    from ..output.figures.design import KINDS, design_plot_jobs
    from ..output.journal import part

    plot_jobs = design_plot_jobs(sub, design, design_figure_inputs(sub, design), out, slugs)
    n = len(KINDS)  # one group per condition
    with part("design"):
        return [jobs.submit_group(plot_jobs[k : k + n]) for k in range(0, len(plot_jobs), n)]


def _figure_conditions(conds, worst, limit) -> tuple:
    """The conditions that get figures: infeasible first, then the least worst slack (NaN first), by index."""
    import math

    def key(i):
        w = worst[i]
        return (conds[i].feasible, -math.inf if w != w else w, i)

    return tuple(sorted(sorted(range(len(conds)), key=key)[:limit]))


def _add_turbulence(case, design, entries):
    """With a ``turbulence:`` section: the responses at the chosen gains into the design.json entries;
    returns the turbulence requirements not met (verdict items of part ``design``)."""
    import numpy as np

    from ..analysis.turbulence_case import case_turbulence, check_turbulence, turbulence_items

    study = case_turbulence(case, np.array([c.chosen_gain for c in design.conditions]))
    if study is None:
        return []
    from ..output.documents.turbulence import add_turbulence

    checks = check_turbulence(case, study.closed_loop)
    add_turbulence({"conditions": entries}, study, checks)
    return list(turbulence_items(case, checks))


def _analyses(args, case, design, out, command, jobs, written):
    """Schedule, responses and robustness after the search; figures go to `jobs`.

    Returns (robustness table text or None, uncertainty spec or None, schedule or None, the
    verdict of the schedule, robustness and failures parts, the failure summary text or None)
    once every queued figure is drawn.
    """
    from ..output.files import write_atomic
    from ..output.journal import part
    from ..output.documents.jsonout import dumps, with_verdict
    from ..verdict import Verdict

    schedule = None
    verdict = Verdict()
    if case.raw.get("schedule") is not None:
        from ..analysis.schedule import design_schedule
        from ..analysis.verdicts import schedule_verdict
        from ..output.documents.schedule import write_schedule

        schedule = design_schedule(case, progress=current())
        verdict = schedule_verdict(schedule)
        with part("schedule"):
            written += write_schedule(out, case, schedule, command=command, verdict=verdict)
            if not args.no_plots:  # drawn here while the worker draws the search's figures
                from ..analysis.envelope_view import envelope_view
                from ..output.figures.schedule import schedule_plots

                with current().stage("schedule plots"):
                    paths = schedule_plots(case, schedule, out, envelope_view(case, schedule))
                    written.append(f"{len(paths)} schedule plot files in plots/")
    if design is not None and not args.no_responses:
        import numpy as np

        from ..stages.responses import write_responses

        gains = np.array([c.chosen_gain for c in design.conditions])
        with part("responses"):
            write_responses(out, case, gains, command, plots=not args.no_plots, gain_text="chosen gain",
                            jobs=jobs, plot_only=design.figures)
        written.append("responses.json with time histories")
    failures = _failures(args, case, design, out, command, jobs, written)
    robustness_text = spec = rob = rob_jobs = where = None
    studied = design is not None or schedule is not None
    if studied and case.raw.get("uncertainty") is not None and not args.no_robustness:
        import numpy as np

        from ..analysis.robustness import robustness, uncertainty_spec

        spec = uncertainty_spec(case)
        if schedule is not None:  # the schedule is what flies: its tightest verification points
            from ..analysis.schedule_points import schedule_study_case, study_description

            case, gains, _ = schedule_study_case(case, schedule, spec.schedule_points)
            where = study_description(len(gains))
        else:
            gains = np.array([c.chosen_gain for c in design.conditions])
        rob = robustness(case, gains, spec, progress=current())
        if not args.no_plots:
            from ..output.figures.robustness import robustness_plot_jobs

            rj = robustness_plot_jobs(case, rob, out, limit=args.max_figures)
            # four groups (the result is sent once per group): the worker and this process
            # share them at the end
            step = max(1, -(-len(rj) // 4))
            with part("robustness"):
                rob_jobs = [jobs.submit_group(rj[k : k + step]) for k in range(0, len(rj), step)]
    jobs.finish()
    if design is not None and design.plot_jobs:
        n = sum(len(jobs.paths(k)) for k in design.plot_jobs)
        written.insert(1, f"{n} plot files in plots/")
    if rob is not None:
        from ..output.documents.robustness import robustness_document, robustness_table

        files = ["robustness.json"]
        if rob_jobs is not None:
            files += sorted(os.path.relpath(p, out) for k in rob_jobs for p in jobs.paths(k))
        from ..analysis.verdicts import robustness_verdict

        rv = robustness_verdict(rob, spec.required_fraction)
        verdict = verdict + rv
        rdoc = with_verdict(robustness_document(case, rob, command=command, files=files, where=where), rv)
        with part("robustness"):
            write_atomic(os.path.join(out, "robustness.json"), dumps(rdoc))
        written.append("robustness.json" + (f" with {len(files) - 1} robustness plot files" if len(files) > 1 else ""))
        robustness_text = robustness_table(rdoc)
    return robustness_text, spec, schedule, verdict + failures[1], failures[0]


def _failures(args, case, design, out, command, jobs, written):
    """The failure study of the case's ``failures:`` section at the chosen gains (docs/failures.md):
    failures.json and its figure. Returns (terminal summary or None when not run,
    :class:`damper.verdict.Verdict` of part ``failures``, empty when not run)."""
    from ..verdict import Verdict

    if args.no_failures or case.raw.get("failures") is None:
        return None, Verdict()
    if design is None:
        return ("failures: not studied: the case has no conditions of its own (its gains come from the schedule; "
                "the failure study of a schedule's points is not available yet)", Verdict())
    import numpy as np

    from ..analysis.failure_run import run_failures
    from ..analysis.failure_verdict import failure_verdict
    from ..output.documents.failures import write_failures
    from ..output.journal import part

    with part("failures"), current().stage("failures"):
        result = run_failures(case, np.array([c.chosen_gain for c in design.conditions]))
        text, files, verdict = write_failures(out, case, result, command, failure_verdict(result),
                                              jobs=None if args.no_plots else jobs)
    written.append(files)
    return text, verdict
