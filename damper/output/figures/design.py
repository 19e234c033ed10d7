"""Design plots per condition: root locus, loop response and gain sweep, and their jobs.

The root locus is drawn by :mod:`damper.output.figures.root_locus`, the loop response by
:mod:`damper.output.figures.loop_response`, the gain sweep here; the shared look is
:mod:`damper.output.style`. :data:`KINDS` lists the family's figures with their file stems
and captions (the report takes its captions from there). Every plot function writes
``<stem>.png`` and ``<stem>.svg`` atomically and returns the written paths.

Nothing here computes: the plots show what the search found
(:class:`~damper.analysis.search.DesignResult`) and what
:func:`damper.analysis.design_figures.design_figure_inputs` adds (open-loop poles, loop
curves).
matplotlib is imported inside the functions (Agg canvas, no pyplot state), so importing this
module is cheap.
"""

from __future__ import annotations

import os

import numpy as np

from ..style import _criteria, _figure, _fmt_band, _fmt_runs, _log_x, _render, _runs, _short_log_labels, _span_edges
from ..style import LINES, PALETTE, plot_slugs
from .kinds import FigureKind
from .loop_response import loop_response_plot
from .root_locus import root_locus

#: The figures of every design condition, in file order; ``<slug>-<stem>.png`` / ``.svg``.
ROOT_LOCUS = FigureKind("root-locus", "Root locus: closed-loop roots as the gain rises (eigenvalues, Pad\u00e9 delay).")
LOOP_RESPONSE = FigureKind(
    "loop-response", "Loop response L(j\u03c9) at the chosen gain, loop broken at the actuator input (exact delay)."
)
GAIN_SWEEP = FigureKind("gain-sweep", "Gain sweep: damping, margins and feasible gains against the gain K (s).")
KINDS = (ROOT_LOCUS, LOOP_RESPONSE, GAIN_SWEEP)

_MARK_EVERY = 8  # markers on every 8th sweep point (the line carries the data)
SUBTITLE_WIDTH = 145  # characters of a gain-sweep subtitle line (8.5 pt across a 10.5 in figure)

# ---------------------------------------------------------------------------------
# gain sweep
# ---------------------------------------------------------------------------------
def _label(name):
    """A criterion's registered label (:func:`damper.requirements.registry.label`), as the report writes it."""
    from ...requirements.registry import label

    return label(name)


def gain_sweep_plot(case, design, i, stem):
    """Damping ratio and margins of condition `i` against the gain; in the ``--figures`` formats.

    Returns
    -------
    list of str
    """
    return _render(_draw_sweep, stem, case, design, i)


def _slack_text(v):
    """A normalised slack in words where it is not a number (never 'slack -inf')."""
    if v == -np.inf:
        return "not met, no value at that gain (closed loop unstable there, or the measure undefined)"
    if v == np.inf:
        return "met, unbounded"
    return f"{v:+.2f}"


