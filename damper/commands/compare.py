"""``damper compare RUN_A RUN_B --out DIR``: two design runs point by point (docs/compare.md)."""

from __future__ import annotations

import os

from ..output.options import add_figures_option

NAME = "compare"
#: Conditions that get an overlay plot (the first in the table's order: worst first).
MAX_OVERLAYS = 12
#: The run documents compared (read through each run's manifest when listed there).
DOCUMENTS = ("design.json", "schedule.json", "gain-schedule.json", "robustness.json", "responses.json")


def register(sub) -> str:
    p = sub.add_parser(
        NAME,
        help="compare two design runs (before/after a change, old/new schedule): deltas, what got worse, report",
        description="Compare two `damper design` run directories: per-condition runs by condition name, schedules "
        "on the union of both verification grids; writes compare.json, overlay plots and compare.html.",
    )
    p.add_argument("run_a", metavar="RUN_A", help="the reference design run directory")
    p.add_argument("run_b", metavar="RUN_B", help="the design run judged against it (its verdict is the result)")
    p.add_argument("--out", required=True, metavar="DIR", help="directory for compare.json, plots and compare.html")
    p.add_argument("--case-a", metavar="FILE", help="RUN_A's case file (default: the path its design.json records)")
    p.add_argument("--case-b", metavar="FILE", help="RUN_B's case file (default: the path its design.json records)")
    p.add_argument("--force", action="store_true", help="replace an earlier comparison in DIR")
    p.add_argument("--no-plots", action="store_true", help="skip the overlay plots")
    add_figures_option(p)
    return NAME


def _read_run(path, label):
    """(DesignRun, {document: parsed}, {document: sha256}) of one run, read through its manifest."""
    from ..errors import DamperError
    from ..output.runfiles import read_json
    from .gain_source import read_design_run

    run = read_design_run(path, option=f"RUN_{label}")
    if run.files is None:
        raise DamperError(f"RUN_{label} {path}: no manifest.json (not a finished damper run, or an older one): "
                          "compare reads only files a run's manifest lists, by their SHA-256; rerun the design")
    if not run.files.complete:
        raise DamperError(f"RUN_{label} {path}: the run is incomplete (interrupted or failed); rerun the design")
    docs, hashes = {}, {}
    for name in DOCUMENTS:
        doc, sha = read_json(run.files, name, required=False)
        if doc is None and name in run.files.changed:
            raise DamperError(f"RUN_{label} {path}: {name} changed since the run wrote it (its SHA-256 no longer "
                              "matches the manifest); rerun the design")
        if doc is not None:
            if "_unreadable" in doc:
                raise DamperError(f"RUN_{label} {path}: {name}: {doc['_unreadable']}")
            docs[name], hashes[name] = doc, sha
    return run, docs, hashes


def _load_case(run, given, label, needed):
    """The run's case, checked to be the file the run was made from (SHA-256); None when it is not
    there, not given and not `needed` (a schedule needs it; the overlay plots are then left out)."""
    from ..case import load_case
    from ..errors import DamperError

    recorded = (run.design.get("provenance") or {}).get("input_file")
    path = given or recorded
    if not path or not os.path.isfile(path):
        if given or not needed:
            if given:
                raise DamperError(f"--case-{label.lower()} {given}: no such file")
            return None
        raise DamperError(f"RUN_{label} {run.root}: its case file {path!r} is not there (a relative path is relative "
                          f"to where the design ran); give it with --case-{label.lower()} FILE (a schedule is compared "
                          "on each run's own case)")
    case = load_case(path)
    if run.input_sha256 and case.sha256 != run.input_sha256:
        raise DamperError(f"--case-{label.lower()} {path}: SHA-256 {case.sha256[:12]}... is not the "
                          f"{run.input_sha256[:12]}... RUN_{label} was made from; give the case file of that run")
    return case


def _pass_fractions(docs):
    rob = docs.get("robustness.json") or {}
    out = {}
    for c in rob.get("conditions") or ():
        try:
            out[c["name"]] = float(c["pass"]["all"]["fraction"])
        except (KeyError, TypeError, ValueError):
            continue
    return out


def _condition_points(docs):
    from ..output.documents.compare import point_record

    pf = _pass_fractions(docs)
    return {c["name"]: ("condition", point_record(c, pf.get(c["name"])))
            for c in (docs["design.json"].get("conditions") or ()) if isinstance(c, dict) and "name" in c}


def _schedule_points(case, schedule, schedules, docs):
    """{label: ("schedule point", record)} of one run's schedule on the union grid, and the evaluation."""
    import numpy as np

    from ..analysis.compare_points import union_grid_points
    from ..output.documents.compare import point_record
    from ..output.documents.jsonout import condition_result

    sp = union_grid_points(case, schedule, schedules)
    pf = _pass_fractions(docs)
    met = np.asarray(sp.result.criteria.all_met)
    points = {}
    for i, cond in enumerate(sp.case.conditions):
        entry = {"chosen_gain_s": float(sp.gains[i]), "feasible": bool(met[i]), "feasible_gains_s": None,
                 "measures": condition_result(sp.case, sp.result, (i,))}
        points[cond.name] = ("schedule point", point_record(entry, pf.get(cond.name)))
    return points, sp


