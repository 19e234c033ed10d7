"""``damper robust CASE (--gain K | --design DIR | --schedule FILE)``: robustness to uncertain data and hardware."""

from __future__ import annotations

import sys

from ..output.progress import add_quiet_option, configure, current
from ..output.options import add_figures_option

NAME = "robust"


def register(sub) -> str:
    p = sub.add_parser(
        NAME,
        help="Monte Carlo, corners and worst case of the case's uncertainty section; write a run directory",
        description="Robustness of the damper to the uncertainty: section of the case (derivatives, mass, CG, "
        "hardware and gain tolerances): pass fraction of every requirement with its confidence interval, "
        "worst case, and which parameter drives it.",
    )
    p.add_argument("case", help="case file (YAML) with an uncertainty: section")
    g = p.add_mutually_exclusive_group(required=True)
    g.add_argument("--gain", type=float, metavar="K", help="pitch-rate gain K in seconds at every condition")
    g.add_argument("--design", metavar="DIR", help="run directory of `damper design`: its chosen gain per condition")
    g.add_argument("--schedule", metavar="FILE",
                   help="gain-schedule.json (or a run directory holding one): the study runs at the schedule's "
                   "tightest verification points (uncertainty.schedule_points) at the scheduled gain")
    p.add_argument("--samples", type=int, metavar="N", help="Monte Carlo samples (default: the case's, else 2000)")
    p.add_argument("--seed", type=int, metavar="S", help="random seed (default: the case's, else 1)")
    p.add_argument("--workers", type=int, metavar="W",
                   help="local processes evaluating the blocks of samples (default: up to 2, as processes when the "
                   "study is large enough that starting them pays, else threads); the result does not depend on it")
    p.add_argument("--cluster", metavar="ADDRESS",
                   help="run the study on the workers of a Dask scheduler at ADDRESS (e.g. tcp://10.0.0.5:8786; "
                   "needs pip install 'damper[cluster]'); same result as the local run (docs/cluster.md)")
    p.add_argument("--out", metavar="DIR", help="run directory to create (default: robust-<case name>)")
    p.add_argument("--force", action="store_true",
                   help="replace the robustness files of an earlier damper run in DIR (its other files are kept)")
    p.add_argument("--no-plots", action="store_true", help="skip the plots")
    add_figures_option(p)
    add_quiet_option(p)
    return NAME


def _check_args(args):
    import math

    from ..errors import DamperError

    if args.gain is not None and not math.isfinite(args.gain):
        raise DamperError(f"--gain = {args.gain}: must be a finite number of seconds")
    if args.samples is not None and not 1 <= args.samples <= 10_000_000:
        raise DamperError(f"--samples = {args.samples}: must be between 1 and 10000000")
    if args.seed is not None and args.seed < 0:
        raise DamperError(f"--seed = {args.seed}: must not be negative")
    if args.workers is not None and not 1 <= args.workers <= 64:
        raise DamperError(f"--workers = {args.workers}: must be between 1 and 64")
    if args.cluster is not None and args.workers is not None:
        raise DamperError("--workers and --cluster: give one (the cluster's workers are set where they are started)")


def run(args, argv) -> int:
    _check_args(args)
    from ..output.style import case_slug, use_option

    use_option(args.figures)  # before anything is drawn (the plot worker inherits it)
    from ..analysis.robustness import uncertainty_spec
    from ..analysis.runners import cluster_client
    from ..case import load_case
    from ..cli import CAUTION_SHORT
    from ..output.documents.robustness import robustness_table

    case = load_case(args.case)
    spec = uncertainty_spec(case, samples=args.samples, seed=args.seed)
    case, gains, checked, source = _study(args, case)
    command = " ".join(["damper", *argv])
    with cluster_client(args.cluster) as cluster:  # before the run directory: an unreachable cluster writes nothing
        stage, elapsed, doc, note = _write_run(args, case, gains, checked, spec, command, args.out or f"robust-{case_slug(args.case)}",
                                               cluster)
    case, result, verdict = stage.case, stage.result, stage.verdict
    source = source or f"the schedule {args.schedule} at its {len(stage.gains)} tightest verification points"
    print(f"{case.title}: robustness with {source}")
    print(
        f"{spec.samples} samples (seed {spec.seed}), {len(result.corners_u)} corners"
        f"{'' if result.corners_complete else ' (random subset)'}, worst-case search; "
        f"{result.evaluations} loops in {elapsed:.1f} s" + (f" on the Dask cluster at {args.cluster}" if args.cluster else "")
    )
    print(robustness_table(doc))
    bad = [(c["name"], c["diagnostics"]["equivalent_fits_not_converged"]) for c in doc["conditions"]
           if c["diagnostics"]["equivalent_fits_not_converged"]]
    if bad:
        print("note: equivalent-system fit did not converge for " + ", ".join(f"{n} ({k} samples)" for n, k in bad))
    print(note)
    print("\n".join(verdict.lines()))
    print(CAUTION_SHORT)
    return verdict.exit_status()


