"""``robustness.json``, the ``damper robust`` table and the robustness plots.

Nothing here computes a measure: everything comes from a
:class:`damper.analysis.robustness.RobustnessResult`. The JSON is deterministic (same
case, gains and seed: byte-identical text). matplotlib is imported inside the plotting
functions (Agg canvas, no pyplot state).

Plots (PNG and SVG, written atomically):

* ``scatter-<condition>``: damping ratio against the smallest gain margin for every
  sample, pass and fail told apart by colour *and* marker, the requirement box drawn,
  the nominal point and the worst cases marked; unbounded gain margins sit on the top
  edge with their own marker.
* ``sensitivity-<condition>``: Spearman rank correlation of each uncertain parameter with
  the worst slack; bars hatched by sign (greyscale-safe).
* ``pass-fraction``: per-condition fraction meeting every requirement (and the damping
  band) with its Clopper-Pearson interval.
"""

from __future__ import annotations

from .figures import new_figure, save_figure  # noqa: E402

import math
import os

import numpy as np

from ..analysis.sample_stats import SLACK_EDGES
from ..analysis.uncertainty import SHARD_SAMPLES
from .design_doc import requirements_list
from .jsonout import CAUTION, num, provenance
from .text import fmt, table

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
        "gain_s": num(c.gain),
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
        "worst": [
            {
                "criterion": w.criterion,
                "measure": crit[j].measure or None,
                "unit": crit[j].kind.unit,
                "value": num(w.value),
                "value_note": None if math.isfinite(w.value) else "undefined: unbounded margin (met) or no such mode (failed)",
                "slack": num(w.slack),
                "met": bool(w.slack >= 0),
                "source": w.source,
                "index": w.index,
                "worst_evaluated_slack": num(w.start_slack),
                "refinement_evaluations": w.evaluations,
                "parameters": _params(result, i, w.parameters),
                "normalised": [num(x) for x in w.u],
                "there": {
                    "damping_ratio": num(w.damping),
                    "gain_margin_db": num(w.gain_margin),
                    "phase_margin_deg": num(w.phase_margin),
                    "all_met": bool(np.all(w.slacks >= 0)) if w.slacks is not None else None,
                },
            }
            for j, w in enumerate(c.worst)
        ],
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
def _pct(x, rounding="nearest"):
    """Per cent with one decimal; 'down'/'up' never show 100.0 or 0.0 for a fraction short of it."""
    if x is None:
        return "-"
    v = 100.0 * x
    if rounding == "down":
        v = math.floor(v * 10.0 + 1e-9) / 10.0
    elif rounding == "up":
        v = math.ceil(v * 10.0 - 1e-9) / 10.0
    return f"{v:.1f}"


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


# ---------------------------------------------------------------------------------
# Plots
# ---------------------------------------------------------------------------------
#: Our visual identity for robustness plots (Okabe-Ito colours, safe for the common
#: colour-vision deficiencies; every series also has its own marker or hatch).
STYLE = {
    "ink": "#222222",
    "pass": "#0072B2",  # blue
    "fail": "#D55E00",  # vermillion
    "box": "#009E73",  # bluish green: requirement box
    "box_fill": "#d6f0e8",
    "nominal": "#000000",
    "worst": "#CC79A7",  # reddish purple
    "positive": "#56B4E9",  # sky blue
    "negative": "#E69F00",  # orange
    "grid": "#d0d0d0",
}
_RC = {
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 9.0,
    "axes.titlesize": 10.0,
    "axes.labelsize": 9.0,
    "axes.edgecolor": STYLE["ink"],
    "axes.labelcolor": STYLE["ink"],
    "axes.grid": True,
    "axes.axisbelow": True,
    "grid.color": STYLE["grid"],
    "grid.linewidth": 0.6,
    "xtick.color": STYLE["ink"],
    "ytick.color": STYLE["ink"],
    "legend.fontsize": 7.5,
    "legend.framealpha": 0.92,
    "svg.fonttype": "none",
    "svg.hashsalt": "damper-robust",
    "hatch.linewidth": 0.7,
}
DPI = 120