def _sweep_notes(cond, k, stable, pm, gm_up, conv):
    """Plain-language notes under the gain-sweep panels (gaps, instability, unconverged fits)."""
    notes = []
    pm_gap = stable & np.isnan(pm)
    if pm_gap.any():
        notes.append(
            f"Phase margin gap at K {_fmt_runs(_runs(pm_gap, k))}: |L| < 1 at every frequency (no gain crossing), "
            "so the phase margin is unbounded and met."
        )
    gm_gap = stable & np.isnan(gm_up)
    if gm_gap.any():
        notes.append(
            f"Gain margin gap at K {_fmt_runs(_runs(gm_gap, k))}: no phase crossing below 0 dB, "
            "so the upward gain margin is unbounded."
        )
    if (~stable).any():
        notes.append(
            f"Closed loop unstable at K {_fmt_runs(_runs(~stable, k))}: margins not drawn there "
            "(crossing values are not stability margins)."
        )
    if (~conv).any():
        notes.append(
            f"Equivalent-system fit not converged at K {_fmt_runs(_runs(~conv, k))}: "
            "equivalent damping not drawn there."
        )
    if cond.chosen_gain < k[0]:
        notes.append(
            f"The chosen K is {cond.chosen_gain:.3g} s, below the swept range (K = 0 has no place on a log axis; "
            "it is marked at the left edge): the bare airframe already meets every requirement with the most "
            f"slack, so the {cond.policy} policy needs no damper gain here."
        )
    elif cond.chosen_gain <= k[0] * 1.01:
        notes.append(
            "The chosen K is at the lower end of the sweep: every requirement is already met at the smallest swept "
            f"gain and the {cond.policy} policy found its best point there (the damper adds almost nothing)."
        )
    if not cond.feasible:
        miss = ", ".join(f"{_label(n)} {_slack_text(v)}" for n, v in cond.binding)
        notes.append(f"No gain meets every requirement; the chosen K is the closest miss (slack: {miss}).")
    notes.append(
        "Damping from the closed-loop eigenvalues (Pade delay) and the equivalent-system fit; "
        "margins with the exact delay."
    )
    return notes


def _draw_sweep(case, design, i):
    import textwrap

    cond = design.conditions[i]
    k = design.sweep_gains[i]
    v = _sweep_values(design, i)
    notes = _sweep_notes(cond, k, v["stable"], v["pm"], v["gm_up"], v["conv"])
    wrapped = "\n".join(textwrap.fill(n, 118) for n in notes)
    subtitle = textwrap.fill(f"{case.title}  |  {len(k)} sweep points  |  {cond.reason}", SUBTITLE_WIDTH)
    fig, axes, bottom_in, height = _sweep_canvas(wrapped.count("\n") + 1, subtitle.count("\n"))
    ax_z, ax_g, ax_p = axes
    for ax in axes:
        _gain_marks(ax, cond, k, v["stable"])
    dz, amb = _damping_panel(ax_z, case, k, v)
    g_req, p_req, has_dn = _margin_panels(ax_g, ax_p, case, k, v)
    for ax in axes[:-1]:
        ax.tick_params(which="both", labelbottom=False)
    _edge_names(ax_z, cond, k)
    _sweep_legends(case, cond, axes, amb, dz, g_req, p_req, has_dn, v["stable"])
    fig.text(0.085, (bottom_in - 0.6) / height, wrapped, va="top", ha="left", fontsize=7.8, color=PALETTE["ink"])
    fig.suptitle(
        f"{cond.name}: damping and margins against the gain", fontsize=12, x=0.085, ha="left", y=1.0 - 0.12 / height
    )
    fig.text(0.085, 1.0 - 0.34 / height, subtitle, va="top", fontsize=8.5, color=PALETTE["ink"])
    return fig


def _sweep_values(design, i) -> dict:
    """The swept series of condition `i` as drawn: margins blanked where the closed loop is unstable."""
    s = design.sweep
    stable = np.asarray(s.modes.stable)[i]
    conv = np.asarray(s.equivalent.converged, bool)[i]
    gm_up = np.array(s.margins.gain_margin_db[i], dtype=float)
    gm_dn = -np.array(s.margins.gain_margin_low_db[i], dtype=float)
    pm = np.array(s.margins.phase_margin_deg[i], dtype=float)
    return {
        "stable": stable,
        "conv": conv,
        "amb": np.asarray(s.modes.ambiguous, bool)[i],
        "mod": np.array(s.damping_ratio("modal")[i], dtype=float),
        "eq_shown": np.where(conv, np.array(s.damping_ratio("equivalent")[i], dtype=float), np.nan),
        "gm_up": gm_up,
        "pm": pm,
        "gm_up_s": np.where(stable, gm_up, np.nan),
        "gm_dn_s": np.where(stable, gm_dn, np.nan),
        "pm_s": np.where(stable, pm, np.nan),
    }


