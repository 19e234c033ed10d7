"""Design plots per condition: root locus, loop response (Bode; :mod:`damper.output.loop_plot`) and gain sweep.

Every function takes the case, the :class:`~damper.analysis.search.DesignResult` of
:func:`damper.analysis.search.search`, a condition index and an output path stem; it
writes ``<stem>.png`` and ``<stem>.svg`` atomically and returns the written paths.

Nothing here computes a measure: the plots show what the search and the assessment
found. One value comes from library functions at drawing time: the open-loop (K = 0)
poles of the root locus (:func:`damper.measures.modes.closed_loop_modes` on the
library's closed-loop matrix with zero gain; Pade delay like every eigenvalue view).

matplotlib is imported inside the functions (Agg canvas, no pyplot state), so
importing this module is cheap.
"""

from __future__ import annotations

from .figures import new_figure, save_figure  # noqa: E402
from .names import plot_slugs, safe_name  # noqa: F401 - other modules import safe_name from here

import os
from dataclasses import dataclass

import numpy as np


# ---------------------------------------------------------------------------------
# Visual identity: one palette, every series also told apart by line style and marker
# (readable in greyscale and with the common colour-vision deficiencies).
# ---------------------------------------------------------------------------------
PALETTE = {
    "ink": "#222222",  # text, axes, open-loop poles
    "primary": "#1f4e79",  # deep blue: main series (equivalent damping, gain)
    "secondary": "#c4651a",  # burnt orange: second series (modal damping, phase)
    "tertiary": "#4b7f52",  # moss green: third series (downward gain margin)
    "limit": "#9b2226",  # brick red: requirement limits
    "chosen": "#111111",  # the chosen gain
    "band": "#bcd4e6",  # pale blue: required damping band
    "feasible": "#d9ead3",  # pale green: feasible gain intervals
    "unstable": "#9e9e9e",  # grey hatch: closed loop unstable
    "grid": "#d0d0d0",
    "critical": "#555555",  # 0 dB / -180 deg / imaginary axis
}
COLORMAP = "cividis"  # gain colour scale: monotone in lightness
DPI = 120
LINES = {
    "primary": {"color": PALETTE["primary"], "linestyle": "-", "marker": "o", "markersize": 3.0, "linewidth": 1.6},
    "secondary": {
        "color": PALETTE["secondary"],
        "linestyle": "--",
        "marker": "s",
        "markersize": 3.0,
        "linewidth": 1.4,
    },
    "tertiary": {"color": PALETTE["tertiary"], "linestyle": "-.", "marker": "^", "markersize": 3.0, "linewidth": 1.4},
    "limit": {"color": PALETTE["limit"], "linestyle": (0, (6, 3)), "linewidth": 1.3},
    "chosen": {"color": PALETTE["chosen"], "linestyle": (0, (5, 2, 1, 2)), "linewidth": 1.6},
    "critical": {"color": PALETTE["critical"], "linestyle": "-", "linewidth": 0.9},
}
_RC = {
    "font.family": "sans-serif",
    "font.sans-serif": ["DejaVu Sans"],
    "font.size": 9.0,
    "axes.titlesize": 10.0,
    "axes.labelsize": 9.0,
    "axes.edgecolor": PALETTE["ink"],
    "axes.labelcolor": PALETTE["ink"],
    "axes.grid": True,
    "axes.axisbelow": True,
    "grid.color": PALETTE["grid"],
    "grid.linewidth": 0.6,
    "grid.alpha": 0.8,
    "xtick.color": PALETTE["ink"],
    "ytick.color": PALETTE["ink"],
    "legend.fontsize": 8.0,
    "legend.framealpha": 0.92,
    "legend.edgecolor": PALETTE["grid"],
    "svg.fonttype": "none",
    "svg.hashsalt": "damper",
    "hatch.color": PALETTE["unstable"],
    "hatch.linewidth": 0.6,
}
_MARK_EVERY = 8  # markers on every 8th sweep point (the line carries the data)
SUBTITLE_WIDTH = 145  # characters of a gain-sweep subtitle line (8.5 pt across a 10.5 in figure)


# ---------------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------------
def _figure(width, height):
    return new_figure(width, height)


