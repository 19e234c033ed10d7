"""The ``design.json`` structure and the design summary table."""

from __future__ import annotations

from .jsonout import CAUTION, condition_result, num, provenance
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


def design_document(case, design, command=None) -> dict:
    """Per condition: chosen gain, feasible intervals, edges and the measures at the chosen gain."""
    conds = []
    for i, d in enumerate(design.conditions):
        conds.append(
            {
                "name": d.name,
                "chosen_gain_s": num(d.chosen_gain),
                "feasible": d.feasible,
                "policy": d.policy,
                "reason": d.reason,
                "feasible_gains_s": [[num(a), num(b)] for a, b in d.intervals],
                "edges": [
                    {
                        "lower": {"gain_s": num(lo.gain), "binding": lo.binding},
                        "upper": {"gain_s": num(hi.gain), "binding": hi.binding},
                    }
                    for lo, hi in d.edges
                ],
                "failing_at_chosen_gain": [{"name": n, "slack": num(s)} for n, s in d.binding],
                "sweep_range_s": [num(d.sweep_range[0]), num(d.sweep_range[1])],
                "measures": condition_result(case, design.chosen, (i,)),
            }
        )
    return {
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "damping_measure": case.requirements.damping_measure,
        "requirements": requirements_list(case),
        "conditions": conds,
        "provenance": provenance(case, command),
    }


def _short(binding: str) -> str:
    from ..analysis.search import BARE_MEETS

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
    order = sorted(range(len(doc["conditions"])), key=lambda i: doc["conditions"][i]["feasible"])
    for i in order:
        c = doc["conditions"][i]
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
    notes = [
        f"Damping band applies to the {doc['damping_measure']} damping ratio. Slack is normalised: "
        "negative means missed by that fraction of the limit.",
        "GM/PM 'none': no such crossing (unbounded). * modal pick ambiguous (coalescence with a hardware mode).",
    ]
    return out + "\n" + "\n".join(notes)