def _sweep_canvas(n_lines, subtitle_breaks):
    """The figure and its three panels; fixed panel height, the figure grows with the notes and
    the subtitle's lines (inches). Returns (fig, axes, bottom_in, height_in)."""
    bottom_in, panels_in, top_in = 0.75 + 0.15 * n_lines, 6.2, 1.15 + 0.16 * subtitle_breaks
    height = bottom_in + panels_in + top_in
    fig = _figure(10.5, height)
    gs = fig.add_gridspec(
        3, 1, left=0.085, right=0.76, top=(bottom_in + panels_in) / height, bottom=bottom_in / height, hspace=0.10
    )
    ax_z = fig.add_subplot(gs[0])
    ax_g = fig.add_subplot(gs[1], sharex=ax_z)
    ax_p = fig.add_subplot(gs[2], sharex=ax_z)
    return fig, (ax_z, ax_g, ax_p), bottom_in, height


def _gain_marks(ax, cond, k, stable):
    """Log gain axis, feasible intervals, unstable hatching, the chosen gain and the interval edges."""
    _log_x(ax)
    for lo, hi in cond.intervals:
        ax.axvspan(lo, hi, facecolor=PALETTE["feasible"], edgecolor="none", zorder=0)
    for lo, hi in _span_edges(~stable, k):
        ax.axvspan(lo, hi, facecolor="none", edgecolor=PALETTE["unstable"], hatch="///", linewidth=0, zorder=0)
    ax.axvline(max(cond.chosen_gain, k[0]), **LINES["chosen"], zorder=4)
    for pair in cond.edges:
        for e in pair:
            ax.axvline(e.gain, color=PALETTE["tertiary"], linestyle=":", linewidth=1.0, zorder=1)