def _write_run(args, case, gains, checked, spec, command, out, cluster):
    """Run the robustness stage and write robustness.json (and its plots) in the run directory `out`.

    Returns (the stage, elapsed wall time in s, the document, the line saying what was written).
    """
    import os
    import time

    from ..analysis.pipeline import robustness_stage
    from ..analysis.robustness_figures import robustness_figure_inputs
    from ..cli import warn_case
    from ..output.files import write_atomic
    from ..output.journal import part
    from ..output.documents.jsonout import dumps, with_verdict
    from ..output.report.build import refresh_report
    from ..output.documents.robustness import robustness_document
    from ..output.figures.robustness import robustness_plots
    from ..output.rundir import RunDirectory

    with RunDirectory(out, command, case.sha256, mode="add", parts=("robustness",), force=args.force) as run:
        out = run.root
        warn_case(case)
        if not spec.parameters and spec.cg_shift is None:
            print("damper: warning: the case has no uncertainty: section (or it is empty); every sample is the nominal",
                  file=sys.stderr)
        start = time.perf_counter()
        stage = robustness_stage(case, gains, schedule=checked, progress=configure(args.quiet), spec=spec,
                                 schedule_name=args.schedule, workers=args.workers,
                                 processes=True if args.workers else None, cluster=cluster)
        elapsed = time.perf_counter() - start
        files = ["robustness.json"]
        with part("robustness"):
            plot_paths = []
            if not args.no_plots:
                with current().stage("figures"):
                    inputs = robustness_figure_inputs(stage.result)
                    plot_paths = robustness_plots(stage.case, stage.result, inputs, out)
                files += sorted(os.path.relpath(p, out) for p in plot_paths)
            doc = with_verdict(robustness_document(stage.case, stage.result, command=command, files=files,
                                                   where=stage.where), stage.verdict)
            write_atomic(os.path.join(out, "robustness.json"), dumps(doc))
        rebuilt = refresh_report(run)
        run.finish()
    written = "robustness.json" + (f" and {len(plot_paths)} plot files in plots/" if plot_paths else "")
    return stage, elapsed, doc, f"wrote {written} to {out}" + ("; rebuilt report.html" if rebuilt else "")


def _study(args, case):
    """What the study runs on: (case, gains K in s or None, checked schedule or None, source text or None).

    With ``--schedule`` the robustness stage picks the schedule's tightest verification points
    (their count, for `source`, is known once it has).
    """
    from .gain_source import design_gains, read_design_run, read_schedule

    checked = gains = None
    if args.schedule is not None:  # the study runs at the schedule's tightest verification points
        from ..analysis.schedule import verification_points, verify
        from ..analysis.schedule_points import CheckedSchedule

        sched, _, _ = read_schedule(args.schedule)
        pts, _, confs = verification_points(case, sched)
        checked = CheckedSchedule(verify(case, sched, pts), confs)
        source = None  # the count of points is known once the study has chosen them
    elif args.design is not None:
        gains = design_gains(case, read_design_run(args.design, case).design, f"--design {args.design}")
        source = f"chosen gains of {args.design}"
    else:
        from ..analysis.schedule_points import design_points_case

        gains = args.gain
        source = f"K = {args.gain:g} s at every condition"
        if not case.conditions:  # an envelope case: its design points (as damper assess)
            case = design_points_case(case)
            source = f"K = {args.gain:g} s at the {len(case.conditions)} envelope design points"
    return case, gains, checked, source