def _save(fig, stem):
    return save_figure(fig, stem, DPI)


def _render(draw, stem, *args):
    import matplotlib

    with matplotlib.rc_context(_RC):
        fig = draw(*args)
        return _save(fig, stem)


def _plain_log_label(v, _pos=None):
    """A log-axis tick label as a plain number (0.01, 1, 100): readable, and no mathtext to lay out."""
    return f"{v:g}"


def _log_x(ax):
    """Log frequency/gain axis with a light minor grid at 2 and 5 (fewer ticks: faster)."""
    from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

    ax.set_xscale("log")
    ax.xaxis.set_major_formatter(FuncFormatter(_plain_log_label))
    ax.xaxis.set_minor_locator(LogLocator(base=10.0, subs=(2.0, 5.0)))
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.grid(True, which="major")
    ax.grid(True, which="minor", alpha=0.35)


def _short_log_labels(axis, lo, hi):
    """Plain-number labels: on major and minor ticks of a log axis spanning under two decades, else on major ticks."""
    from matplotlib.ticker import FuncFormatter

    if hi / lo < 100.0:
        fmt = FuncFormatter(lambda v, _pos: f"{v:.3g}")
        axis.set_major_formatter(fmt)
        axis.set_minor_formatter(fmt)
    else:
        axis.set_major_formatter(FuncFormatter(_plain_log_label))


def _criteria(case, name):
    return [c for c in case.requirements.criteria if c.name == name]


def _runs(mask, x):
    """Contiguous True runs of `mask` as (x_first, x_last) pairs."""
    mask = np.asarray(mask, bool)
    out = []
    k = 0
    n = mask.size
    while k < n:
        if mask[k]:
            j = k
            while j + 1 < n and mask[j + 1]:
                j += 1
            out.append((float(x[k]), float(x[j])))
            k = j + 1
        else:
            k += 1
    return out


def _span_edges(mask, x):
    """Runs of `mask` widened to half-way (in log) to the neighbouring grid points."""
    lx = np.log10(x)
    spans = []
    for a, b in _runs(mask, np.arange(x.size)):
        a, b = int(a), int(b)
        lo = lx[a] - (0.5 * (lx[a] - lx[a - 1]) if a > 0 else 0.0)
        hi = lx[b] + (0.5 * (lx[b + 1] - lx[b]) if b + 1 < x.size else 0.0)
        spans.append((10.0**lo, 10.0**hi))
    return spans


def _fmt_runs(runs, unit="s"):
    parts = []
    for a, b in runs:
        parts.append(f"{a:.3g} {unit}" if np.isclose(a, b) else f"{a:.3g}-{b:.3g} {unit}")
    return ", ".join(parts)


def _fmt_band(lower, upper, unit=""):
    u = f" {unit}" if unit else ""
    if np.isfinite(lower) and np.isfinite(upper):
        return f"{lower:.3g}-{upper:.3g}{u}"
    if np.isfinite(lower):
        return f">= {lower:.3g}{u}"
    return f"<= {upper:.3g}{u}"


def _delay_text(case):
    delay = case.loop.hardware().delay
    if delay is None:
        return None, "no delay in the loop"
    t = float(np.asarray(delay.time))
    return t, f"{t * 1e3:.3g} ms"


# ---------------------------------------------------------------------------------
# 1. root locus
# ---------------------------------------------------------------------------------
def open_loop_poles(case) -> np.ndarray:
    """Open-loop (K = 0) poles of every condition, 1/s, shape (n_conditions, n_states).

    The library's closed-loop matrix with zero gain, eigenvalues by
    :func:`damper.measures.modes.closed_loop_modes` (delay as its Pade approximant).
    """
    from ..analysis.assess import build_loop
    from ..measures.modes import closed_loop_modes
    from ..model.loop import closed_loop_matrix

    loop = build_loop(case, np.zeros(len(case.conditions)))
    A, _, layout = closed_loop_matrix(loop)
    A = np.broadcast_to(A, (len(case.conditions),) + A.shape[-2:])
    return closed_loop_modes(A, layout.alpha, layout.q).eigenvalues


