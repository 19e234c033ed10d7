"""The design report: one self-contained HTML file built from a finished run directory.

:func:`build_report` reads what the run wrote (``design.json``, and when present
``schedule.json``, ``robustness.json`` and ``responses.json``) plus the plot files,
and renders ``templates/report.html.j2`` with Jinja2 (autoescape on: every piece of
user text, from the case title to a condition name or a command line, is escaped).
Nothing here computes a measure: values are only formatted and converted for
reading (rad to deg, m/s to kt, m to ft). The file is self-contained: plots are
inlined as ``data:`` URIs (SVG when present, PNG otherwise), styles are inline,
there is no script and nothing is loaded from anywhere.

Sections whose JSON is missing show "Not run for this case". The schedule and
robustness documents are rendered from their structure (scalars as a list of
settings, flat dictionaries as key/value tables, lists of dictionaries as tables,
any ``.png``/``.svg`` file they name that exists in the run directory as a figure,
and every plot in ``plots/`` whose name begins with ``schedule`` or ``robust``),
so the report follows those documents as they grow; keys ending in a unit suffix
(``_s``, ``_rad_s``, ``_db``, ``_deg``, ``_pa``, ...) show the unit. Rows with
``met``/``feasible``/``ok``/``pass``/``passed`` false sort first; a long table shows
its failing rows and the first others, and says how many are left out. A top-level
verdict (``passed`` and ``message``) heads the section.

The report date is the current UTC time, or ``SOURCE_DATE_EPOCH`` when set (for a
byte-identical rebuild).
"""

from __future__ import annotations

import datetime as _dt
import functools
import os

from ...errors import DamperError
from ..style import plot_slugs
from ..runfiles import read_json as _read_json
from .conditions import _case_view, _condition_view, _requirements_view, _responses_view
from .format import DASH
from .sections import _robustness_view, _schedule_view, _section_view, verdict_view

#: Files of the run directory the report reads, in the order of its sections.
OPTIONAL_DOCUMENTS = ("schedule.json", "robustness.json", "responses.json", "failures.json")

CAUTION_POINTS = (
    "This is preliminary engineering analysis. It is not a certification document.",
    "Flight-control changes affect the safety of flight. Every result here must be validated "
    "by simulation, ground test and flight test.",
    "Whether a design is acceptable is decided under the applicable airworthiness rules by "
    "qualified, licensed engineers, not by this tool.",
    "The models are linear, small-perturbation, short-period approximations: they say nothing "
    "about structural modes or flight outside the conditions analysed; a failure study only "
    "estimates the motion until the pilot acts and replaces no failure analysis or test.",
)

# --- provenance -------------------------------------------------------------------
def _report_date():
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.strip().isdigit():
        t = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.timezone.utc)
    else:
        t = _dt.datetime.now(tz=_dt.timezone.utc)
    return t.strftime("%Y-%m-%d %H:%M UTC")


def _file_date(path):
    t = _dt.datetime.fromtimestamp(os.path.getmtime(path), tz=_dt.timezone.utc)
    return t.strftime("%Y-%m-%d %H:%M UTC")


def _library_versions():
    from importlib import metadata

    from ... import __version__

    out = [("damper", __version__)]
    for dist in ("numpy", "scipy", "control", "matplotlib", "pint", "PyYAML", "Jinja2"):
        try:
            out.append((dist, metadata.version(dist)))
        except metadata.PackageNotFoundError:
            out.append((dist, "not installed"))
    return out


def _provenance_view(design, hashes, docs, run_files):
    p = design.get("provenance") or {}
    seed = p.get("seed")
    rows = [
        ("input file", p.get("input_file") or DASH),
        ("input SHA-256", p.get("input_sha256") or DASH),
        ("tool", f"{p.get('tool', 'damper')} {p.get('tool_version', '')}".strip()),
        ("Python", p.get("python") or DASH),
        ("numpy", p.get("numpy") or DASH),
        ("scipy", p.get("scipy") or DASH),
        ("seed", "none (the design uses no random numbers)" if seed is None else str(seed)),
        ("command line", p.get("command") or DASH),
        ("design written", _file_date(os.path.join(run_files.root, "design.json"))),
        ("report built", _report_date()),
    ]
    files = [{"name": "design.json", "sha": hashes.get("design.json"), "same": None, "seed": None,
              "command": p.get("command"), "other": False}]
    for name in OPTIONAL_DOCUMENTS:
        d = docs.get(name)
        if d is None:
            continue
        dp = d.get("provenance") if isinstance(d, dict) else None
        dp = dp if isinstance(dp, dict) else {}
        sha = dp.get("input_sha256")
        files.append(
            {
                "name": name,
                "sha": hashes.get(name),
                "same": None if sha is None else sha == p.get("input_sha256"),
                "seed": dp.get("seed"),
                "command": dp.get("command"),
                "other": False,
            }
        )
    listed = {x["name"] for x in files}
    for name in run_files.names(""):
        if name in listed or name == "report.html":
            continue
        files.append({"name": name, "sha": run_files.listed[name], "same": None, "seed": None, "command": None,
                      "other": True})
    n_plots = sum(1 for n in run_files.names("plots") if n.lower().endswith((".png", ".svg")))
    return {"rows": rows, "files": files, "libraries": _library_versions(), "n_plots": n_plots}


