"""Outputs of the failure study: failures.json, its verdict and the terminal summary.

Nothing is computed here beyond unit conversion for display (rad to deg) and the distance of
a reported peak from its band; the results come from
:func:`damper.analysis.failure_run.run_failures`. The terminal summary and the report read
the document written here, whose ``verdict`` object comes from :func:`failure_verdict`.
"""

from __future__ import annotations

import math

from ...analysis.failure_verdict import LIMIT_KEYS, LIMIT_WORDS
from ...analysis.failure_verdict import deg_range as _deg_range
from .jsonout import CAUTION, provenance, with_verdict
from .serialize import point, series
from .text import fmt, table

R2D = 180.0 / math.pi

#: The values the settings' ``servo`` object (:class:`~damper.case.failure_spec.ServoLimits`) and a
#: ``saturation`` row (:class:`~damper.analysis.failure_run.Saturation`) write, in the document's
#: order (keys and units from the fields' metadata, :mod:`damper.quantities`).
SERVO = ("authority", "authority_rate_limit", "rate_limit", "travel")
#: The transient limits' bands (:class:`~damper.case.failure_spec.TransientLimits`), in the order written.
LIMITS = ("load_factor_g", "pitch_attitude_rad", "angle_of_attack_rad")
SATURATION = ("time_at_authority_limit_s", "time_at_authority_rate_limit_s", "peak_damper_demand_rad", "duration_s")


def _settings(run) -> dict:
    spec, servo = run.spec, run.servo
    lim = spec.limits
    return {
        **point(spec, None, ("recognition_time_s",)),  # a float (case and presets): written as before
        "kinds": list(spec.kinds),
        "limits": series(lim, LIMITS),
        "passive_level_required": spec.passive_level_required,
        "passive_category": spec.passive_category,
        "sources": dict(spec.sources),
        "servo": {
            **point(servo, None, SERVO),
            "failures_run_to": "loop.authority" if servo.authority is not None else "loop.actuator.travel (no authority)",
        },
        "step_s": spec.time_grid()[0],
        "frequency_range_x_short_period": list(spec.frequency_range),
        "frequency_points": spec.frequency_points,
    }


def _saturation(rows) -> list:
    return [{"input": s.input, **point(s, None, SATURATION)} for s in rows]


def failures_document(case, run, verdict, command=None, files=()) -> dict:
    """The failures.json document (SI units; null for NaN and unbounded values).

    Per condition ``failures`` follows the design.json contract of docs/failures.md; beside it
    ``saturation`` (per response input: time at the authority limit, at its rate limit, the
    largest damper demand). At top level ``failures`` (the common window) and ``verdict``
    (`verdict`: :func:`damper.analysis.failure_verdict.failure_verdict` of `run`, built once
    by the caller).
    """
    conds = [{"name": n, **point(run, k, ("gains",)), "failures": rec, "saturation": _saturation(sat)}
             for k, (n, rec, sat) in enumerate(zip(run.names, run.records, run.saturation))]
    return with_verdict({
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "settings": _settings(run),
        "failures": run.summary,
        "conditions": conds,
        "files": list(files),
        "provenance": provenance(case, command),
    }, verdict)


# ---------------------------------------------------------------------------
# Terminal
# ---------------------------------------------------------------------------


def _deg(x, spec=".3g"):
    return fmt(None if x is None else x * R2D, spec)


def failures_summary(doc) -> str:
    """The terminal summary of failures.json (angles in deg for reading)."""
    s = doc["settings"]
    headers = ["condition", "hardover\nnz g", "hardover\ndtheta deg", "oscill.\nrad/s", "oscill.\nnz g",
               "passive\nlevel", "window\ndeg", "saturates\ns", "met"]
    rows = []
    for c, ok in zip(doc["conditions"], _met(doc)):
        f = c["failures"]
        h, o, p = f.get("hardover") or {}, f.get("oscillatory") or {}, f.get("passive") or {}
        w = f.get("authority_window_rad", False)
        window = "-" if w is False else ("empty" if w is None else
                                        f"{_deg(w[0])}-{'inf' if w[1] is None else _deg(w[1])}")
        sat = [x["time_at_authority_limit_s"] for x in c["saturation"]]
        rows.append([c["name"], fmt(h.get("peak_load_factor_increment_g"), "+.3f"),
                     _deg(h.get("peak_pitch_attitude_change_rad"), "+.3g"), fmt(o.get("frequency_rad_s")),
                     fmt(o.get("peak_load_factor_increment_g"), "+.3f"), fmt(p.get("level"), ".0f"), window,
                     fmt(max(sat), ".3f") if sat else "-", "yes" if ok else "NO"])
    servo = s["servo"]
    auth = "none (failures run to the travel)" if servo["authority_rad"] is None else _deg(servo["authority_rad"], ".4g") + " deg"
    head = (f"failures (recognition time {s['recognition_time_s']:g} s; damper authority {auth}; "
            f"limits: {_limits_text(s['limits'])}):")
    top = doc["failures"]
    common = top["authority_window_rad"]
    tail = [f"authority window over every condition: {_deg_range(common) if common else 'EMPTY'} - "
            f"{top['authority_window_reason']}",
            "nz: incremental load factor; dtheta: pitch-attitude change, both at the hardover sign with the least slack "
            "within the recognition time; saturates: longest time at the authority limit in the design's responses."]
    return "\n".join([head, table(headers, rows), *tail])


def _met(doc):
    bad = {i["condition"] for i in doc["verdict"]["items"] if not i["met"] and i["condition"] is not None}
    return [c["name"] not in bad for c in doc["conditions"]]


def _limits_text(limits) -> str:
    out = []
    for limit, (_, key, unit) in LIMIT_KEYS.items():
        b = limits.get(key)
        if b is not None:
            text = f"{b[0]:+.3g}/{b[1]:+.3g} g" if unit == "g" else f"{b[0] * R2D:+.3g}/{b[1] * R2D:+.3g} deg"
            out.append(f"{LIMIT_WORDS[limit]} {text}")
    return ", ".join(out)


def write_failures(out, case, run, command, verdict, jobs=None, title=None):
    """Write failures.json (and queue the hardover figure on `jobs`, a
    :class:`~damper.output.background.PlotJobs`, when given).

    `verdict` is :func:`damper.analysis.failure_verdict.failure_verdict` of `run` (the part
    ``failures`` of the run's verdict), returned as given.

    Returns
    -------
    summary : str
        The terminal summary.
    written : str
        The files, for the run's list of written files.
    verdict : damper.verdict.Verdict
        The part ``failures`` of the run's verdict (the one failures.json holds).
    """
    import os

    from ..figures.failures import failure_plot_jobs
    from ..style import formats
    from ..files import write_atomic
    from .jsonout import dumps

    files = []
    if jobs is not None:
        for fn, args in failure_plot_jobs(run, out, title or case.title):
            jobs.submit(fn, *args)
            files += [f"{os.path.relpath(args[0], out)}.{fmt}" for fmt in formats()]  # the names save_figure writes
    doc = failures_document(case, run, verdict, command=command, files=files)
    write_atomic(os.path.join(out, "failures.json"), dumps(doc))
    return failures_summary(doc), "failures.json" + (f" with {len(files)} failure plot files" if files else ""), verdict


__all__ = ["failures_document", "failures_summary", "write_failures"]