def _figure(width, height):
    return new_figure(width, height)


def _save(fig, stem):
    return save_figure(fig, stem, DPI)


def _footer(fig, case, result):
    spec = result.spec
    fig.text(
        0.01,
        0.005,
        f"{case.title} | {spec.samples} samples, seed {spec.seed} | damper robustness study",
        fontsize=6.5,
        color="#666666",
        ha="left",
        va="bottom",
    )


def _title(fig, text):
    """Title at the figure's top-left; a long condition name makes the font smaller (down to 7 pt)
    and then breaks the line after the name, so the title is never clipped."""
    h = fig.get_figheight()
    t = fig.text(0.012, 1.0 - 0.1 / h, text, fontsize=10.0, ha="left", va="top", color=STYLE["ink"])
    renderer = fig.canvas.get_renderer()
    room = 0.93 * fig.bbox.width  # margin for the left offset and for hinting at the saved dpi
    width = t.get_window_extent(renderer).width
    if width > room:
        t.set_fontsize(max(7.0, 0.97 * 10.0 * room / width))
        if t.get_window_extent(renderer).width > room and ": " in text:  # two short lines in the top margin
            t.set_text(text.replace(": ", ":\n", 1))
            t.set_fontsize(7.0)


def _band(result, name):
    for c in result.criteria:
        if c.name == name:
            return c.lower, c.upper
    return -np.inf, np.inf


