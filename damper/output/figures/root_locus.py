"""The root-locus plot of one design condition (in the ``--figures`` formats, written atomically).

Nothing here computes: the plot shows the search's sweep and chosen gain, and the open-loop
(K = 0) poles of :func:`damper.analysis.locus.open_loop_poles`.
"""

from __future__ import annotations

import numpy as np

from ..style import (
    COLORMAP,
    LINES,
    PALETTE,
    _criteria,
    _delay_text,
    _figure,
    _fmt_band,
    _log_minor_2_5,
    _render,
    _short_log_labels,
)

# ---------------------------------------------------------------------------------
# 1. root locus
# ---------------------------------------------------------------------------------
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


def root_locus(case, design, i, stem, open_loop):
    """Closed-loop poles of condition `i` over the swept gains; writes it in the ``--figures`` formats.

    Parameters
    ----------
    case : Case
    design : DesignResult
    i : int
        Condition index.
    stem : str or path
        Output path without extension.
    open_loop : OpenLoopPoles
        Open-loop poles of every condition (:func:`damper.analysis.locus.open_loop_poles`).

    Returns
    -------
    list of str
        The written paths (one per format).
    """
    return _render(_draw_root_locus, stem, case, design, i, open_loop)


def _draw_root_locus(case, design, i, open_loop):
    cond = design.conditions[i]
    gains = design.sweep_gains[i]
    pts = {
        "ev": design.sweep.modes.eigenvalues[i],  # (points, n)
        "chosen_ev": design.chosen.modes.eigenvalues[i],
        "ol": np.asarray(open_loop.poles_1_s)[i],
    }
    chosen_sp = design.chosen.modes.short_period.roots[i]
    fig = _figure(11.5, 6.6)
    gs = fig.add_gridspec(
        2, 2, width_ratios=[1.5, 1.0], left=0.065, right=0.865, top=0.865, bottom=0.2, wspace=0.26, hspace=0.42
    )
    ax_d = fig.add_subplot(gs[:, 0])
    ax_n = fig.add_subplot(gs[0, 1])
    ax_a = fig.add_subplot(gs[1, 1])
    cax = fig.add_axes((0.89, 0.2, 0.016, 0.665))

    k_top = max([cond.chosen_gain] + [hi for _, hi in cond.intervals])
    limits, reach = _panel_limits(design, i, k_top, pts)
    dz = _criteria(case, "damping_ratio")
    sc, rays = _pole_clouds((ax_d, ax_n, ax_a), limits, reach, dz, gains, pts)
    _panel_titles(ax_d, ax_n, ax_a, limits, cond, k_top, gains)
    _annotate_chosen(ax_d, design, i, chosen_sp)
    cb = fig.colorbar(sc, cax=cax)
    cb.set_label("gain K (s)")
    _log_minor_2_5(cax.yaxis)  # minor marks at 2 and 5 of each decade, as the other log axes
    _short_log_labels(cax.yaxis, float(gains.min()), float(gains.max()))
    _colour_bar_marks(cax, cond, float(gains.min()), float(gains.max()))
    fig.legend(handles=_locus_legend(cond, dz, rays), loc="lower center", ncol=3, frameon=False,
               bbox_to_anchor=(0.5, 0.0), columnspacing=1.5)
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


