"""Schedule exports for flight software (CSV, JSON, YAML, C header) and schedule.json.

Every table carries its units in headers/keys and its provenance (input SHA-256, tool
version). Numbers are written with ``repr`` precision so a table read back equals the
schedule; the files are byte-identical on rerun (no dates or machine names inside).
"""

from __future__ import annotations

import json
import os
import re

import numpy as np

from ... import __version__
from ...analysis.envelope import VARIABLE_UNITS
from ..files import write_atomic
from .jsonout import CAUTION, dumps, num, provenance
from .serialize import point, series


def _unit_key(var):
    unit = VARIABLE_UNITS[var]
    return f"{var}_{unit.replace('/', '_per_')}" if unit != "-" else var


def _g(x) -> str:
    return repr(float(x))


def table_dict(schedule, case) -> dict:
    """The gain table as plain data with units in the keys."""
    out = {
        "tool": "damper",
        "tool_version": __version__,
        "input_sha256": case.sha256,
        "form": schedule.form,
        "variables": [{"name": v, "unit": VARIABLE_UNITS[v], "breakpoints": [float(b) for b in bp]}
                      for v, bp in zip(schedule.variables, schedule.breakpoints)],
        "gain_unit": "s (rad of surface per rad/s of pitch rate)",
        "interpolation": "linear, clamped at the ends" if len(schedule.variables) == 1 else "bilinear, clamped at the edges",
        "gains_s": np.asarray(schedule.gains, dtype=float).tolist(),
        "sign": "damper command = -sign(M_delta) * K * filtered pitch rate (positive K adds damping)",
    }
    if schedule.form == "inverse_dynamic_pressure":
        out["law"] = "K = k_ref_s * q_ref_pa / dynamic_pressure"
        out.update(point(schedule, None, ("k_ref", "q_ref")))  # positive and finite (validated)
    return out


def schedule_from_table(doc, where="gain-schedule.json"):
    """The :class:`~damper.analysis.schedule.Schedule` of a ``gain-schedule.json`` document.

    The inverse of :func:`table_dict`; every field is checked, and a problem raises
    :class:`~damper.errors.DamperError` naming `where` and the field.

    Parameters
    ----------
    doc : dict
        The parsed JSON.
    where : str
        The file, for messages.
    """
    from ...analysis.schedule import Schedule
    from ...errors import DamperError

    def bad(field, why):
        return DamperError(f"{where}: {field}: {why} (expected a gain-schedule.json written by `damper design`)")

    if not isinstance(doc, dict):
        raise bad("top level", "not a JSON object")
    form = doc.get("form")
    if form not in ("table", "inverse_dynamic_pressure"):
        raise bad("form", f"{form!r} is not 'table' or 'inverse_dynamic_pressure'")
    variables = doc.get("variables")
    if not isinstance(variables, list) or len(variables) not in (1, 2):
        raise bad("variables", "must list one or two schedule variables")
    names, bps = [], []
    for i, v in enumerate(variables):
        if not isinstance(v, dict) or v.get("name") not in VARIABLE_UNITS:
            raise bad(f"variables[{i}].name", f"must be one of {', '.join(VARIABLE_UNITS)}")
        if v.get("unit") != VARIABLE_UNITS[v["name"]]:
            raise bad(f"variables[{i}].unit", f"{v.get('unit')!r}; breakpoints of {v['name']} are in {VARIABLE_UNITS[v['name']]!r}")
        try:
            b = np.asarray(v.get("breakpoints"), dtype=float)
        except (TypeError, ValueError):
            raise bad(f"variables[{i}].breakpoints", "must be a list of numbers") from None
        if b.ndim != 1 or b.size < 1 or not np.all(np.isfinite(b)) or np.any(np.diff(b) <= 0):
            raise bad(f"variables[{i}].breakpoints", "must be finite numbers in ascending order")
        names.append(v["name"])
        bps.append(b)
    try:
        gains = np.asarray(doc.get("gains_s"), dtype=float)
    except (TypeError, ValueError):
        raise bad("gains_s", "must be numbers (a list, or a list of rows for two variables)") from None
    shape = tuple(b.size for b in bps)
    if gains.shape != shape:
        raise bad("gains_s", f"shape {gains.shape} does not match the breakpoints {shape}")
    if not np.all(np.isfinite(gains)):
        raise bad("gains_s", "must be finite")
    k_ref = q_ref = None
    if form == "inverse_dynamic_pressure":
        if names != ["dynamic_pressure"]:
            raise bad("variables", "the inverse-dynamic-pressure law is over dynamic_pressure alone")
        k_ref, q_ref = doc.get("k_ref_s"), doc.get("q_ref_pa")
        for key, val in (("k_ref_s", k_ref), ("q_ref_pa", q_ref)):
            if isinstance(val, bool) or not isinstance(val, (int, float)) or not np.isfinite(val) or val <= 0:
                raise bad(key, "must be a positive number")
        k_ref, q_ref = float(k_ref), float(q_ref)
    return Schedule(tuple(names), form, tuple(bps), gains, k_ref, q_ref)