def scatter_plot(case, result, i, stem):
    """Damping ratio against the smallest gain margin at condition `i`; returns the paths."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        fig = _draw_scatter(case, result, i)
        return _save(fig, stem)


def _draw_scatter(case, result, i):
    from matplotlib.patches import Rectangle

    c = result.conditions[i]
    z = result.damping[i]
    gm = result.gain_margin[i]
    ok = np.all(result.slacks[:, i, :] >= 0, 0)
    fig = _figure(6.8, 5.0)
    ax = fig.add_axes([0.10, 0.29, 0.86, 0.64])
    finite_gm = gm[np.isfinite(gm)]
    finite_z = z[np.isfinite(z)]
    zlo, zhi = _band(result, "damping_ratio")
    glo, _ = _band(result, "gain_margin")
    marks = [w for w in (_worst(c, "damping_ratio"), _worst(c, "gain_margin")) if w is not None and w.slack != np.inf]
    xs = list(finite_z) + [v for v in (zlo, zhi) if np.isfinite(v)] + [w.damping for w in marks if np.isfinite(w.damping)]
    xmin, xmax = (min(xs), max(xs)) if xs else (0.0, 1.5)
    pad = 0.06 * max(xmax - xmin, 0.1)
    xmin, xmax = xmin - pad, xmax + pad
    ys = list(finite_gm) + ([glo] if np.isfinite(glo) else []) + [w.gain_margin for w in marks if np.isfinite(w.gain_margin)]
    if not finite_gm.size:  # no phase crossing anywhere: show the required margin and room above it
        ys += [0.0, 2.0 * glo if np.isfinite(glo) and glo > 0 else 12.0]
    ymin, ymax = min(ys), max(ys)
    ypad = 0.08 * max(ymax - ymin, 1.0)
    ymin = min(ymin - ypad, 0.0) if ymin >= 0 else ymin - ypad
    ymax = ymax + 2.5 * ypad
    top = ymax - 0.8 * ypad  # where unbounded gain margins are drawn
    # requirement box
    bx0 = zlo if np.isfinite(zlo) else xmin
    bx1 = zhi if np.isfinite(zhi) else xmax
    by0 = glo if np.isfinite(glo) else ymin
    ax.add_patch(
        Rectangle(
            (bx0, by0), bx1 - bx0, ymax - by0, facecolor=STYLE["box_fill"], edgecolor=STYLE["box"],
            linewidth=1.4, linestyle="--", zorder=0, label="required: damping band and gain margin",
        )
    )
    yplot = np.where(np.isfinite(gm), gm, top)
    unb = ~np.isfinite(gm)
    common = dict(s=9, linewidths=0.6, rasterized=True, zorder=2)
    for mask, colour, marker, label in (
        (ok & ~unb, STYLE["pass"], "o", "sample meets every requirement"),
        (~ok & ~unb, STYLE["fail"], "x", "sample misses a requirement"),
        (ok & unb, STYLE["pass"], "^", "meets all; gain margin unbounded (top edge)"),
        (~ok & unb, STYLE["fail"], "v", "misses one; gain margin unbounded (top edge)"),
    ):
        if np.any(mask):
            face = colour if marker in ("o", "^") else None
            kw = dict(common, marker=marker, label=f"{label} ({int(mask.sum())})")
            if marker in ("x", "v"):
                kw.update(s=22, linewidths=1.1, zorder=3)  # failures stand out
            if face is None:
                ax.scatter(z[mask], yplot[mask], c=colour, **kw)
            else:
                ax.scatter(z[mask], yplot[mask], facecolors="none", edgecolors=colour, **kw)
    if np.any(unb):
        ax.axhline(top, color="#888888", linewidth=0.6, linestyle=":", zorder=1)
        ax.text(xmin + 0.01 * (xmax - xmin), top + 0.25 * ypad, "gain margin unbounded (no phase crossing)",
                fontsize=6.5, va="bottom", ha="left", color="#555555")
    # nominal and worst cases
    names = [cr.name for cr in result.criteria]
    if "damping_ratio" in names:
        j = names.index("damping_ratio")
        nz = c.nominal_values[j]
    else:
        nz = np.nan
    ngm = c.nominal_values[names.index("gain_margin")] if "gain_margin" in names else np.nan
    if np.isfinite(nz):
        ax.scatter([nz], [ngm if np.isfinite(ngm) else top], marker="D", s=42, facecolors="white",
                   edgecolors=STYLE["nominal"], linewidths=1.4, zorder=4, label="nominal")
    for w, marker, label in ((_worst(c, "damping_ratio"), "*", "worst damping"),
                             (_worst(c, "gain_margin"), "P", "worst gain margin")):
        if w is None or w.slack == np.inf:
            continue
        label = f"{label} ({w.source}{', missed' if w.slack < 0 else ''})"
        wz, wg = _point_at(result, i, w)
        if wz is not None and np.isfinite(wz):
            ax.scatter([wz], [wg if np.isfinite(wg) else top], marker=marker, s=90, c=STYLE["worst"],
                       edgecolors=STYLE["ink"], linewidths=0.7, zorder=5, label=label)
    ax.set_xlim(xmin, xmax)
    ax.set_ylim(ymin, ymax)
    ax.set_xlabel(f"short-period damping ratio, {result.damping_measure} (-)")
    ax.set_ylabel("smallest gain margin, up or down (dB)")
    _title(fig, f"{c.name}: damping and gain margin under uncertainty (K = {c.gain:.4g} s)")
    ax.legend(loc="upper center", bbox_to_anchor=(0.5, -0.12), ncol=2, frameon=True)
    shown_note = "" if c.shown >= c.samples else f"points: the first {c.shown} of {c.samples} samples\n"
    ax.text(
        0.985, 0.03,
        f"{shown_note}meets every requirement: {c.passed_all}/{c.samples} samples ({_pct(c.fraction_all, 'down')} %)\n"
        f"{100 * result.spec.confidence:.0f} % Clopper-Pearson interval "
        f"{_pct(c.lower_all, 'down')}-{_pct(c.upper_all, 'up')} %",
        transform=ax.transAxes, fontsize=7.5, va="bottom", ha="right", color=STYLE["ink"],
        bbox=dict(boxstyle="round,pad=0.3", facecolor="white", edgecolor=STYLE["grid"]), zorder=6,
    )
    _footer(fig, case, result)
    return fig


def _worst(c, name):
    for w in c.worst:
        if w.criterion == name:
            return w
    return None


def _point_at(result, i, w):
    """Damping ratio and smallest gain margin at a worst-case point (stored by the analysis)."""
    return w.damping, w.gain_margin


def sensitivity_plot(case, result, i, stem):
    """Spearman rho of each parameter with the worst slack at condition `i`; returns the paths."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        fig = _draw_sensitivity(case, result, i)
        return _save(fig, stem)