def run(args, argv) -> int:
    from ..output.documents.compare import compare_document, compare_points, compare_table, verdict_lines, verdict_of_run
    from ..output.files import write_atomic
    from ..output.journal import part
    from ..output.documents.jsonout import dumps
    from ..output.rundir import RunDirectory
    from ..output.documents.schedule import schedule_from_table
    from ..cli import CAUTION_SHORT
    from ..verdict import EXIT_NOT_MET

    from ..errors import DamperError
    from ..output.style import use_option

    use_option(args.figures)  # before anything is drawn
    if any(os.path.realpath(args.out) == os.path.realpath(r) for r in (args.run_a, args.run_b)):
        raise DamperError(f"--out {args.out}: is one of the compared runs; give the comparison its own directory")
    sides = [_read_run(args.run_a, "A"), _read_run(args.run_b, "B")]
    tables = [docs.get("gain-schedule.json") for _, docs, _ in sides]
    cases = [_load_case(side[0], given, label, table is not None)
             for side, given, label, table in zip(sides, (args.case_a, args.case_b), "AB", tables)]
    points = [_condition_points(docs) for _, docs, _ in sides]
    schedules = [None if t is None else schedule_from_table(t, os.path.join(r.root, "gain-schedule.json"))
                 for t, (r, _, _) in zip(tables, sides)]
    evaluated = [None, None]
    present = [s for s in schedules if s is not None]
    for k in range(2):
        if schedules[k] is not None:
            extra, evaluated[k] = _schedule_points(cases[k], schedules[k], present, sides[k][1])
            points[k].update(extra)
    rows, only_a, only_b = compare_points(points[0], points[1])
    verdict, source = verdict_of_run(sides[1][1])
    runs = [{"dir": r.root, "input_file": (r.design.get("provenance") or {}).get("input_file"),
             "input_sha256": r.input_sha256, "documents": hashes} for r, _, hashes in sides]
    notes = []
    if sides[0][0].input_sha256 and sides[0][0].input_sha256 == sides[1][0].input_sha256:
        notes.append("both runs were made from the same case file")
    plots = not args.no_plots
    if plots and None in cases:
        plots = False
        notes.append("no overlay plots: a run's case file is not where its design.json says (give --case-a / --case-b)")
    command = " ".join(["damper", *argv])
    with RunDirectory(args.out, command, None, mode="new", parts=("compare",), force=args.force) as out:
        with part("compare"):
            figures = _plots(out.root, rows, cases, evaluated) if plots else []
            doc = compare_document(runs, rows, only_a, only_b, verdict, source, figures, notes)
            write_atomic(os.path.join(out.root, "compare.json"), dumps(doc))
            from .. import __version__
            from ..output.report.compare import build_compare_report

            write_atomic(os.path.join(out.root, "compare.html"), build_compare_report(doc, out.root, __version__))
        out.finish()
    print(f"comparison: A = {args.run_a}, B = {args.run_b} (delta = B - A)")
    print(compare_table(doc))
    for line in verdict_lines(doc):
        print(line)
    for note in notes:
        print(f"note: {note}")
    print(f"wrote compare.json, compare.html{' and plots' if figures else ''} to {out.root}")
    print(CAUTION_SHORT)
    return EXIT_NOT_MET if not doc["verdict"]["met"] else 0


def _plots(root, rows, cases, evaluated):
    """Overlay plots: the first matched conditions (worst first) and both schedules; [{svg and/or png, caption}]."""
    import numpy as np

    from ..analysis.compare_points import condition_sweep, sweep_gains
    from ..output.figures.compare import overlay_sweep_plot, schedule_overlay_plot
    from ..output.style import plot_slugs

    figures = []
    chosen = [r for r in rows if r["kind"] == "condition"][:MAX_OVERLAYS]
    slugs = plot_slugs([r["name"] for r in chosen])
    band = _band(cases[1])
    for r, slug in zip(chosen, slugs):
        k = sweep_gains([(cases[0], r["name"]), (cases[1], r["name"])])
        sweeps = [condition_sweep(c, r["name"], k) for c in cases]
        stem = os.path.join(root, "plots", f"overlay-{slug}")
        overlay_sweep_plot(stem, f"{r['name']}: run A and run B against the gain", sweeps[0], sweeps[1],
                           (r["a"]["chosen_gain_s"], r["b"]["chosen_gain_s"]), band)
        figures.append({**_written(root, stem),
                        "caption": f"{r['name']}: damping ratio, gain margin and phase margin against K; run A solid, "
                        "run B dashed; dotted: chosen gains" + (f"; worse in B: {', '.join(r['worse'])}" if r["worse"] else "")})
    if evaluated[0] is not None and evaluated[1] is not None:
        names = [[c.name for c in sp.case.conditions] for sp in evaluated]
        common = [n for n in names[0] if n in set(names[1])]
        if common:
            ia = np.array([names[0].index(n) for n in common])
            ib = np.array([names[1].index(n) for n in common])
            q = np.array([evaluated[0].case.conditions[i].dynamic_pressure for i in ia])
            stem = os.path.join(root, "plots", "overlay-schedules")
            schedule_overlay_plot(stem, "Both schedules at the points of both verification grids", q,
                                  (evaluated[0].gains[ia], evaluated[1].gains[ib]),
                                  (evaluated[0].result.criteria.worst_slack[ia],
                                   evaluated[1].result.criteria.worst_slack[ib]))
            figures.insert(0, {**_written(root, stem),
                               "caption": f"Scheduled gain and worst requirement slack at {len(common)} points against "
                               "dynamic pressure; run A circles, run B squares; below 0: a requirement missed"})
    return figures


def _written(root, stem) -> dict:
    """The figure `stem`'s file in each format written (``--figures``), relative to `root`."""
    from ..output.style import formats

    return {fmt: os.path.relpath(f"{stem}.{fmt}", root) for fmt in formats()}


def _band(case):
    """The damping band (lower, upper) of the case's requirements (None: no bound)."""
    for c in case.requirements.criteria:
        if c.name == "damping_ratio":
            import math

            return (float(c.lower) if math.isfinite(c.lower) else None, float(c.upper) if math.isfinite(c.upper) else None)
    return (None, None)
