"""``damper sweep CASE --condition NAME``: damping, frequency and margins against gain at one condition."""

from __future__ import annotations

import os

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
    from .gain_source import add_gain_options

    add_gain_options(p, required=False, gain=False)  # --design / --schedule: mark that condition's gain
    return NAME


def sweep_rows(case, index, gains):
    """Rows of the sweep table (pure: measures come from the library)."""
    import numpy as np

    from ..analysis.search import evaluate_points

    res = evaluate_points(case, np.full(len(gains), index), np.asarray(gains))
    rows = []
    for j, k in enumerate(gains):
        rows.append(
            {
                "gain_s": float(k),
                "damping_equivalent": float(res.equivalent.damping_ratio[j]),
                "damping_modal": float(res.modes.short_period.damping_ratio[j]),
                "frequency_equivalent_rad_s": float(res.equivalent.natural_frequency[j]),
                "frequency_modal_rad_s": float(res.modes.short_period.natural_frequency[j]),
                "ambiguous": bool(res.modes.ambiguous[j]),
                "stable": bool(res.modes.stable[j]),
                "gain_margin_db": float(res.margins.gain_margin_db[j]),
                "phase_margin_deg": float(res.margins.phase_margin_deg[j]),
                "delay_margin_s": float(res.margins.delay_margin_s[j]),
                "disk_margin": float(res.margins.disk_margin[j]),
                "all_met": bool(res.criteria.all_met[j]),
                "marked": "",
            }
        )
    return rows


def run(args, argv) -> int:
    import math

    import numpy as np

    from ..analysis.search import default_range
    from ..case import load_case
    from ..cli import CAUTION_SHORT, warn_case
    from ..errors import DamperError
    from ..output.files import write_atomic
    from ..output.text import fmt, table

    from ..analysis.schedule_points import design_points_case

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
    mark = None
    if args.design is not None or args.schedule is not None:
        from .gain_source import resolve_gains

        source = resolve_gains(case, args)
        mark = float(source.values[i])
        gains = np.unique(np.append(gains, mark))  # the marked gain is a row of its own
    rows = sweep_rows(case, i, gains)
    if mark is not None:
        for r in rows:
            r["marked"] = source.label if r["gain_s"] == mark else ""
    headers = ["K\ns", "zeta\nequiv.", "zeta\nmodal", "wn equiv.\nrad/s", "wn modal\nrad/s", "stable", "GM\ndB",
               "PM\ndeg", "delay m.\ns", "disk\nmargin", "meets\nall"] + (["gain\nof"] if mark is not None else [])
    body = [
        [fmt(r["gain_s"], ".4g"), fmt(r["damping_equivalent"], ".3f"), fmt(r["damping_modal"], ".3f") + ("*" if r["ambiguous"] else ""),
         fmt(r["frequency_equivalent_rad_s"], ".3g"), fmt(r["frequency_modal_rad_s"], ".3g"), "yes" if r["stable"] else "NO",
         fmt(r["gain_margin_db"], ".1f", "none"), fmt(r["phase_margin_deg"], ".1f", "none"),
         fmt(r["delay_margin_s"], ".3f", "none"), fmt(r["disk_margin"], ".2f"), "yes" if r["all_met"] else "no"]
        + ([r["marked"]] if mark is not None else [])
        for r in rows
    ]
    print(f"{case.title}: gain sweep at {args.condition}")
    print(table(headers, body))
    print("* modal pick ambiguous. 'none': no such crossing (unbounded).")
    if mark is not None:
        print(f"gain of: the row at K = {mark:.4g} s is {source.label}, from {source.text}")
        for note in source.notes:
            print(f"note: {note}")
    if args.csv:
        cols = [c for c in rows[0] if c != "marked" or mark is not None]
        lines = [",".join(cols)] + [",".join("" if (isinstance(r[c], float) and not math.isfinite(r[c])) else str(r[c]) for c in cols) for r in rows]
        write_atomic(args.csv, "\n".join(lines) + "\n")
        print(f"wrote {args.csv}")
    print(CAUTION_SHORT)
    return 0