def _damping_sector(ax, lower, upper, radius):
    """Shade the region between the rays zeta = lower and zeta = upper (left half-plane)."""
    from matplotlib.patches import Polygon

    z_hi = 1.0 if not np.isfinite(upper) else min(float(upper), 1.0)
    z_lo = max(float(lower), 0.0) if np.isfinite(lower) else 0.0
    t_lo = np.arccos(z_lo)  # angle from the negative real axis
    t_hi = np.arccos(z_hi)
    handles = []
    for sgn in (1.0, -1.0):
        t = np.linspace(t_hi, t_lo, 40)
        pts = np.column_stack([-radius * np.cos(t), sgn * radius * np.sin(t)])
        poly = Polygon(
            np.vstack([[0.0, 0.0], pts]), closed=True, facecolor=PALETTE["band"], edgecolor="none", alpha=0.55, zorder=0
        )
        ax.add_patch(poly)
        handles.append(poly)
    rays = []
    for z, style in ((lower, (0, (6, 3))), (upper, (0, (2, 2)))):
        if not np.isfinite(z) or z >= 1.0 or z < 0.0:
            continue
        x, y = -radius * z, radius * np.sqrt(1.0 - z * z)
        (ln,) = ax.plot([0, x], [0, y], color=PALETTE["limit"], linestyle=style, linewidth=1.1, zorder=1)
        ax.plot([0, x], [0, -y], color=PALETTE["limit"], linestyle=style, linewidth=1.1, zorder=1)
        rays.append((z, ln))
    return handles[0], rays


def _zoom_limits(sp_roots, extra):
    pts = np.concatenate([np.ravel(sp_roots), np.ravel(extra)])
    pts = pts[np.isfinite(pts)]
    if pts.size == 0:
        return (-2.0, 0.5), (-2.0, 2.0)
    re_lo = min(float(np.min(pts.real)), 0.0)
    re_hi = max(float(np.max(pts.real)), 0.0)
    im_hi = max(float(np.max(np.abs(pts.imag))), 0.5)
    span = max(re_hi - re_lo, 0.5)
    return (re_lo - 0.12 * span, re_hi + 0.12 * span), (-1.12 * im_hi, 1.12 * im_hi)


def root_locus(case, design, i, stem, open_loop=None):
    """Closed-loop poles of condition `i` over the swept gains; writes PNG and SVG.

    Parameters
    ----------
    case : Case
    design : DesignResult
    i : int
        Condition index.
    stem : str or path
        Output path without extension.
    open_loop : ndarray, optional
        Open-loop poles of every condition (:func:`open_loop_poles`); computed when omitted.

    Returns
    -------
    list of str
        The PNG and SVG paths.
    """
    if open_loop is None:
        open_loop = open_loop_poles(case)
    return _render(_draw_root_locus, stem, case, design, i, open_loop)


