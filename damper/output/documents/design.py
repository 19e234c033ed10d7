"""The ``design.json`` structure and the design summary table."""

from __future__ import annotations

import json

from .jsonout import CAUTION, condition_result, num, provenance
from .longitudinal import longitudinal_table, speed_derivatives_summary
from .serialize import point, series
from .text import fmt, table


def requirements_list(case) -> list:
    """The case's requirements with their sources."""
    req = case.requirements
    return [
        {
            "name": c.name,
            "measure": c.measure or None,
            "lower": num(c.lower),
            "upper": num(c.upper),
            "unit": c.kind.unit,
            "source": c.source,
        }
        for c in req.criteria
    ]


#: The values of :func:`case_summary`, in the document's order (keys and units from the fields'
#: metadata, :mod:`damper.quantities`): a condition (:class:`~damper.case.model.Condition`), its
#: short-period derivatives (:class:`~damper.model.airframe.Derivatives`) and the aircraft
#: (:class:`~damper.case.model.Aircraft`).
SUMMARY_CONDITION = ("airspeed", "equivalent_airspeed", "altitude_input", "altitude", "density", "mach",
                     "dynamic_pressure", "mass", "pitch_inertia")
SUMMARY_DERIVATIVES = ("Z_alpha", "Z_q", "Z_delta", "M_alpha", "M_alpha_dot", "M_q", "M_delta")
SUMMARY_AIRCRAFT = ("mass", "pitch_inertia", "wing_area", "mean_chord")


def case_summary(case) -> dict:
    """What the case describes (aircraft, flight conditions, loop hardware), SI, for the report."""
    a, loop = case.aircraft, case.loop

    def element(spec):
        return spec.describe() if spec is not None else "ideal (unity)"

    conds = []
    for c in case.conditions:
        d = c.derivatives
        conds.append(
            {
                "name": c.name,
                "note": c.note,
                "derivative_source": c.source,
                **point(c, None, SUMMARY_CONDITION),
                "as_written": {w.key: w.text for w in c.written},
                "derivatives": {**point(d, None, SUMMARY_DERIVATIVES), **speed_derivatives_summary(d)},
            }
        )
    return {
        "aircraft": {"name": a.name, **point(a, None, SUMMARY_AIRCRAFT)},
        "altitude_kind": case.altitude_kind,
        "conditions": conds,
        "loop": {
            "actuator": element(loop.actuator),
            **point(loop, None, ("rate_limit", "travel")),
            "rate_sensor": element(loop.sensor),
            "washout": element(loop.washout),
            "filters": [f.describe() for f in loop.filters],
            **point(loop, None, ("delay", "sample_rate", "total_delay")),
            "pade_order": loop.pade_order,
        },
        "frequency_grid_rad_s": {
            "low": num(case.settings.frequency_low),
            "high": num(case.settings.frequency_high),
            "points_per_decade": case.settings.points_per_decade,
        },
    }


def design_document(case, design, command=None, entries=None, figures=None) -> dict:
    """Per condition: chosen gain, feasible intervals, edges and the measures at the chosen gain.

    `entries` (from :func:`condition_entries`, batch by batch) replaces `design` for a case
    searched in batches. `figures` (a dict) says which conditions have figures when not all do.
    """
    doc = {
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "damping_measure": case.requirements.damping_measure,
        "requirements": requirements_list(case),
        "conditions": entries if entries is not None else condition_entries(case, design),
        "provenance": provenance(case, command),
        "case_summary": case_summary(case),
    }
    if figures is not None:
        doc["figures"] = figures
    return doc


def condition_entries(case, design) -> list:
    """The ``design.json`` entry of every condition of `design` (a search of `case`)."""
    conds = []
    for i, d in enumerate(design.conditions if design is not None else ()):
        conds.append(
            {
                "name": d.name,
                **point(d, None, ("chosen_gain",)),
                "feasible": d.feasible,
                "policy": d.policy,
                "reason": d.reason,
                "feasible_gains_s": [[num(a), num(b)] for a, b in d.intervals],
                "edges": [
                    {
                        "lower": {**point(lo, None, ("gain",)), "binding": lo.binding},
                        "upper": {**point(hi, None, ("gain",)), "binding": hi.binding},
                    }
                    for lo, hi in d.edges
                ],
                "failing_at_chosen_gain": [{"name": n, "slack": num(s)} for n, s in d.binding],
                **series(d, ("sweep_range",)),
                "measures": condition_result(case, design.chosen, (i,)),
            }
        )
    return conds


def _short(binding: str) -> str:
    from ...analysis.search import BARE_MEETS

    return {BARE_MEETS: "K=0 meets all", "sweep range": "end of sweep"}.get(binding, binding)


def design_table(doc) -> str:
    """Terminal summary of a design: failing conditions first."""
    headers = [
        "condition",
        "status",
        "K chosen\ns",
        "feasible K\ns",
        "closed by\n(low / high)",
        "zeta\nequiv.",
        "zeta\nmodal",
        "GM\ndB",
        "PM\ndeg",
        "tau_e\ns",
        "level",
    ]
    rows = []
    conds = doc["conditions"]

    def entry(i):  # an entry kept as JSON text (a large case) is read back one at a time
        c = conds[i]
        return json.loads(c) if isinstance(c, str) else c

    order = sorted(range(len(conds)), key=lambda i: entry(i)["feasible"])
    for i in order:
        c = entry(i)
        m = c["measures"]
        eq = m["closed_loop"]["equivalent"] or {}
        sp = m["closed_loop"]["short_period"]
        intervals = ", ".join(f"{fmt(a, '.3g')}-{fmt(b, '.3g')}" for a, b in c["feasible_gains_s"]) or "none"
        closed = "; ".join(f"{_short(e['lower']['binding'])} / {_short(e['upper']['binding'])}" for e in c["edges"]) or "-"
        if not c["feasible"]:
            closed = "misses: " + ", ".join(f"{f['name']} ({fmt(f['slack'], '+.2f')})" for f in c["failing_at_chosen_gain"])
        level = m["level"]["overall"] if m.get("level") else "-"
        rows.append(
            [
                c["name"],
                "ok" if c["feasible"] else "INFEASIBLE",
                fmt(c["chosen_gain_s"], ".4g"),
                intervals,
                closed,
                fmt(eq.get("damping_ratio"), ".3f"),
                fmt(sp["damping_ratio"], ".3f") + ("*" if sp["ambiguous"] else ""),
                fmt(m["margins"]["gain_margin_db"], ".1f", "none"),
                fmt(m["margins"]["phase_margin_deg"], ".1f", "none"),
                fmt(eq.get("time_delay_s"), ".3f"),
                str(level),
            ]
        )
    out = table(headers, rows, aligns=["<", "<", ">", "<", "<", ">", ">", ">", ">", ">", ">"])
    lon = longitudinal_table(entry(i)["measures"] for i in order)
    out = out + ("\n\n" + lon + "\n" if lon else "")
    notes = [
        f"Damping band applies to the {doc['damping_measure']} damping ratio. Slack is normalised: "
        "negative means missed by that fraction of the limit.",
        "GM/PM 'none': no such crossing (unbounded). * modal pick ambiguous (coalescence with a hardware mode).",
    ]
    return out + "\n" + "\n".join(notes)
