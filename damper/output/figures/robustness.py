"""The robustness plots (in the ``--figures`` formats, written atomically).

Nothing here computes a measure or judges a slack: everything comes from a
:class:`damper.analysis.robustness.RobustnessResult` and the
:class:`damper.analysis.robustness_figures.RobustnessFigureInputs` of it (which conditions get
figures, which samples meet what). matplotlib is imported inside the
plotting functions (Agg canvas, no pyplot state).

* ``scatter-<condition>``: damping ratio against the smallest gain margin for every
  sample of the subsample, pass and fail told apart by colour *and* marker, the
  requirement box drawn (a sample that meets both axes' requirements but misses another,
  e.g. CAP, has its own marker and legend entry, so it never passes for a pass inside the box), the nominal point and the worst cases marked; unbounded gain
  margins sit on the top edge with their own marker.
* ``sensitivity-<condition>``: Spearman rank correlation of each uncertain parameter with
  the worst slack; bars hatched by sign (greyscale-safe).
* ``pass-fraction``: per-condition fraction meeting every requirement (and the damping
  band) with its Clopper-Pearson interval, on the whole 0-100 % scale (never zoomed) with
  the counts written beside each row.
"""

from __future__ import annotations

import math
import os

import textwrap

import numpy as np

from ..documents.text import pct as _pct
from ..style import ROBUSTNESS_RC, _figure, _render, safe_name
from ..style import SAMPLE_COLOURS as STYLE
from .kinds import FigureKind

#: The family's figures: ``pass-fraction``, then ``scatter-<nn>-<slug>`` and ``sensitivity-<nn>-<slug>`` per condition.
PASS_FRACTION = FigureKind("pass-fraction", "fraction of samples meeting every requirement, per condition, with its interval")
SCATTER = FigureKind("scatter", "damping ratio against the smallest gain margin, every sample")
SENSITIVITY = FigureKind("sensitivity", "which parameters drive the worst slack")
KINDS = (PASS_FRACTION, SCATTER, SENSITIVITY)

# ---------------------------------------------------------------------------------
# Plots
# ---------------------------------------------------------------------------------
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


def scatter_plot(case, result, i, split, stem):
    """Damping ratio against the smallest gain margin at condition `i` (`split`: its
    :class:`~damper.analysis.robustness_figures.SampleSplit`); returns the paths."""
    return _render(_draw_scatter, stem, case, result, i, split, rc=ROBUSTNESS_RC)


def _draw_scatter(case, result, i, split):
    c = result.conditions[i]
    fig = _figure(6.8, 5.0)
    ax = fig.add_axes([0.10, 0.29, 0.86, 0.64])
    lim = _scatter_limits(result, i)
    _requirement_box(ax, lim)
    _samples(ax, result, i, split, lim)
    _nominal_and_worst(ax, result, i, lim["top"])
    ax.set_xlim(lim["xmin"], lim["xmax"])
    ax.set_ylim(lim["ymin"], lim["ymax"])
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


def _scatter_limits(result, i) -> dict:
    """Axis limits holding the samples, the requirement box and the worst cases; ``top``: where an
    unbounded gain margin is drawn (dB); ``ypad``: the vertical padding (dB)."""
    c = result.conditions[i]
    z = result.damping[i]
    gm = result.gain_margin[i]
    finite_gm = gm[np.isfinite(gm)]
    finite_z = z[np.isfinite(z)]
    zlo, zhi = _band(result, "damping_ratio")
    glo, _ = _band(result, "gain_margin")
    marks = [w for w in (_worst(c, "damping_ratio"), _worst(c, "gain_margin")) if w is not None and w.bounded]
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
    return {"xmin": xmin, "xmax": xmax, "ymin": ymin, "ymax": ymax, "ypad": ypad, "top": ymax - 0.8 * ypad,
            "zlo": zlo, "zhi": zhi, "glo": glo}


def _requirement_box(ax, lim):
    from matplotlib.patches import Rectangle

    bx0 = lim["zlo"] if np.isfinite(lim["zlo"]) else lim["xmin"]
    bx1 = lim["zhi"] if np.isfinite(lim["zhi"]) else lim["xmax"]
    by0 = lim["glo"] if np.isfinite(lim["glo"]) else lim["ymin"]
    ax.add_patch(
        Rectangle(
            (bx0, by0), bx1 - bx0, lim["ymax"] - by0, facecolor=STYLE["box_fill"], edgecolor=STYLE["box"],
            linewidth=1.4, linestyle="--", zorder=0, label="required: damping band and gain margin",
        )
    )


def _samples(ax, result, i, split, lim):
    """Every shown sample, pass and fail told apart by colour and marker; unbounded margins on the top edge."""
    z = result.damping[i]
    gm = result.gain_margin[i]
    ok = split.meets_all
    top, xmin, xmax, ypad = lim["top"], lim["xmin"], lim["xmax"], lim["ypad"]
    yplot = np.where(np.isfinite(gm), gm, top)
    unb = ~np.isfinite(gm)
    from ...requirements.registry import label as criterion_label

    # The registered labels are long ("control anticipation parameter (CAP)"): wrapped under the
    # entry so the legend keeps the figure's width.
    names = textwrap.fill(", ".join(criterion_label(n) for n in split.missed_off_axes), 44)
    off, off_names = split.misses_off_axes, "\n" + names
    common = dict(s=9, linewidths=0.6, rasterized=True, zorder=2)
    for mask, colour, marker, label in (
        (ok & ~unb, STYLE["pass"], "o", "sample meets every requirement"),
        (~ok & ~off & ~unb, STYLE["fail"], "x", "sample misses damping or gain margin"),
        (off & ~unb, STYLE["worst"], "s", f"fails a requirement not shown on these axes:{off_names}"),
        (ok & unb, STYLE["pass"], "^", "meets all; gain margin unbounded (top edge)"),
        (~ok & unb, STYLE["fail"], "v", "misses one; gain margin unbounded (top edge)"),
    ):
        if np.any(mask):
            kw = dict(common, marker=marker, label=f"{label} ({int(mask.sum())})")
            if marker in ("x", "v", "s"):
                kw.update(s=22, linewidths=1.1, zorder=3)  # failures stand out
            if marker == "x":
                ax.scatter(z[mask], yplot[mask], c=colour, **kw)
            else:
                ax.scatter(z[mask], yplot[mask], facecolors="none", edgecolors=colour, **kw)
    if np.any(unb):
        ax.axhline(top, color="#888888", linewidth=0.6, linestyle=":", zorder=1)
        ax.text(xmin + 0.01 * (xmax - xmin), top + 0.25 * ypad, "gain margin unbounded (no phase crossing)",
                fontsize=6.5, va="bottom", ha="left", color="#555555")


