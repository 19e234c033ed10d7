"""``damper sweep CASE --condition NAME [--design RUN_DIR | --schedule FILE]``: damping, frequency and margins
against gain at one condition (the designed or scheduled gain marked).

Table on the terminal, ``--csv FILE``, ``--json`` (damper/output/documents/sweep.py builds all
three from one set of rows; no margin values where the closed loop is unstable)."""

from __future__ import annotations

import os
import sys

from ..output.progress import add_quiet_option, configure

NAME = "sweep"


def register(sub) -> str:
    p = sub.add_parser(NAME, help="damping, frequency and margins against gain at one condition (table, CSV, plot)")
    p.add_argument("case", help="case file (YAML)")
    p.add_argument("--condition", required=True, metavar="NAME", help="condition name")
    p.add_argument("--gain-min", type=float, default=None, metavar="K", help="lowest gain, s (default from control power)")
    p.add_argument("--gain-max", type=float, default=None, metavar="K", help="highest gain, s")
    p.add_argument("--points", type=int, default=25, help="number of log-spaced gains (default 25)")
    p.add_argument("--csv", metavar="FILE", help="write the table as CSV (refused if FILE exists, unless --force)")
    p.add_argument("--force", action="store_true", help="replace an existing CSV file")
    p.add_argument("--json", action="store_true", help="print the sweep as JSON on standard output")
    add_quiet_option(p)
    from .gain_source import add_gain_options

    add_gain_options(p, required=False, gain=False)  # --design / --schedule: mark that condition's gain
    return NAME


def run(args, argv) -> int:
    import math

    import numpy as np

    from ..analysis.schedule_points import design_points_case
    from ..analysis.search import default_range, evaluate_points
    from ..case import load_case
    from ..cli import CAUTION_SHORT, warn_case
    from ..errors import DamperError
    from ..output.files import write_atomic
    from ..output.documents.jsonout import dumps
    from ..output.documents.sweep import sweep_csv, sweep_document, sweep_rows, sweep_table

    case = design_points_case(load_case(args.case))  # an envelope case: its design points
    names = [c.name for c in case.conditions]
    if args.condition not in names:
        import difflib

        close = difflib.get_close_matches(args.condition, names, n=1)
        hint = f"; did you mean {close[0]!r}?" if close else f"; the case has {', '.join(names)}"
        raise DamperError(f"--condition {args.condition!r}: no such condition in {args.case}{hint}")
    if not 2 <= args.points <= 2000:
        raise DamperError(f"--points = {args.points}: must be between 2 and 2000")
    for v, n in ((args.gain_min, "--gain-min"), (args.gain_max, "--gain-max")):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise DamperError(f"{n} = {v}: must be a positive number of seconds")
    if args.csv and os.path.exists(args.csv) and not args.force:
        raise DamperError(f"{args.csv}: exists; choose another file or add --force")
    warn_case(case)
    i = names.index(args.condition)
    lo, hi = default_range(case)
    lo = args.gain_min or float(lo[i])
    hi = args.gain_max or float(hi[i])
    if not lo < hi:
        raise DamperError(f"--gain-min ({lo:g}) must be below --gain-max ({hi:g})")
    gains = np.logspace(np.log10(lo), np.log10(hi), args.points)
    source = None
    if args.design is not None or args.schedule is not None:
        from .gain_source import resolve_gains

        source = resolve_gains(case, args)
        gains = np.unique(np.append(gains, source.values[i]))  # the marked gain is a row of its own
    with configure(args.quiet).stage("sweep", len(gains), "gains"):
        rows = sweep_rows(evaluate_points(case, np.full(len(gains), i), gains))
    if source is not None:
        for r, k in zip(rows, gains):
            r["marked"] = source.label if k == source.values[i] else ""
    if args.csv:
        write_atomic(args.csv, sweep_csv(rows))
    if args.json:
        doc = sweep_document(case, args.condition, rows, command=" ".join(["damper", *argv]))
        if source is not None:  # which row is the designed or scheduled gain, and where it came from
            doc["marked"] = {"gain_s": float(source.values[i]), "label": source.label, "source": source.text}
        sys.stdout.write(dumps(doc))
        return 0
    print(f"{case.title}: gain sweep at {args.condition}")
    print(sweep_table(rows))
    if source is not None:
        print(f"gain of: the row at K = {source.values[i]:.4g} s is {source.label}, from {source.text}")
        for note in source.notes:
            print(f"note: {note}")
    if args.csv:
        print(f"wrote {args.csv}")
    print(CAUTION_SHORT)
    return 0