def _panel_limits(design, i, k_top, pts):
    """((detail, near, all) axis limits, ray length): the detail shows the short-period pair up
    to 1.5 x the top of the feasible gains (or the chosen gain); each next panel contains the last."""
    gains = design.sweep_gains[i]
    sp = design.sweep.modes.short_period.roots[i]  # (points, 2)
    chosen_sp = design.chosen.modes.short_period.roots[i]
    bare_sp = np.broadcast_to(design.sweep.bare.roots, design.sweep_gains.shape + (2,))[i, 0]
    near = gains <= 1.5 * k_top
    d_lim = _zoom_limits(sp[near], np.concatenate([chosen_sp, bare_sp]))
    n_lim = _zoom_limits(sp, np.concatenate([chosen_sp, bare_sp]))
    all_pts = np.concatenate([pts["ev"].ravel(), pts["ol"], pts["chosen_ev"]])
    all_pts = all_pts[np.isfinite(all_pts)]
    re_lo = min(float(np.min(all_pts.real)), n_lim[0][0])
    re_hi = max(float(np.max(all_pts.real)), n_lim[0][1], 0.0)
    im_hi = max(float(np.max(np.abs(all_pts.imag))), n_lim[1][1])
    pad = 0.08 * max(re_hi - re_lo, 2 * im_hi)
    a_lim = ((re_lo - pad, re_hi + pad), (-im_hi - pad, im_hi + pad))
    return (d_lim, n_lim, a_lim), 4.0 * max(abs(re_lo), abs(re_hi), im_hi) + 1.0


def _pole_clouds(axes, limits, reach, dz, gains, pts):
    """Every panel: axes lines, the required damping sector, the swept poles coloured by K, the
    open-loop and chosen poles. Returns the scatter (for the colour bar) and the sector's rays."""
    from matplotlib.colors import LogNorm

    ev, ol, chosen_ev = pts["ev"], pts["ol"], pts["chosen_ev"]
    kk = np.repeat(gains[:, None], ev.shape[1], 1)
    norm = LogNorm(vmin=float(gains.min()), vmax=float(gains.max()))
    rays = []
    for ax, (xl, yl), size in zip(axes, limits, (14, 7, 7)):
        ax.axvline(0.0, **LINES["critical"], zorder=1)
        ax.axhline(0.0, color=PALETTE["grid"], linewidth=0.8, zorder=1)
        if dz:
            _, rays = _damping_sector(ax, dz[0].lower, dz[0].upper, reach)
        # only the poles inside the panel (and a marker's width around it): the ones outside are
        # clipped anyway, and each one drawn is an element of the SVG
        x, y, k = ev.real.ravel(), ev.imag.ravel(), kk.ravel()
        mx, my = 0.03 * (xl[1] - xl[0]), 0.03 * (yl[1] - yl[0])
        seen = (x >= xl[0] - mx) & (x <= xl[1] + mx) & (y >= yl[0] - my) & (y <= yl[1] + my)
        sc = ax.scatter(
            x[seen],
            y[seen],
            c=k[seen],
            norm=norm,
            cmap=COLORMAP,
            s=size,
            marker="o",
            linewidths=0,
            zorder=2,
            rasterized=ax is not axes[0],  # overview clouds as an image inside the SVG (small, fast)
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
    return sc, rays


def _panel_titles(ax_d, ax_n, ax_a, limits, cond, k_top, gains):
    """Each overview panel boxes the panel before it; the titles say which."""
    from matplotlib.patches import Rectangle

    for ax, lim in ((ax_n, limits[0]), (ax_a, limits[1])):
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


def _annotate_chosen(ax_d, design, i, chosen_sp):
    """The chosen short-period pair's value and damping, pointing at its upper root."""
    zeta_eq = float(design.chosen.damping_ratio("equivalent")[i])
    zeta_mod = float(design.chosen.damping_ratio("modal")[i])
    if not np.all(np.isfinite(chosen_sp)):
        return
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


def _marker(marker, size, label, **kw):
    from matplotlib.lines import Line2D

    return Line2D([], [], linestyle="none", marker=marker, markersize=size, label=label, **kw)


def _locus_legend(cond, dz, rays):
    """The legend below the panels: the pole marks, the damping sector and its rays, the colour bar's marks."""
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles = [
        _marker("o", 5, "closed-loop poles over the sweep (colour: K)", color=matplotlib_mid_colour()),
        _marker("x", 7, "open-loop poles (K = 0)", markeredgewidth=1.5, color=PALETTE["ink"]),
        _marker("D", 7, f"poles at the chosen K = {cond.chosen_gain:.4g} s", markerfacecolor="none",
                markeredgewidth=1.5, color=PALETTE["secondary"]),
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
    return handles


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


__all__ = ["root_locus"]