def _draw_sensitivity(case, result, i):
    c = result.conditions[i]
    axes = result.axes
    order = [k for k in c.ranking][::-1]  # largest at the top
    rho = np.array([c.sensitivity[k, -1] for k in order]) if order else np.zeros(0)
    labels = [f"{axes.names[k]} ({'dx/c, aft +' if axes.names[k] == 'cg_shift' else axes.units[k]})" for k in order]
    height = 1.75 + 0.32 * max(len(order), 1)
    fig = _figure(6.8, height)
    ax = fig.add_axes([0.33, 1.05 / height, 0.62, 1.0 - 1.45 / height])
    y = np.arange(len(order))
    shown = np.where(np.isfinite(rho), rho, 0.0)
    pos = shown >= 0
    ax.barh(y[pos], shown[pos], color=STYLE["positive"], edgecolor=STYLE["ink"], hatch="///", linewidth=0.6,
            label="larger value gives more slack")
    ax.barh(y[~pos], shown[~pos], color=STYLE["negative"], edgecolor=STYLE["ink"], hatch="...", linewidth=0.6,
            label="larger value gives less slack")
    for yy, r in zip(y, rho):
        txt = "n/a" if not np.isfinite(r) else f"{r:+.2f}"
        x = 0.0 if not np.isfinite(r) else r
        ax.text(x + (0.03 if x >= 0 else -0.03), yy, txt, va="center", ha="left" if x >= 0 else "right", fontsize=7.5)
    noise = 2.0 / math.sqrt(max(c.shown, 1))  # the correlations use the subsample
    ax.axvspan(-noise, noise, color="#e6e6e6", zorder=0, label=f"|rho| < 2/sqrt(n) = {noise:.2f}: noise")
    ax.set_yticks(y)
    ax.set_yticklabels(labels)
    ax.set_xlim(-1.15, 1.15)
    ax.axvline(0.0, color=STYLE["ink"], linewidth=0.8)
    ax.set_xlabel("Spearman rank correlation with the worst slack of all requirements (-)")
    used = f"{c.samples} samples" if c.shown >= c.samples else f"the first {c.shown} of {c.samples} samples"
    _title(fig, f"{c.name}: what drives the worst requirement ({used}, K = {c.gain:.4g} s)")
    ax.legend(loc="upper center", bbox_to_anchor=(0.35, -0.42 * 1.75 / height - 0.02), ncol=3, fontsize=7)
    _footer(fig, case, result)
    return fig


def pass_fraction_plot(case, result, stem):
    """Per-condition pass fraction with its confidence interval; returns the paths."""
    import matplotlib

    with matplotlib.rc_context(_RC):
        fig = _draw_pass(case, result)
        return _save(fig, stem)