def _draw_root_locus(case, design, i, open_loop):
    from matplotlib.colors import LogNorm
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch, Rectangle

    cond = design.conditions[i]
    gains = design.sweep_gains[i]
    ev = design.sweep.modes.eigenvalues[i]  # (points, n)
    sp = design.sweep.modes.short_period.roots[i]  # (points, 2)
    chosen_ev = design.chosen.modes.eigenvalues[i]
    chosen_sp = design.chosen.modes.short_period.roots[i]
    bare_sp = np.broadcast_to(design.sweep.bare.roots, design.sweep_gains.shape + (2,))[i, 0]
    ol = np.asarray(open_loop)[i]
    kk = np.repeat(gains[:, None], ev.shape[1], 1)
    norm = LogNorm(vmin=float(gains.min()), vmax=float(gains.max()))

    fig = _figure(11.5, 6.6)
    gs = fig.add_gridspec(
        2, 2, width_ratios=[1.5, 1.0], left=0.065, right=0.865, top=0.865, bottom=0.2, wspace=0.26, hspace=0.42
    )
    ax_d = fig.add_subplot(gs[:, 0])
    ax_n = fig.add_subplot(gs[0, 1])
    ax_a = fig.add_subplot(gs[1, 1])
    cax = fig.add_axes((0.89, 0.2, 0.016, 0.665))

    # detail: the short-period pair up to 1.5 x the top of the feasible gains (or the chosen gain)
    k_top = max([cond.chosen_gain] + [hi for _, hi in cond.intervals])
    near = gains <= 1.5 * k_top
    d_lim = _zoom_limits(sp[near], np.concatenate([chosen_sp, bare_sp]))
    n_lim = _zoom_limits(sp, np.concatenate([chosen_sp, bare_sp]))
    all_pts = np.concatenate([ev.ravel(), ol, chosen_ev])
    all_pts = all_pts[np.isfinite(all_pts)]
    re_lo = min(float(np.min(all_pts.real)), n_lim[0][0])
    re_hi = max(float(np.max(all_pts.real)), n_lim[0][1], 0.0)
    im_hi = max(float(np.max(np.abs(all_pts.imag))), n_lim[1][1])
    pad = 0.08 * max(re_hi - re_lo, 2 * im_hi)
    a_lim = ((re_lo - pad, re_hi + pad), (-im_hi - pad, im_hi + pad))
    reach = 4.0 * max(abs(re_lo), abs(re_hi), im_hi) + 1.0

    dz = _criteria(case, "damping_ratio")
    rays = []
    for ax, (xl, yl), size in ((ax_d, d_lim, 14), (ax_n, n_lim, 7), (ax_a, a_lim, 7)):
        ax.axvline(0.0, **LINES["critical"], zorder=1)
        ax.axhline(0.0, color=PALETTE["grid"], linewidth=0.8, zorder=1)
        if dz:
            _, rays = _damping_sector(ax, dz[0].lower, dz[0].upper, reach)
        sc = ax.scatter(
            ev.real.ravel(),
            ev.imag.ravel(),
            c=kk.ravel(),
            norm=norm,
            cmap=COLORMAP,
            s=size,
            marker="o",
            linewidths=0,
            zorder=2,
            rasterized=ax is not ax_d,  # overview clouds as an image inside the SVG (small, fast)
        )
        ax.scatter(ol.real, ol.imag, marker="x", s=4 * size + 10, linewidths=1.5, color=PALETTE["ink"], zorder=4)
        ax.scatter(
            chosen_ev.real,
            chosen_ev.imag,
            marker="D",
            s=4 * size + 14,
            facecolors="none",
            edgecolors=PALETTE["secondary"],
            linewidths=1.5,
            zorder=5,
        )
        ax.set_xlim(*xl)
        ax.set_ylim(*yl)
        ax.set_xlabel("real part (1/s)")
        ax.set_ylabel("imaginary part (rad/s)")
    for ax, lim in ((ax_n, d_lim), (ax_a, n_lim)):
        (x0, x1), (y0, y1) = lim
        ax.add_patch(
            Rectangle(
                (x0, y0), x1 - x0, y1 - y0, fill=False, edgecolor=PALETTE["ink"], linestyle=":", linewidth=1.0, zorder=6
            )
        )
    ax_d.set_title(
        f"short-period region: K up to {min(1.5 * k_top, gains[-1]):.3g} s "
        f"(1.5 x the {'top feasible' if cond.intervals else 'chosen'} gain)",
        fontsize=9.5,
    )
    ax_n.set_title("near the origin, whole sweep (box: left panel)", fontsize=9)
    ax_a.set_title("all poles (box: panel above)", fontsize=9)

    # annotate the chosen short-period pair
    zeta_eq = float(design.chosen.damping_ratio("equivalent")[i])
    zeta_mod = float(design.chosen.damping_ratio("modal")[i])
    if np.all(np.isfinite(chosen_sp)):
        top = chosen_sp[np.argmax(chosen_sp.imag)]
        ax_d.annotate(
            f"chosen K: short period\n{top.real:.3g} {'+' if top.imag >= 0 else '-'} {abs(top.imag):.3g}j 1/s\n"
            f"modal zeta {zeta_mod:.3f}, equivalent {zeta_eq:.3f}",
            xy=(top.real, top.imag),
            xytext=(0.03, 0.97),
            textcoords="axes fraction",
            ha="left",
            va="top",
            fontsize=8,
            color=PALETTE["ink"],
            bbox={"boxstyle": "round,pad=0.3", "fc": "white", "ec": PALETTE["grid"], "alpha": 0.92},
            arrowprops={"arrowstyle": "-", "color": PALETTE["ink"], "linewidth": 0.8, "shrinkB": 6},
            zorder=7,
        )

    cb = fig.colorbar(sc, cax=cax)
    cb.set_label("gain K (s)")
    _short_log_labels(cax.yaxis, float(gains.min()), float(gains.max()))
    _colour_bar_marks(cax, cond, float(gains.min()), float(gains.max()))

    # legend below the panels
    handles = [
        Line2D(
            [],
            [],
            linestyle="none",
            marker="o",
            markersize=5,
            color=matplotlib_mid_colour(),
            label="closed-loop poles over the sweep (colour: K)",
        ),
        Line2D(
            [],
            [],
            linestyle="none",
            marker="x",
            markersize=7,
            markeredgewidth=1.5,
            color=PALETTE["ink"],
            label="open-loop poles (K = 0)",
        ),
        Line2D(
            [],
            [],
            linestyle="none",
            marker="D",
            markersize=7,
            markerfacecolor="none",
            markeredgewidth=1.5,
            color=PALETTE["secondary"],
            label=f"poles at the chosen K = {cond.chosen_gain:.4g} s",
        ),
    ]
    if dz:
        c = dz[0]
        handles.append(
            Patch(
                facecolor=PALETTE["band"],
                alpha=0.55,
                label=f"required damping ratio {_fmt_band(c.lower, c.upper)} (judged on {c.measure or 'modal'})",
            )
        )
        for z, ln in rays:
            handles.append(
                Line2D([], [], color=PALETTE["limit"], linestyle=ln.get_linestyle(), label=f"ray zeta = {z:.3g}")
            )
        if np.isfinite(c.upper) and c.upper >= 1.0:
            handles.append(
                Patch(facecolor="none", edgecolor="none", label=f"upper {c.upper:.3g} >= 1: real roots, no ray")
            )
    handles.append(
        Patch(facecolor=PALETTE["feasible"], edgecolor=PALETTE["tertiary"], label="feasible K (on the colour bar)")
    )
    handles.append(Line2D([], [], color=PALETTE["secondary"], linewidth=2.2, label="chosen K (on the colour bar)"))
    fig.legend(handles=handles, loc="lower center", ncol=3, frameon=False, bbox_to_anchor=(0.5, 0.0), columnspacing=1.5)

    pade = design.sweep.pade_order
    _, dtext = _delay_text(case)
    view = (
        f"eigenvalues with the {dtext} delay as a ({pade}, {pade}) Pade approximant"
        if pade
        else "eigenvalues (no delay in the loop)"
    )
    fig.suptitle(f"{cond.name}: root locus of the pitch-rate damper", fontsize=12, x=0.065, ha="left", y=0.975)
    fig.text(
        0.065,
        0.925,
        f"{case.title}  |  sweep K {cond.sweep_range[0]:.3g}-{cond.sweep_range[1]:.3g} s  |  {view}",
        fontsize=8.5,
        color=PALETTE["ink"],
    )
    return fig


