"""``damper report RUN_DIR``: rebuild the HTML design report of a finished run directory."""

from __future__ import annotations

import sys

NAME = "report"


def register(sub) -> str:
    p = sub.add_parser(
        NAME,
        help="rebuild RUN_DIR/report.html from a finished design run (and its schedule, robustness and responses)",
    )
    p.add_argument("run_dir", metavar="RUN_DIR", help="directory written by 'damper design CASE --out RUN_DIR'")
    return NAME


def run(args, argv) -> int:
    import os

    from ..cli import CAUTION_SHORT
    from ..errors import DamperError
    from ..output.journal import part
    from ..output.report.build import write_report
    from ..output.rundir import RunDirectory
    from ..output.runfiles import RunFiles

    if not os.path.isdir(args.run_dir):
        raise DamperError(f"{args.run_dir}: no such directory; give the directory of a finished 'damper design' run")
    if not os.path.isfile(os.path.join(args.run_dir, "design.json")):
        raise DamperError(
            f"{args.run_dir}: no design.json here; run 'damper design CASE --out {args.run_dir}' first"
        )
    command = " ".join(["damper", *argv])
    with RunDirectory(args.run_dir, command, mode="report", parts=("report",)) as run:
        files = RunFiles.verified(run.root, run.files(), complete=run.writes_manifest)
        with part("report"):
            path = write_report(run.root, files)
        run.finish()
    print(f"wrote {path}" + ("" if files.complete else " (the run is incomplete: the report says so)"))
    if files.changed:
        print(f"damper: warning: {len(files.changed)} file(s) listed by the run are missing or changed since and were "
              f"left out of the report: {', '.join(files.changed[:5])}{', ...' if len(files.changed) > 5 else ''}",
              file=sys.stderr)
    print(CAUTION_SHORT)
    return 0
