"""``robustness.json`` and the ``damper robust`` table (the plots: :mod:`damper.output.figures.robustness`).

Nothing here computes a measure: everything comes from a
:class:`damper.analysis.robustness.RobustnessResult`. The JSON is deterministic (same
case, gains and seed: byte-identical text).
"""

from __future__ import annotations

import math

from ...analysis.sample_stats import SLACK_EDGES
from ...analysis.uncertainty import SHARD_SAMPLES
from .design import requirements_list
from .jsonout import CAUTION, num, provenance
from .serialize import point
from .text import fmt, table
from .text import pct as _pct

METHOD_TEXT = {
    "sampling": "seeded Monte Carlo (numpy default_rng); one sample applied at every condition (fully correlated errors)",
    "normal": "truncated normal by the inverse CDF: u = z / truncate, z standard normal in [-truncate, truncate]",
    "corners": "all 2^p corners of the uncertain parameters when p <= 12, else a seeded subset of distinct corners",
    "refinement": "projected compass search in the normalised box from the worst evaluated points, damping and margin "
    "criteria; only strict decreases of the slack are accepted (never better than the worst sample)",
    "interval": "Clopper-Pearson (exact binomial) interval from beta quantiles",
    "sensitivity": "Spearman rank correlation of each parameter with each criterion's slack (positive: a larger value "
    "of the parameter gives more slack)",
    "cg_model": "Delta Cm_alpha = CL_alpha dx/c, i.e. Delta M_alpha = CL_alpha qbar S c (dx/c) / Iy (aft positive "
    "destabilises); the changes of M_alpha_dot, M_q, M_delta and Z_q with the CG are neglected",
}


# ---------------------------------------------------------------------------------
# JSON
# ---------------------------------------------------------------------------------
def _params(result, i, values):
    return {name: num(v) for name, v in zip(result.axes.names, values)}


def _interval(lo, hi):
    return [num(lo), num(hi)]


def parameters_list(case, result) -> list:
    """The uncertain parameters with their per-condition nominal and bounds."""
    axes = result.axes
    spec = result.spec
    out = []
    by_name = {p.name: p for p in spec.parameters}
    for k, name in enumerate(axes.names):
        p = by_name.get(name)
        entry = {"name": name, "unit": axes.units[k], "distribution": axes.distributions[k]}
        if p is not None:
            entry.update(
                {
                    "relative": None if p.relative is None else num(p.relative),
                    "absolute": None if p.absolute is None else num(p.absolute),
                    "sigma_fraction_of_spread": num(p.half_width_factor / p.truncate) if p.distribution == "normal" else None,
                    "truncate_sigmas": num(p.truncate) if p.distribution == "normal" else None,
                }
            )
        else:  # the CG shift
            entry.update({"range": [num(spec.cg_shift.low), num(spec.cg_shift.high)]})
        entry["conditions"] = [
            {
                "name": c.name,
                "nominal": num(axes.nominal[k, i]),
                "low": num(axes.centre[k, i] - axes.half[k, i]),
                "high": num(axes.centre[k, i] + axes.half[k, i]),
            }
            for i, c in enumerate(case.conditions)
        ]
        out.append(entry)
    return out


#: The :class:`~damper.analysis.robustness_result.WorstCase` values of a worst entry's ``there``
#: object, in the document's order (keys and units from the fields' metadata).
WORST_THERE = ("damping", "gain_margin", "phase_margin")


def _worst_entries(result, i, c) -> list:
    """The ``worst`` list of condition `i`: one entry per criterion."""
    crit = result.criteria
    return [
        {
            "criterion": w.criterion,
            "measure": crit[j].measure or None,
            "unit": crit[j].kind.unit,
            "value": num(w.value),
            "value_note": None if math.isfinite(w.value) else "undefined: unbounded margin (met) or no such mode (failed)",
            **point(w, None, ("slack",)),
            "met": w.met,
            "source": w.source,
            "index": w.index,
            **point(w, None, ("start_slack",)),
            "refinement_evaluations": w.evaluations,
            "parameters": _params(result, i, w.parameters),
            "normalised": [num(x) for x in w.u],
            "there": {
                **point(w, None, WORST_THERE),
                "all_met": w.all_met,
            },
        }
        for j, w in enumerate(c.worst)
    ]


