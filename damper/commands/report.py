"""``damper report RUN_DIR``: rebuild the HTML design report of a finished run directory."""

from __future__ import annotations

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
    from ..output.report import write_report

    if not os.path.isdir(args.run_dir):
        raise DamperError(f"{args.run_dir}: no such directory; give the directory of a finished 'damper design' run")
    if not os.path.isfile(os.path.join(args.run_dir, "design.json")):
        raise DamperError(
            f"{args.run_dir}: no design.json here; run 'damper design CASE --out {args.run_dir}' first"
        )
    path = write_report(args.run_dir)
    print(f"wrote {path}")
    print(CAUTION_SHORT)
    return 0