def _damping_panel(ax_z, case, k, v):
    """Equivalent and modal damping against the gain with the required band; returns (criteria, ambiguous)."""
    mod, amb = v["mod"], v["amb"]
    dz = _criteria(case, "damping_ratio")
    z_top = 1.6
    for c in dz:
        if np.isfinite(c.upper):
            z_top = max(z_top, 1.25 * c.upper)
    z_bot = -0.1 if np.nanmin(np.concatenate([mod, [0.0]])) > -0.1 else -0.35
    for c in dz:
        ax_z.axhspan(
            c.lower if np.isfinite(c.lower) else z_bot,
            min(c.upper, z_top) if np.isfinite(c.upper) else z_top,
            facecolor=PALETTE["band"],
            alpha=0.6,
            zorder=0,
        )
        for x in (c.lower, c.upper):
            if np.isfinite(x):
                ax_z.axhline(x, **LINES["limit"], zorder=2)
    ax_z.plot(k, v["eq_shown"], markevery=_MARK_EVERY, **LINES["primary"], zorder=3)
    ax_z.plot(k, mod, markevery=(_MARK_EVERY // 2, _MARK_EVERY), **LINES["secondary"], zorder=3)
    if amb.any():
        ax_z.plot(k[amb], np.clip(mod[amb], z_bot, z_top), **_AMBIGUOUS, zorder=3)
    ax_z.set_ylim(z_bot, z_top)
    ax_z.set_ylabel("short-period\ndamping ratio (-)")
    return dz, amb


#: The mark of a sweep point whose short-period pick is ambiguous.
_AMBIGUOUS = {"linestyle": "none", "marker": "x", "markersize": 4, "color": PALETTE["ink"], "alpha": 0.6}


def _margin_panels(ax_g, ax_p, case, k, v):
    """Gain margins (up and down) and phase margin against the gain with their required minima."""
    gm_up_s, gm_dn_s, pm_s = v["gm_up_s"], v["gm_dn_s"], v["pm_s"]
    ax_g.plot(k, gm_up_s, markevery=_MARK_EVERY, **LINES["primary"], zorder=3)
    has_dn = np.isfinite(gm_dn_s).any()
    if has_dn:
        ax_g.plot(k, gm_dn_s, markevery=_MARK_EVERY, **LINES["tertiary"], zorder=3)
    g_req = _criteria(case, "gain_margin")
    for c in g_req:
        if np.isfinite(c.lower):
            ax_g.axhline(c.lower, **LINES["limit"], zorder=2)
    gvals = np.concatenate([gm_up_s, gm_dn_s, [c.lower for c in g_req if np.isfinite(c.lower)], [0.0]])
    gvals = gvals[np.isfinite(gvals)]
    ax_g.set_ylim(min(0.0, float(gvals.min())) - 2.0, float(gvals.max()) * 1.08 + 2.0)
    ax_g.set_ylabel("gain margin (dB)")

    ax_p.plot(k, pm_s, markevery=_MARK_EVERY, **LINES["secondary"], zorder=3)
    p_req = _criteria(case, "phase_margin")
    for c in p_req:
        if np.isfinite(c.lower):
            ax_p.axhline(c.lower, **LINES["limit"], zorder=2)
    pvals = np.concatenate([pm_s, [c.lower for c in p_req if np.isfinite(c.lower)], [0.0]])
    pvals = pvals[np.isfinite(pvals)]
    ax_p.set_ylim(min(0.0, float(pvals.min())) - 5.0, max(float(pvals.max()) * 1.08, 60.0) + 5.0)
    ax_p.set_ylabel("phase margin (deg)")
    ax_p.set_xlabel("gain K (s)")
    ax_p.set_xlim(k[0], k[-1])
    _short_log_labels(ax_p.xaxis, float(k[0]), float(k[-1]))
    return g_req, p_req, has_dn


def _edge_names(ax_z, cond, k):
    """The interval edges' names above the top panel, each outside its interval, and the chosen K."""
    from matplotlib.transforms import blended_transform_factory

    tr = blended_transform_factory(ax_z.transData, ax_z.transAxes)
    edges = sorted((e for pair in cond.edges for e in pair), key=lambda e: e.gain)
    for n, e in enumerate(edges):
        at_start = np.isclose(e.gain, k[0], rtol=1e-6)
        at_end = np.isclose(e.gain, k[-1], rtol=1e-6)
        outward_left = e.side == "lower"
        if at_start or at_end:
            outward_left = at_end  # keep the label inside the axes
        ax_z.text(
            e.gain,
            1.03 + (0.13 if len(edges) > 2 and n % 2 else 0.0),
            f"{e.side} edge {e.gain:.3g} s\n{_label(e.binding)}",
            transform=tr,
            ha="right" if outward_left else "left",
            va="bottom",
            fontsize=7.5,
            color=PALETTE["tertiary"],
            linespacing=1.1,
        )
    ax_z.text(
        max(cond.chosen_gain, k[0]),
        0.97,
        f" chosen K = {cond.chosen_gain:.4g} s"
        + (" (below the swept range: drawn at its left edge)" if cond.chosen_gain < k[0]
           else " (at the sweep's lower end)" if cond.chosen_gain <= k[0] * 1.01 else ""),
        transform=tr,
        ha="left",
        va="top",
        fontsize=8,
        bbox={"boxstyle": "round,pad=0.2", "fc": "white", "ec": "none", "alpha": 0.85},
        zorder=6,
    )


def _sweep_legends(case, cond, axes, amb, dz, g_req, p_req, has_dn, stable):
    """One legend per panel, right of the axes; the shared marks go with the bottom panel's."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    ax_z, ax_g, ax_p = axes
    dm = case.requirements.damping_measure
    leg = {"loc": "upper left", "bbox_to_anchor": (1.01, 1.0), "borderaxespad": 0.0, "fontsize": 7.8}
    h = [
        Line2D([], [], **LINES["primary"], label="equivalent" + (" (judged)" if dm == "equivalent" else "")),
        Line2D([], [], **LINES["secondary"], label="modal" + (" (judged)" if dm == "modal" else "")),
    ]
    if amb.any():
        h.append(Line2D([], [], **{**_AMBIGUOUS, "markersize": 5}, label="short-period pick\nambiguous"))
    for c in dz:
        h.append(Patch(facecolor=PALETTE["band"], alpha=0.6, label=f"required {_fmt_band(c.lower, c.upper)}"))
    ax_z.legend(handles=h, **leg)
    h = [Line2D([], [], **LINES["primary"], label="upward")]
    if has_dn:
        h.append(Line2D([], [], **LINES["tertiary"], label="downward (magnitude)"))
    for c in g_req:
        h.append(Line2D([], [], **LINES["limit"], label=f"required {_fmt_band(c.lower, c.upper, 'dB')}"))
    ax_g.legend(handles=h, **leg)
    h = [Line2D([], [], **LINES["secondary"], label="phase margin")]
    for c in p_req:
        h.append(Line2D([], [], **LINES["limit"], label=f"required {_fmt_band(c.lower, c.upper, 'deg')}"))
    h += [
        Patch(
            facecolor=PALETTE["feasible"],
            label="feasible gains\n(every requirement met)" if cond.intervals else "feasible gains: none",
        ),
    ]
    if cond.edges:
        h.append(Line2D([], [], color=PALETTE["tertiary"], linestyle=":", label="interval edge"))
    h.append(Line2D([], [], **LINES["chosen"], label=f"chosen K ({cond.policy})"))
    if (~stable).any():
        h.append(Patch(facecolor="none", edgecolor=PALETTE["unstable"], hatch="///", label="closed loop unstable"))
    ax_p.legend(handles=h, **leg)


# ---------------------------------------------------------------------------------
# all of them
# ---------------------------------------------------------------------------------
def design_plot_jobs(case, design, inputs, out_dir, slugs=None):
    """The figures of :func:`design_plots` as separate jobs ``(fn, args)``, in file order.

    Each ``fn(*args)`` draws one figure and returns its written paths (see
    :class:`damper.output.background.PlotJobs`); every condition has one job per kind of
    :data:`KINDS`, in that order. `inputs` is
    :func:`damper.analysis.design_figures.design_figure_inputs` of `case` and `design`.
    `slugs` gives each condition's file slug (default: from the names of `design`'s
    conditions, as :func:`~damper.output.style.plot_slugs` makes them); a batch of a larger
    case passes the slugs of the whole case.
    """
    from functools import partial

    plot_dir = os.path.join(os.fspath(out_dir), "plots")
    if slugs is None:
        slugs = plot_slugs([cond.name for cond in design.conditions])
    jobs = []
    for i, slug in enumerate(slugs):
        stem = os.path.join(plot_dir, slug)
        jobs.append((partial(root_locus, open_loop=inputs.open_loop), (case, design, i, f"{stem}-{ROOT_LOCUS.stem}")))
        jobs.append((loop_response_plot, (case, inputs.loop_curves[i], f"{stem}-{LOOP_RESPONSE.stem}")))
        jobs.append((gain_sweep_plot, (case, design, i, f"{stem}-{GAIN_SWEEP.stem}")))
    return jobs


def design_plots(case, design, inputs, out_dir):
    """Root locus, loop response and gain sweep for every condition.

    Files: ``<out_dir>/plots/<slug>-root-locus.png`` (and ``.svg``), ``-loop-response``,
    ``-gain-sweep``, with ``<slug>`` = :func:`~damper.output.style.safe_name` of the
    condition name (made unique by a numeric suffix when two names give the same slug).
    `inputs`: see :func:`design_plot_jobs`.

    Returns
    -------
    list of str
        Every written path, in order.
    """
    paths = []
    for fn, args in design_plot_jobs(case, design, inputs, out_dir):
        paths += fn(*args)
    return paths


__all__ = ["GAIN_SWEEP", "KINDS", "LOOP_RESPONSE", "ROOT_LOCUS", "design_plot_jobs", "design_plots", "gain_sweep_plot"]