def condition_document(case, result, i) -> dict:
    """The ``robustness.json`` entry of condition `i`."""
    c = result.conditions[i]
    crit = result.criteria
    axes = result.axes
    sens = c.sensitivity
    ranking = []
    for k in c.ranking:
        ranking.append(
            {
                "parameter": axes.names[k],
                "rho_worst_slack": num(sens[k, -1]),
                "rho_by_criterion": {cr.name: num(sens[k, j]) for j, cr in enumerate(crit)},
            }
        )
    top = c.top_driver()
    return {
        "name": c.name,
        **point(c, None, ("gain",)),
        "nominal": {
            "all_met": c.nominal_met,
            "criteria": [
                {"name": cr.name, "value": num(c.nominal_values[j]), "slack": num(c.nominal_slacks[j])}
                for j, cr in enumerate(crit)
            ],
        },
        "samples": c.samples,
        "pass": {
            "all": {
                "passed": c.passed_all,
                "fraction": num(c.fraction_all),
                "interval": _interval(c.lower_all, c.upper_all),
            },
            "criteria": [
                {
                    "name": cr.name,
                    "passed": int(c.passed[j]),
                    "fraction": num(c.fraction[j]),
                    "interval": _interval(c.lower[j], c.upper[j]),
                }
                for j, cr in enumerate(crit)
            ],
        },
        "worst": _worst_entries(result, i, c),
        "sensitivity": {
            "top_driver": None if top is None else axes.names[top],
            "ranking": ranking,
        },
        "worst_slack_histogram": {
            "undefined": int(c.worst_slack_histogram[0]),
            "below_lowest_edge": int(c.worst_slack_histogram[1]),
            "counts": [int(k) for k in c.worst_slack_histogram[2:-1]],
            "above_highest_edge": int(c.worst_slack_histogram[-1]),
        },
        "corners": {"evaluated": c.corners, "passed_all": c.corners_passed_all},
        "diagnostics": {
            "equivalent_fits_not_converged": c.unconverged_fits,
            "modal_pick_ambiguous": c.ambiguous_modes,
        },
        "cg_lift_curve_slope_source": c.cg_source if result.spec.cg_shift is not None else None,
    }


def robustness_document(case, result, command=None, files=(), where=None) -> dict:
    """The whole ``robustness.json`` structure.

    `where` says which conditions were studied (default: the case's conditions).
    """
    spec = result.spec
    return {
        "title": case.title,
        "caution": CAUTION,
        "warnings": list(case.warnings),
        "damping_measure": result.damping_measure,
        "method": {
            **METHOD_TEXT,
            "conditions_studied": where or "the case's conditions, each at its given gain",
            "samples": spec.samples,
            "seed": spec.seed,
            "confidence": num(spec.confidence),
            "corners_evaluated": int(len(result.corners_u)),
            "corners_complete": bool(result.corners_complete),
            "refinement": {
                "starts": spec.refine_starts,
                "iterations": spec.refine_iterations,
                "min_step": num(spec.refine_min_step),
            },
            "loops_evaluated": result.evaluations,
            "shards": f"sample g is row g of default_rng(seed).random((samples, p)), regenerated from the seed and g "
            f"alone; evaluated in shards of {SHARD_SAMPLES} samples and reduced as they stream",
            "subsample": {
                "size": int(result.shown),
                "rule": "the first samples by sample index (every sample of a study this size or smaller); the "
                "rank correlations and the scatter plots use them, every count uses every sample",
            },
            "worst_slack_histogram_edges": [num(x) for x in SLACK_EDGES],
            "frequency_domain": "exact delays; eigenvalues with a Pade approximant (loop.pade_order)",
        },
        "requirements": requirements_list(case),
        "parameters": parameters_list(case, result),
        "joint": {
            "description": "samples meeting every requirement at every condition",
            "passed": result.joint_passed,
            "fraction": num(result.joint_fraction),
            "interval": _interval(result.joint_lower, result.joint_upper),
        },
        "conditions": [condition_document(case, result, i) for i in range(len(result.conditions))],
        "files": list(files),
        "provenance": provenance(case, command, seed=spec.seed),
    }