def _draw_pass(case, result):
    conds = result.conditions
    n = len(conds)
    height = 1.6 + 0.38 * n
    fig = _figure(6.8, height)
    ax = fig.add_axes([0.27, 1.05 / height, 0.68, 1.0 - 1.45 / height])
    y = np.arange(n)[::-1].astype(float)
    names = [cr.name for cr in result.criteria]
    series = [("every requirement", None, STYLE["pass"], "o", 0.0)]
    if "damping_ratio" in names:
        series.append(("damping band only", names.index("damping_ratio"), STYLE["fail"], "s", -0.22))
    for label, j, colour, marker, off in series:
        if j is None:
            f = np.array([c.fraction_all for c in conds])
            lo = np.array([c.lower_all for c in conds])
            hi = np.array([c.upper_all for c in conds])
        else:
            f = np.array([c.fraction[j] for c in conds])
            lo = np.array([c.lower[j] for c in conds])
            hi = np.array([c.upper[j] for c in conds])
        ax.errorbar(100 * f, y + off, xerr=[100 * (f - lo), 100 * (hi - f)], fmt=marker, color=colour,
                    markerfacecolor=colour if marker == "o" else "white", markersize=5, capsize=3,
                    linewidth=1.2, label=label)
    ax.set_yticks(y)
    ax.set_yticklabels([f"{c.name}{'' if c.nominal_met else ' (nominal fails)'}" for c in conds])
    _fit_left_labels(fig, ax)
    lows = [c.lower_all for c in conds]
    if "damping_ratio" in names:
        lows += [c.lower[names.index("damping_ratio")] for c in conds]
    low = 100.0 * min(lows + [1.0])
    left = max([v for v in (0.0, 50.0, 80.0, 90.0, 95.0, 98.0, 99.0, 99.5) if v <= low - 0.05] or [0.0])
    span = 100.0 - left
    ax.set_xlim(left - 0.03 * span, 100.0 + 0.03 * span)
    for yy, c in zip(y, conds):  # counts beside each row
        ax.text(left + 0.01 * span, yy + 0.12, f"{c.passed_all}/{c.samples} meet all", fontsize=7, va="bottom", ha="left",
                color=STYLE["ink"])
    ax.set_xlabel(f"samples meeting the requirements (%), bars: {100 * result.spec.confidence:.0f} % Clopper-Pearson interval")
    _title(fig, f"Pass fraction per condition ({result.spec.samples} samples, seed {result.spec.seed})")
    ax.legend(loc="upper center", bbox_to_anchor=(0.4, -0.62 / (height - 1.45)), ncol=2, fontsize=7.5)
    _footer(fig, case, result)
    return fig


def _fit_left_labels(fig, ax, plot_width_in=4.62):
    """Widen the figure so the y tick labels (condition names) fit left of the axes."""
    renderer = fig.canvas.get_renderer()
    widest = max((t.get_window_extent(renderer).width for t in ax.get_yticklabels()), default=0.0) / fig.dpi
    left_in = max(0.27 * 6.8, widest + 0.2)  # inches: labels, tick marks and a little room
    width = max(6.8, left_in + plot_width_in + 0.34)
    fig.set_size_inches(width, fig.get_figheight())
    pos = ax.get_position()
    ax.set_position([left_in / width, pos.y0, plot_width_in / width, pos.height])


def robustness_plot_jobs(case, result, out_dir) -> list:
    """The figures of :func:`robustness_plots` as jobs ``(fn, args)``, in file order."""
    from .plots import safe_name

    plots = os.path.join(out_dir, "plots")
    jobs = [(pass_fraction_plot, (case, result, os.path.join(plots, "pass-fraction")))]
    for i, c in enumerate(result.conditions):
        slug = f"{i + 1:02d}-{safe_name(c.name)}"
        jobs.append((scatter_plot, (case, result, i, os.path.join(plots, f"scatter-{slug}"))))
        if result.axes.names:
            jobs.append((sensitivity_plot, (case, result, i, os.path.join(plots, f"sensitivity-{slug}"))))
    return jobs


def robustness_plots(case, result, out_dir) -> list:
    """Every robustness plot into ``out_dir/plots``; returns the written paths."""
    paths = []
    for fn, args in robustness_plot_jobs(case, result, out_dir):
        paths += fn(*args)
    return paths
