"""Where a command's gains come from: ``--gain K``, ``--design RUN_DIR`` or ``--schedule FILE``.

One module for every command that takes gains (``assess``, ``respond``, ``sweep``, ``robust``)
and for ``compare`` (which reads two design runs):

- ``--gain K``: K (s) at every condition.
- ``--design RUN_DIR``: each condition's chosen gain from the run's ``design.json``, matched
  by condition name. The run's files are read only when its manifest lists them with
  matching SHA-256 (:class:`damper.output.runfiles.RunFiles`), and a run made from another
  case file (the manifest's ``input_sha256`` differs from the case's) is refused.
- ``--schedule FILE``: a ``gain-schedule.json`` (or a run directory holding one); each
  condition's gain is the schedule's gain at the condition's schedule variables
  (:meth:`damper.analysis.schedule.Schedule.gain_at`, the interpolation the schedule's
  verification uses). A schedule from another case is allowed on purpose (the old schedule
  flown on a modified aircraft); its input hash is reported.

This module is part of the command line: it reads files and turns options into arrays;
the measures come from the library.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

#: Largest design.json / gain-schedule.json read (a 2,000-condition design.json is about 20 MB).
MAX_JSON_BYTES = 200_000_000


def add_gain_options(parser, required=True, gain=True):
    """Add the mutually exclusive ``--gain`` / ``--design`` / ``--schedule`` options to `parser`."""
    g = parser.add_mutually_exclusive_group(required=required)
    if gain:
        g.add_argument("--gain", type=float, metavar="K", help="pitch-rate gain K in seconds (deg per deg/s) "
                       "at every condition")
    g.add_argument("--design", metavar="RUN_DIR",
                   help="run directory of `damper design` of this case: each condition's chosen gain")
    g.add_argument("--schedule", metavar="FILE",
                   help="gain-schedule.json (or a run directory holding one): the schedule's gain at each "
                   "condition's schedule variables")
    return g


@dataclass(frozen=True)
class Gains:
    """Per-condition gains and where they came from.

    Attributes
    ----------
    values : ndarray, shape (n_conditions,)
        K at each condition, s.
    kind : str
        ``gain``, ``design`` or ``schedule``.
    text : str
        Where they came from, for people ("K = 0.1 s", "the chosen gains of runs/a").
    label : str
        Short name of the gain in a table column ("K", "designed", "scheduled").
    notes : tuple of str
        Things to tell the user (e.g. a schedule made for another case).
    """

    values: object
    kind: str
    text: str
    label: str = "K"
    notes: tuple = ()


def check_gain(value, option="--gain"):
    """Refuse a gain that is not a finite number."""
    import math

    from ..errors import DamperError

    if value is not None and not math.isfinite(value):
        raise DamperError(f"{option} = {value}: must be a finite number of seconds")


def resolve_gains(case, args):
    """The :class:`Gains` the options of `args` name, one per condition of `case`.

    Raises
    ------
    DamperError
        A missing or unreadable run or file, a run of another case, a condition the run lacks.
    """
    import numpy as np

    n = len(case.conditions)
    if getattr(args, "design", None) is not None:
        run = read_design_run(args.design, case, option="--design")
        gains = design_gains(case, run.design, f"--design {args.design}")
        return Gains(gains, "design", f"the chosen gains of {args.design}", "designed")
    if getattr(args, "schedule", None) is not None:
        schedule, doc, file = read_schedule(args.schedule)
        notes = ()
        sha = doc.get("input_sha256")
        if sha and case.sha256 and sha != case.sha256:
            notes = (f"{file} was made from another case file (input SHA-256 {sha[:12]}..., this case "
                     f"{case.sha256[:12]}...): its gains are used as they are",)
        gains = scheduled_gains(case, schedule)
        return Gains(gains, "schedule", f"the schedule {args.schedule}", "scheduled", notes)
    check_gain(args.gain)
    return Gains(np.full(n, float(args.gain)), "gain", f"K = {args.gain:g} s", "K")


@dataclass(frozen=True)
class DesignRun:
    """A finished design run read through its manifest.

    Attributes
    ----------
    root : str
        The run directory.
    design : dict
        Its ``design.json``.
    design_sha256 : str
        SHA-256 of the design.json bytes (checked against the manifest).
    input_sha256 : str or None
        SHA-256 of the case file the run was made from (the manifest's).
    files : damper.output.runfiles.RunFiles
        The run's verified files (other documents are read through it).
    """

    root: str
    design: dict
    design_sha256: str
    input_sha256: str | None
    files: object


def read_design_run(path, case=None, option="--design"):
    """Read a design run directory (or its design.json) through its manifest.

    Parameters
    ----------
    path : str
        The run directory, or the design.json inside one.
    case : damper.case.model.Case, optional
        When given, the run must have been made from this case file (same SHA-256).
    option : str
        The option or argument named in messages.

    Raises
    ------
    DamperError
        No such directory, not a finished damper run, design.json missing or changed since the
        run, or a run of another case.
    """
    from ..errors import DamperError
    from ..output import journal

    root = (os.path.dirname(path) or ".") if os.path.isfile(path) else path
    if not os.path.isdir(root):
        raise DamperError(f"{option} {path}: no such run directory (run `damper design CASE --out {path}` first)")
    files = None
    name = os.path.basename(path) if os.path.isfile(path) else "design.json"
    if journal.read_manifest(root) is None and not os.path.exists(os.path.join(root, journal.JOURNAL_NAME)):
        doc, sha = _read_json(os.path.join(root, name), option, path)  # written by hand or an older damper
    else:
        from ..output.runfiles import RunFiles, read_json

        files = RunFiles.of_directory(root)
        if name not in files.listed and name not in files.changed:
            raise DamperError(f"{option} {path}: the run lists no {name} (give the directory of a "
                              "`damper design CASE --out DIR` run)")
        doc, sha = read_json(files, name, required=True)
    if not isinstance(doc, dict):
        raise DamperError(f"{option} {path}: design.json is not a JSON object")
    manifest = journal.read_manifest(root) or {}
    input_sha = manifest.get("input_sha256") or (doc.get("provenance") or {}).get("input_sha256")
    recorded = (doc.get("provenance") or {}).get("input_sha256")
    if input_sha and recorded and recorded != input_sha:
        raise DamperError(f"{option} {path}: design.json was made from input {recorded[:12]}... but the run's "
                          f"manifest says {input_sha[:12]}...; the run directory is inconsistent, rerun the design")
    if case is not None and input_sha and case.sha256 and input_sha != case.sha256:
        made_from = (doc.get("provenance") or {}).get("input_file") or "another case file"
        raise DamperError(
            f"{option} {path}: that run was made from {made_from} (SHA-256 {input_sha[:12]}...), not from "
            f"{case.file} (SHA-256 {case.sha256[:12]}...); give a design run of this case file, or its "
            "gain-schedule.json with --schedule, or --gain"
        )
    return DesignRun(os.fspath(root), doc, sha, input_sha, files)


def _read_json(file, option, path):
    """A JSON file and the SHA-256 of its bytes (FIFOs and devices refused, size bounded)."""
    import hashlib
    import json

    from ..errors import DamperError
    from ..readfile import read_regular_file

    try:
        data = read_regular_file(file, MAX_JSON_BYTES)
    except FileNotFoundError:
        raise DamperError(f"{option} {path}: no {os.path.basename(file)} there (run `damper design CASE --out "
                          f"{path}` first)") from None
    except OSError as exc:  # NotARegularFile (a FIFO ...) is an OSError
        raise DamperError(f"{option} {path}: cannot read {file} ({exc})") from None
    try:
        return json.loads(data.decode("utf-8")), hashlib.sha256(data).hexdigest()
    except (ValueError, UnicodeDecodeError) as exc:
        raise DamperError(f"{option} {path}: {file} is not valid JSON ({exc})") from None


def design_gains(case, doc, where="--design"):
    """Chosen gains (s) per condition of `case` from a ``design.json`` document, matched by name.

    Raises
    ------
    DamperError
        If the design has no per-condition gains (a schedule run), lacks a condition of the
        case, or a condition has no chosen gain.
    """
    import numpy as np

    from ..errors import DamperError

    entries = doc.get("conditions") or ()
    if not entries:
        raise DamperError(f"{where}: the run's design.json has no per-condition gains (its case schedules over an "
                          "envelope); use --schedule with its gain-schedule.json")
    by_name = {c.get("name"): c for c in entries if isinstance(c, dict)}
    out = []
    for cond in case.conditions:
        entry = by_name.get(cond.name)
        if entry is None:
            have = ", ".join(map(str, by_name))
            raise DamperError(f"{where}: design.json has no condition named {cond.name!r} (it has {have})")
        k = entry.get("chosen_gain_s")
        if isinstance(k, bool) or not isinstance(k, (int, float)) or not np.isfinite(float(k)):
            raise DamperError(f"{where}: design.json: condition {cond.name!r} has no chosen gain")
        out.append(float(k))
    return np.array(out)


def read_schedule(path, option="--schedule"):
    """The schedule of a ``gain-schedule.json`` (or of a run directory holding one).

    Returns
    -------
    schedule : damper.analysis.schedule.Schedule
    doc : dict
        The parsed file.
    file : str
        The file read.
    """
    from ..errors import DamperError
    from ..output.documents.schedule import schedule_from_table

    file = os.path.join(path, "gain-schedule.json") if os.path.isdir(path) else path
    if not os.path.exists(file):
        raise DamperError(f"{option} {path}: no such file (a design run of a case with a schedule writes "
                          "gain-schedule.json)")
    doc, _ = _read_json(file, option, path)
    return schedule_from_table(doc, file), doc, file


def schedule_values(schedule, altitude, airspeed):
    """The schedule's variables at points, shape (n_variables, n), in their SI units."""
    import numpy as np

    from ..analysis.envelope import variable_value

    return np.array([np.asarray(variable_value(v, altitude, airspeed), dtype=float) for v in schedule.variables])


def scheduled_gains(case, schedule):
    """The schedule's gain (s) at each condition of `case` (its altitude and airspeed)."""
    import numpy as np

    alt = np.array([c.altitude for c in case.conditions], dtype=float)
    spd = np.array([c.airspeed for c in case.conditions], dtype=float)
    return np.asarray(schedule.gain_at(schedule_values(schedule, alt, spd)), dtype=float).reshape(-1)