# ---------------------------------------------------------------------------------
# Terminal table
# ---------------------------------------------------------------------------------
def _worst_of(c, name):
    for w in c["worst"]:
        if w["criterion"] == name:
            return w
    return None


def robustness_table(doc) -> str:
    """Per condition: pass fraction with interval, worst damping and margins, the most missed requirement, top driver."""
    conf = doc["method"]["confidence"]
    headers = [
        "condition",
        "K\ns",
        "meets all\nsamples",
        "meets all\n%",
        f"{100 * conf:.0f} % interval\n%",
        "worst zeta\n-",
        "worst GM\ndB",
        "worst PM\ndeg",
        "most missed\n(meets, %)",
        "top driver\n(Spearman rho)",
    ]
    rows = []
    for c in doc["conditions"]:
        pa = c["pass"]["all"]
        lo, hi = pa["interval"]
        wz = _worst_of(c, "damping_ratio")
        wg = _worst_of(c, "gain_margin")
        wp = _worst_of(c, "phase_margin")
        top = c["sensitivity"]["top_driver"]
        rho = c["sensitivity"]["ranking"][0]["rho_worst_slack"] if top else None
        rows.append(
            [
                c["name"],
                fmt(c["gain_s"], ".4g"),
                f"{pa['passed']}/{c['samples']}",
                _pct(pa["fraction"], "down"),
                f"{_pct(lo, 'down')}-{_pct(hi, 'up')}",
                _worst_cell(wz, ".3f"),
                _worst_cell(wg, ".1f", "none"),
                _worst_cell(wp, ".1f", "none"),
                _most_missed(c),
                f"{top} ({rho:+.2f})" if top else "-",
            ]
        )
    j = doc["joint"]
    lines = [
        table(headers, rows),
        f"every condition at once: {j['passed']}/{doc['method']['samples']} samples = {_pct(j['fraction'], 'down')} % "
        f"({_pct(j['interval'][0], 'down')}-{_pct(j['interval'][1], 'up')} %)",
        f"zeta is the {doc['damping_measure']} damping ratio; worst = least slack to its band over samples, corners "
        "and the worst-case search ('!' marks a missed requirement); GM/PM 'none': no crossing (unbounded).",
    ]
    v = doc.get("verdict")
    s = next((i for i in (v or {}).get("items", []) if i["condition"] is None and i["requirement"] == "all"), None)
    if s is not None:  # the part's verdict, as the run's verdict lines repeat it
        lines.append(f"robustness verdict: {'met' if s['met'] else 'NOT MET'} - {s['text']}")
    return "\n".join(lines)


def _most_missed(c):
    """The requirement met by the fewest samples and its pass percentage ('-' if every sample meets all)."""
    crit = [k for k in c["pass"]["criteria"] if k["passed"] < c["samples"]]
    if not crit:
        return "-"
    k = min(crit, key=lambda k: k["passed"])
    return f"{k['name']} ({_pct(k['fraction'], 'down')})"


def _worst_cell(w, spec, none="-"):
    if w is None:
        return "n/a"
    mark = "" if w["met"] else " !"
    if w["value"] is None:
        return (none if w["met"] else "undef.") + mark
    return fmt(w["value"], spec) + mark