def _colour_bar_marks(cax, cond, k_min, k_max):
    """Feasible intervals and the chosen gain on the log colour bar; a gain below its scale
    (K = 0 has no place on a log axis) is marked at the bar's foot with its value."""
    for lo, hi in cond.intervals:
        lo, hi = max(lo, k_min), min(hi, k_max)
        if hi > lo:
            cax.axhspan(
                lo, hi, xmin=0.0, xmax=0.4, facecolor=PALETTE["feasible"], edgecolor=PALETTE["tertiary"], linewidth=0.8
            )
    if cond.chosen_gain >= k_min:
        cax.axhline(cond.chosen_gain, color=PALETTE["secondary"], linewidth=2.2)
        return
    cax.plot([0.0, 1.0], [0.0, 0.0], transform=cax.transAxes, color=PALETTE["secondary"], linewidth=4.0,
             clip_on=False, zorder=5)
    cax.annotate(
        f"chosen\nK = {cond.chosen_gain:.3g} s\n(below\nthe scale)",
        xy=(0.5, 0.0),
        xycoords="axes fraction",
        xytext=(0.5, -0.035),
        textcoords="axes fraction",
        ha="center",
        va="top",
        fontsize=7.5,
        color=PALETTE["ink"],
        arrowprops={"arrowstyle": "-|>", "color": PALETTE["secondary"], "linewidth": 1.2},
    )