def to_csv(schedule, case) -> str:
    lines = [f"# damper {__version__} gain schedule; input sha256 {case.sha256}", f"# form: {schedule.form}"]
    if schedule.form == "inverse_dynamic_pressure":
        lines.append(f"# law: K = {_g(schedule.k_ref)} s * {_g(schedule.q_ref)} Pa / q; breakpoint gains below are the fitted data")
    if len(schedule.variables) == 1:
        v = schedule.variables[0]
        lines.append(f"{_unit_key(v)},gain_s")
        for b, k in zip(schedule.breakpoints[0], np.asarray(schedule.gains).ravel()):
            lines.append(f"{_g(b)},{_g(k)}")
    else:
        v0, v1 = schedule.variables
        lines.append(f"# rows: {_unit_key(v0)}; columns: {_unit_key(v1)}; cells: gain_s")
        lines.append(f"{_unit_key(v0)}\\{_unit_key(v1)}," + ",".join(_g(b) for b in schedule.breakpoints[1]))
        for b, row in zip(schedule.breakpoints[0], np.asarray(schedule.gains)):
            lines.append(_g(b) + "," + ",".join(_g(k) for k in row))
    return "\n".join(lines) + "\n"


def read_csv(text):
    """Read a gain-table CSV written by :func:`to_csv`: (breakpoints per variable, gains)."""
    rows = [r for r in text.splitlines() if r and not r.startswith("#")]
    head = rows[0].split(",")
    if "\\" in head[0]:
        cols = np.array([float(x) for x in head[1:]])
        rws, gains = [], []
        for r in rows[1:]:
            parts = r.split(",")
            rws.append(float(parts[0]))
            gains.append([float(x) for x in parts[1:]])
        return (np.array(rws), cols), np.array(gains)
    data = np.array([[float(x) for x in r.split(",")] for r in rows[1:]])
    return (data[:, 0],), data[:, 1]


def to_yaml(schedule, case) -> str:
    import yaml

    return yaml.safe_dump(table_dict(schedule, case), sort_keys=False, default_flow_style=None, width=100)


def _c_name(s):
    return re.sub(r"[^A-Za-z0-9_]", "_", s).upper()


def to_c_header(schedule, case) -> str:
    """A C header with ``static const`` arrays (double precision, SI units)."""
    guard = "DAMPER_GAIN_SCHEDULE_H"
    lines = [
        "/* Pitch-damper gain schedule generated by damper " + __version__ + ".",
        " * Input SHA-256: " + case.sha256,
        " * Preliminary engineering analysis: validate by simulation, ground and flight test before use.",
        " * Gain unit: s (rad of surface per rad/s of pitch rate); command = -sign(M_delta) * K * q_filtered.",
        " */",
        f"#ifndef {guard}",
        f"#define {guard}",
        "",
    ]
    for v, bp in zip(schedule.variables, schedule.breakpoints):
        name = f"DAMPER_{_c_name(v)}_BREAKPOINTS"
        lines.append(f"/* {v}, {VARIABLE_UNITS[v]}, ascending; interpolate linearly, clamp at the ends */")
        lines.append(f"#define {name}_COUNT {len(bp)}")
        lines.append(f"static const double {name.lower()}[{len(bp)}] = {{{', '.join(_g(b) for b in bp)}}};")
        lines.append("")
    g = np.asarray(schedule.gains, dtype=float)
    if g.ndim == 1:
        lines.append(f"static const double damper_gain_s[{g.size}] = {{{', '.join(_g(k) for k in g)}}};")
    else:
        rows = ",\n    ".join("{" + ", ".join(_g(k) for k in row) + "}" for row in g)
        lines.append(f"/* damper_gain_s[i][j]: i over {schedule.variables[0]}, j over {schedule.variables[1]} */")
        lines.append(f"static const double damper_gain_s[{g.shape[0]}][{g.shape[1]}] = {{\n    {rows}\n}};")
    if schedule.form == "inverse_dynamic_pressure":
        lines.append("")
        lines.append("/* law: K = DAMPER_K_REF_S * DAMPER_Q_REF_PA / dynamic_pressure */")
        lines.append(f"static const double damper_k_ref_s = {_g(schedule.k_ref)};")
        lines.append(f"static const double damper_q_ref_pa = {_g(schedule.q_ref)};")
    lines += ["", f"#endif /* {guard} */", ""]
    return "\n".join(lines)