# ---------------------------------------------------------------------------------
# entry points
# ---------------------------------------------------------------------------------
def report_context(run_dir, files=None) -> dict:
    """Everything the template shows, formatted (no measure is computed here).

    `files` (a :class:`~damper.output.runfiles.RunFiles`) names what the report may read;
    by default the files the directory's manifest (or journal) lists, with matching hashes.
    """
    from ..runfiles import RunFiles

    run_dir = os.fspath(run_dir)
    if not os.path.isdir(run_dir):
        raise DamperError(f"{run_dir}: not a directory; give the directory of a finished 'damper design' run")
    files = files if files is not None else RunFiles.of_directory(run_dir)
    design, sha = _read_json(files, "design.json", required=True)
    if not isinstance(design, dict) or not isinstance(design.get("conditions"), list):
        raise DamperError(f"{os.path.join(run_dir, 'design.json')}: not a design document (no conditions); rerun 'damper design'")
    hashes = {"design.json": sha}
    docs = {}
    for name in OPTIONAL_DOCUMENTS:
        d, h = _read_json(files, name, required=False)
        if d is not None:
            docs[name] = d if isinstance(d, dict) else {"_unreadable": "not a JSON object"}
            hashes[name] = h
    summary = design.get("case_summary") or {}
    summary_conds = {c.get("name"): c for c in summary.get("conditions") or []}
    names = [c.get("name") for c in design["conditions"]]
    slugs = plot_slugs(names)
    conditions = [
        _condition_view(i, c, slugs[i], files, summary_conds.get(c.get("name")))
        for i, c in enumerate(design["conditions"])
    ]
    drawn = design.get("figures") if isinstance(design.get("figures"), dict) else None
    if drawn is not None:  # a large case draws figures for some conditions only (design.json says which)
        some = set(drawn.get("drawn_for") or ())
        for view in conditions:
            if view["name"] not in some:
                for fg in view["figures"]:
                    fg["missing"] = f"no figure for this condition: {drawn.get('rule', '')}"
    failing_first = sorted(conditions, key=lambda c: (c["feasible"], c["index"]))
    infeasible = [c for c in conditions if not c["feasible"]]
    level_values = [c["level"] for c in conditions if c["level"] != DASH]
    worst_level = None
    if level_values:
        worst_level = max(level_values, key=lambda v: v if isinstance(v, int) else 99)
    prov = _provenance_view(design, hashes, docs, files)
    return {
        "title": design.get("title") or "untitled case",
        "report_date": dict(prov["rows"])["report built"],
        "input_sha": (design.get("provenance") or {}).get("input_sha256") or "",
        "caution": design.get("caution") or "",
        "caution_points": CAUTION_POINTS,
        "warnings": [str(w) for w in design.get("warnings") or []],
        "damping_measure": design.get("damping_measure") or "equivalent",
        "requirements": _requirements_view(design),
        "case": _case_view(design),
        "conditions": failing_first,
        "run_verdict": verdict_view({"design.json": design, **docs}),
        "n_conditions": len(conditions),
        "n_infeasible": len(infeasible),
        "infeasible_names": [c["name"] for c in infeasible],
        "worst_level": worst_level,
        "policy_reasons": sorted({c["reason"] for c in conditions if c["reason"]}),
        "schedule": _section_view(docs.get("schedule.json"), files, _schedule_view, "schedule"),
        "robustness": _section_view(docs.get("robustness.json"), files, _robustness_view, "robust"),
        "responses": _responses_view(
            docs.get("responses.json"), files, {c.get("name"): c.get("chosen_gain_s") for c in design["conditions"]}
        ),
        "failures": _failures_view(docs.get("failures.json"), files),
        "provenance": prov,
        "run_state": {"complete": files.complete, "changed": list(files.changed)},
        "any_plots": any(fg["src"] for c in conditions for fg in c["figures"]),
    }


def _failures_view(doc, files):
    from .failures import failures_view

    return _section_view(doc, files, failures_view, "failures")


@functools.lru_cache(maxsize=1)
def _environment():
    """The report's template environment, made once per process: it keeps the compiled
    template (about 0.1 s to compile), and reloads it if the file changes on disk."""
    from jinja2 import Environment, FileSystemLoader, StrictUndefined

    here = os.path.join(os.path.dirname(os.path.abspath(__file__)), "templates")
    return Environment(
        loader=FileSystemLoader(here),
        autoescape=True,  # every value is HTML-escaped unless marked safe (nothing is)
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )


def build_report(run_dir, files=None) -> str:
    """The HTML text of the design report of a run directory.

    Parameters
    ----------
    run_dir : str or path
        A directory holding ``design.json`` (and optionally ``schedule.json``,
        ``robustness.json``, ``responses.json`` and the plots).
    files : RunFiles, optional
        What the report may read (default: what the run's manifest or journal lists,
        with matching SHA-256; see :mod:`damper.output.runfiles`).

    Raises
    ------
    DamperError
        If `run_dir` holds no run or no readable design document.
    """
    context = report_context(run_dir, files)
    return _environment().get_template("report.html.j2").render(**context)


def write_report(run_dir, files=None) -> str:
    """Build the report and write ``run_dir/report.html`` atomically; returns its path."""
    from ..files import write_atomic

    html = build_report(run_dir, files)
    return write_atomic(os.path.join(os.fspath(run_dir), "report.html"), html)


def refresh_report(run):
    """Rebuild the report of the run directory `run` (a :class:`~damper.output.rundir.RunDirectory`
    held by this process) if it holds a design run with a report.

    For commands that add files to a run (``respond``, ``robust``), so the report never
    describes files that have since been replaced. Returns the path, or None when there
    was no report to refresh.
    """
    from ..journal import part
    from ..runfiles import RunFiles

    listed = run.files()
    if "design.json" in listed and os.path.isfile(os.path.join(run.root, "report.html")):
        with part("report"):
            return write_report(run.root, RunFiles.verified(run.root, listed))
    return None


__all__ = ["build_report", "refresh_report", "report_context", "write_report"]