def _nominal_and_worst(ax, result, i, top):
    """The nominal point and the worst cases of damping and gain margin."""
    c = result.conditions[i]
    names = [cr.name for cr in result.criteria]
    nz = c.nominal_values[names.index("damping_ratio")] if "damping_ratio" in names else np.nan
    ngm = c.nominal_values[names.index("gain_margin")] if "gain_margin" in names else np.nan
    if np.isfinite(nz):
        ax.scatter([nz], [ngm if np.isfinite(ngm) else top], marker="D", s=42, facecolors="white",
                   edgecolors=STYLE["nominal"], linewidths=1.4, zorder=4, label="nominal")
    for w, marker, label in ((_worst(c, "damping_ratio"), "*", "worst damping"),
                             (_worst(c, "gain_margin"), "P", "worst gain margin")):
        if w is None or not w.bounded:
            continue
        label = f"{label} ({w.source}{'' if w.met else ', missed'})"
        wz, wg = _point_at(result, i, w)
        if wz is not None and np.isfinite(wz):
            ax.scatter([wz], [wg if np.isfinite(wg) else top], marker=marker, s=90, c=STYLE["worst"],
                       edgecolors=STYLE["ink"], linewidths=0.7, zorder=5, label=label)


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
    return _render(_draw_sensitivity, stem, case, result, i, rc=ROBUSTNESS_RC)


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


def pass_fraction_plot(case, result, stem, total=None):
    """Per-condition pass fraction with its confidence interval; returns the paths."""
    return _render(_draw_pass, stem, case, result, total, rc=ROBUSTNESS_RC)


def _draw_pass(case, result, total=None):
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
    # the whole 0-100 % scale, never zoomed: 1999/2000 must not look like a collapse; the counts
    # beside each row tell the rows apart where the points overlap at the right edge
    ax.set_xlim(0.0, 100.0 + 0.03 * 100.0)
    ax.set_xticks([0, 20, 40, 60, 80, 100])
    ax.axvline(100.0, color=STYLE["grid"], linewidth=1.0, zorder=0)
    for yy, c in zip(y, conds):  # counts beside each row
        ax.text(1.0, yy, f"{c.passed_all}/{c.samples} meet all ({_pct(c.fraction_all, 'down')} %; interval "
                f"{_pct(c.lower_all, 'down')}-{_pct(c.upper_all, 'up')} %)", fontsize=7,
                va="center", ha="left", color=STYLE["ink"],
                bbox=dict(boxstyle="round,pad=0.15", facecolor="white", edgecolor="none", alpha=0.85))
    ax.set_xlabel(f"samples meeting the requirements (%), bars: {100 * result.spec.confidence:.0f} % Clopper-Pearson interval")
    which = "" if total is None else f"; the {len(conds)} of {total} conditions with the lowest"
    _title(fig, f"Pass fraction per condition ({result.spec.samples} samples, seed {result.spec.seed}{which})")
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


def robustness_plot_jobs(case, result, inputs, out_dir) -> list:
    """The figures of :func:`robustness_plots` as jobs ``(fn, args)``, in file order.

    `inputs` (:func:`damper.analysis.robustness_figures.robustness_figure_inputs`) names the
    conditions with figures: with more than its limit, the pass-fraction plot and the
    per-condition figures show those with the lowest pass fraction.
    """
    import dataclasses
    import functools

    shown = inputs.shown
    plots = os.path.join(out_dir, "plots")
    overview = result
    if len(shown) < len(result.conditions):  # the pass-fraction plot: only the conditions shown
        overview = dataclasses.replace(result, conditions=tuple(result.conditions[i] for i in shown))
    draw = pass_fraction_plot if overview is result else functools.partial(pass_fraction_plot, total=len(result.conditions))
    jobs = [(draw, (case, overview, os.path.join(plots, PASS_FRACTION.stem)))]
    for i, split in zip(shown, inputs.splits):
        c = result.conditions[i]
        slug = f"{i + 1:02d}-{safe_name(c.name)}"
        jobs.append((scatter_plot, (case, result, i, split, os.path.join(plots, f"{SCATTER.stem}-{slug}"))))
        if result.axes.names:
            jobs.append((sensitivity_plot, (case, result, i, os.path.join(plots, f"{SENSITIVITY.stem}-{slug}"))))
    return jobs


def robustness_plots(case, result, inputs, out_dir) -> list:
    """Every robustness plot into ``out_dir/plots``; returns the written paths."""
    paths = []
    for fn, args in robustness_plot_jobs(case, result, inputs, out_dir):
        paths += fn(*args)
    return paths