def matplotlib_mid_colour():
    """The middle colour of the gain colour scale (for legend swatches)."""
    import matplotlib

    return matplotlib.colormaps[COLORMAP](0.5)


# ---------------------------------------------------------------------------------
# 2. gain sweep
# ---------------------------------------------------------------------------------
def _label(name):
    return name.replace("_", " ")


def gain_sweep_plot(case, design, i, stem):
    """Damping ratio and margins of condition `i` against the gain; PNG and SVG.

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
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    cond = design.conditions[i]
    s = design.sweep
    k = design.sweep_gains[i]
    stable = np.asarray(s.modes.stable)[i]
    eq = np.array(s.damping_ratio("equivalent")[i], dtype=float)
    mod = np.array(s.damping_ratio("modal")[i], dtype=float)
    conv = np.asarray(s.equivalent.converged, bool)[i]
    amb = np.asarray(s.modes.ambiguous, bool)[i]
    eq_shown = np.where(conv, eq, np.nan)
    gm_up = np.array(s.margins.gain_margin_db[i], dtype=float)
    gm_dn = -np.array(s.margins.gain_margin_low_db[i], dtype=float)
    pm = np.array(s.margins.phase_margin_deg[i], dtype=float)
    gm_up_s = np.where(stable, gm_up, np.nan)
    gm_dn_s = np.where(stable, gm_dn, np.nan)
    pm_s = np.where(stable, pm, np.nan)

    import textwrap

    wrapped = "\n".join(textwrap.fill(n, 118) for n in _sweep_notes(cond, k, stable, pm, gm_up, conv))
    n_lines = wrapped.count("\n") + 1
    subtitle = textwrap.fill(f"{case.title}  |  {len(k)} sweep points  |  {cond.reason}", SUBTITLE_WIDTH)
    # fixed panel height; the figure grows with the notes and the subtitle's lines (inches)
    bottom_in, panels_in, top_in = 0.75 + 0.15 * n_lines, 6.2, 1.15 + 0.16 * subtitle.count("\n")
    height = bottom_in + panels_in + top_in
    fig = _figure(10.5, height)
    gs = fig.add_gridspec(
        3, 1, left=0.085, right=0.76, top=(bottom_in + panels_in) / height, bottom=bottom_in / height, hspace=0.10
    )
    ax_z = fig.add_subplot(gs[0])
    ax_g = fig.add_subplot(gs[1], sharex=ax_z)
    ax_p = fig.add_subplot(gs[2], sharex=ax_z)
    axes = (ax_z, ax_g, ax_p)

    for ax in axes:
        _log_x(ax)
        for lo, hi in cond.intervals:
            ax.axvspan(lo, hi, facecolor=PALETTE["feasible"], edgecolor="none", zorder=0)
        for lo, hi in _span_edges(~stable, k):
            ax.axvspan(lo, hi, facecolor="none", edgecolor=PALETTE["unstable"], hatch="///", linewidth=0, zorder=0)
        ax.axvline(max(cond.chosen_gain, k[0]), **LINES["chosen"], zorder=4)
        for pair in cond.edges:
            for e in pair:
                ax.axvline(e.gain, color=PALETTE["tertiary"], linestyle=":", linewidth=1.0, zorder=1)

    # --- damping ratio --------------------------------------------------------
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
        for v in (c.lower, c.upper):
            if np.isfinite(v):
                ax_z.axhline(v, **LINES["limit"], zorder=2)
    ax_z.plot(k, eq_shown, markevery=_MARK_EVERY, **LINES["primary"], zorder=3)
    ax_z.plot(k, mod, markevery=(_MARK_EVERY // 2, _MARK_EVERY), **LINES["secondary"], zorder=3)
    if amb.any():
        ax_z.plot(
            k[amb],
            np.clip(mod[amb], z_bot, z_top),
            linestyle="none",
            marker="x",
            markersize=4,
            color=PALETTE["ink"],
            alpha=0.6,
            zorder=3,
        )
    ax_z.set_ylim(z_bot, z_top)
    ax_z.set_ylabel("short-period\ndamping ratio (-)")

    # --- gain margin -----------------------------------------------------------
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

    # --- phase margin ----------------------------------------------------------
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
    for ax in axes[:-1]:
        ax.tick_params(which="both", labelbottom=False)

    # --- edge names (above the top panel), each outside its interval ------------
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

    # --- legends: one per panel, and the shared marks below ------------------
    dm = case.requirements.damping_measure
    leg = {"loc": "upper left", "bbox_to_anchor": (1.01, 1.0), "borderaxespad": 0.0, "fontsize": 7.8}
    h = [
        Line2D([], [], **LINES["primary"], label="equivalent" + (" (judged)" if dm == "equivalent" else "")),
        Line2D([], [], **LINES["secondary"], label="modal" + (" (judged)" if dm == "modal" else "")),
    ]
    if amb.any():
        h.append(
            Line2D(
                [],
                [],
                linestyle="none",
                marker="x",
                markersize=5,
                color=PALETTE["ink"],
                alpha=0.6,
                label="short-period pick\nambiguous",
            )
        )
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
    h += [
        Line2D([], [], **LINES["chosen"], label=f"chosen K ({cond.policy})"),
    ]
    if (~stable).any():
        h.append(Patch(facecolor="none", edgecolor=PALETTE["unstable"], hatch="///", label="closed loop unstable"))
    ax_p.legend(handles=h, **leg)

    fig.text(0.085, (bottom_in - 0.6) / height, wrapped, va="top", ha="left", fontsize=7.8, color=PALETTE["ink"])
    fig.suptitle(
        f"{cond.name}: damping and margins against the gain", fontsize=12, x=0.085, ha="left", y=1.0 - 0.12 / height
    )
    fig.text(
        0.085,
        1.0 - 0.34 / height,
        subtitle,
        va="top",
        fontsize=8.5,
        color=PALETTE["ink"],
    )
    return fig


# ---------------------------------------------------------------------------------
# 3. all of them
# ---------------------------------------------------------------------------------
def design_plot_jobs(case, design, out_dir, slugs=None):
    """The figures of :func:`design_plots` as separate jobs ``(fn, args)``, in file order.

    Each ``fn(*args)`` draws one figure and returns its written paths (see
    :class:`damper.output.background.PlotJobs`). `slugs` gives each condition's file
    slug (default: from the names of `design`'s conditions, as :func:`plot_slugs` makes
    them); a batch of a larger case passes the slugs of the whole case.
    """
    from functools import partial

    from .loop_plot import loop_response_plot

    plot_dir = os.path.join(os.fspath(out_dir), "plots")
    ol = open_loop_poles(case)
    if slugs is None:
        slugs = plot_slugs([cond.name for cond in design.conditions])
    jobs = []
    for i, slug in enumerate(slugs):
        stem = os.path.join(plot_dir, slug)
        jobs.append((partial(root_locus, open_loop=ol), (case, design, i, stem + "-root-locus")))
        jobs.append((loop_response_plot, (case, design, i, stem + "-loop-response")))
        jobs.append((gain_sweep_plot, (case, design, i, stem + "-gain-sweep")))
    return jobs


def design_plots(case, design, out_dir):
    """Root locus, loop response and gain sweep for every condition.

    Files: ``<out_dir>/plots/<slug>-root-locus.png`` (and ``.svg``), ``-loop-response``,
    ``-gain-sweep``, with ``<slug>`` = :func:`safe_name` of the condition name (made
    unique by a numeric suffix when two names give the same slug).

    Returns
    -------
    list of str
        Every written path, in order.
    """
    paths = []
    for fn, args in design_plot_jobs(case, design, out_dir):
        paths += fn(*args)
    return paths


__all__ = [
    "design_plot_jobs",
    "PALETTE",
    "design_plots",
    "gain_sweep_plot",
    "open_loop_poles",
    "plot_slugs",
    "root_locus",
    "safe_name",
]