def schedule_document(case, result, command=None) -> dict:
    """schedule.json: the table, the design at each breakpoint, the verification map."""
    v = result.verification
    pts = v.points
    shape = tuple(len(b) for b in result.schedule.breakpoints)
    bd = result.design
    return {
        "title": case.title,
        "caution": CAUTION,
        "source": result.source,
        "passed": result.passed,
        "message": result.message,
        "warnings": list(result.warnings),
        "rounds": result.rounds,
        "history": [{"breakpoints": a, "failing_points": b} for a, b in result.history],
        "table": table_dict(result.schedule, case),
        "breakpoint_design": {
            "shape": list(shape),
            **series(bd, ("gains",)),
            "feasible": [bool(x) for x in bd.feasible],
            **series(bd, ("worst_slack",)),
            "binding": list(bd.binding),
            "design_points": [int(x) for x in bd.points],
        },
        "configurations": list(result.configurations),
        "verification": {
            "points": len(pts.labels),
            "failing": int(np.sum(~v.passed)),
            "criteria": list(v.criteria_names),
            "rows": [
                {
                    "label": pts.labels[i],
                    "kind": str(pts.kind[i]),
                    "configuration": int(pts.configuration[i]),
                    **point(pts, i, ("altitude", "airspeed")),
                    "variables": [num(x) for x in pts.values[:, i]],
                    **point(v, i, ("gains",)),
                    "passed": bool(v.passed[i]),
                    **point(v, i, ("worst_slack",)),
                    "binding": v.binding[i],
                    **point(v, i, ("damping_ratio", "smallest_margin_db")),
                }
                for i in range(len(pts.labels))
            ],
        },
        "provenance": provenance(case, command),
    }


def write_schedule(out_dir, case, result, command=None, verdict=None) -> list:
    """Write gain-schedule.csv/.json/.yaml, gain_schedule.h and schedule.json; return names.

    `verdict` (a :class:`damper.verdict.Verdict`, the ``schedule`` part) goes into schedule.json.
    """
    from .jsonout import with_verdict

    s = result.schedule
    sdoc = schedule_document(case, result, command)
    files = {
        "gain-schedule.csv": to_csv(s, case),
        "gain-schedule.json": json.dumps(table_dict(s, case), indent=2) + "\n",
        "gain-schedule.yaml": to_yaml(s, case),
        "gain_schedule.h": to_c_header(s, case),
        "schedule.json": dumps(sdoc if verdict is None else with_verdict(sdoc, verdict)),
    }
    for name, text in files.items():
        write_atomic(os.path.join(out_dir, name), text)
    return list(files)


def schedule_summary(result) -> str:
    """Terminal summary: the table and the verification verdict."""
    from .text import fmt, table

    s = result.schedule
    lines = [f"gain schedule ({s.form}, over {' x '.join(s.variables)}), from the {result.source}:"]
    if len(s.variables) == 1:
        v = s.variables[0]
        rows = [[fmt(b, ".5g"), fmt(k, ".4g"), "yes" if f else "NO", b2]
                for b, k, f, b2 in zip(s.breakpoints[0], np.ravel(s.gains), result.design.feasible, result.design.binding)]
        lines.append(table([f"{v}\n{VARIABLE_UNITS[v]}", "K\ns", "meets all at\nbreakpoint", "tightest"], rows))
    else:
        v0, v1 = s.variables
        head = [f"{v0} ({VARIABLE_UNITS[v0]}) \\ {v1} ({VARIABLE_UNITS[v1]})"] + [fmt(b, ".4g") for b in s.breakpoints[1]]
        rows = [[fmt(b, ".5g")] + [fmt(k, ".3f") for k in row] for b, row in zip(s.breakpoints[0], np.asarray(s.gains))]
        lines.append("K (s):")
        lines.append(table(head, rows))
    if s.form == "inverse_dynamic_pressure":
        lines.append(f"law: K = {s.k_ref:.4g} s * {s.q_ref:.5g} Pa / q")
    lines.append(("PASS: " if result.passed else "FAIL: ") + result.message)
    lines.extend(f"warning: {w}" for w in result.warnings)
    return "\n".join(lines)
