"""The schedule's maps: closed-loop damping and smallest margin over the envelope under the
scheduled gain (split from :mod:`damper.output.figures.schedule`, which draws the gain plot and
writes every schedule figure)."""

from __future__ import annotations

import numpy as np

from ..style import COLORMAP, PALETTE
from .schedule import DISPLAY, _FAIL_RING, _criterion, _draw_outline, _figure, _outline_tas, _title, _verdict


# ---------------------------------------------------------------------------------
# 2. maps over altitude x true airspeed
# ---------------------------------------------------------------------------------
def _triangulation(env, v, h):
    """Delaunay triangulation of points (v m/s, h m), drawn in (m/s, km); triangles outside the envelope masked.

    The triangulation is made in coordinates scaled to the unit square, so the very different
    spans of speed and altitude do not give sliver triangles.
    """
    from matplotlib.tri import Triangulation

    if v.size < 3 or np.ptp(v) <= 0 or np.ptp(h) <= 0:
        return None
    try:
        tri = Triangulation((v - v.min()) / np.ptp(v), (h - h.min()) / np.ptp(h))
        tri = Triangulation(v, h * 1e-3, triangles=tri.triangles)
    except (ValueError, RuntimeError):
        return None
    if env is not None:
        cv = v[tri.triangles].mean(1)
        ch = h[tri.triangles].mean(1)
        tri.set_mask(~env.inside(ch, cv, tol=1e-6))
    return tri


def _unique_points(v, h, z):
    key = np.round(np.column_stack([v, h]), 6)
    _, idx = np.unique(key, axis=0, return_index=True)
    idx = np.sort(idx)
    return v[idx], h[idx], z[idx]


def _iso_lines(ax, env, sch, h_plot):
    """The schedule's breakpoints drawn over the (true airspeed, altitude) map, inside the envelope."""
    if env is None:
        return
    lo, hi = env.speed_limits(h_plot)
    style = dict(color=PALETTE["critical"], linewidth=0.8, linestyle=(0, (1, 2)), zorder=2)
    for var, bps in zip(sch.variables, sch.breakpoints):
        for b in bps:
            if var == "altitude":
                lo_b, hi_b = env.speed_limits(np.array([b]))
                if np.isfinite(lo_b[0]):
                    ax.plot([lo_b[0], hi_b[0]], [b * 1e-3, b * 1e-3], **style)
                continue
            v = env.airspeed_for(var, np.full(h_plot.shape, b), h_plot)
            ok = (v >= lo * (1 - 1e-9)) & (v <= hi * (1 + 1e-9))
            if ok.any():
                ax.plot(np.where(ok, v, np.nan), h_plot * 1e-3, **style)


def _map_figure(case, result, env, values, *, title, cbar_label, limits, undefined_label, undefined_means, unit=""):
    """One panel per configuration: verification points coloured by `values`, limits as contours.

    `limits`: list of (value, words, linestyle); `undefined_means`: "met" (NaN drawn as the top of the
    scale for contouring) or "failed".
    """
    from matplotlib.colors import Normalize

    ver = result.verification
    pts = ver.points
    conf = np.asarray(pts.configuration, int)
    names = result.configurations or tuple(f"configuration {i}" for i in range(int(conf.max()) + 1))
    n = len(names)
    ncol = min(n, 3)
    nrow = int(np.ceil(n / ncol))
    z = np.asarray(values, float)
    zmin, zmax = _colour_range(z, limits)
    frame = _map_frame(pts, env)
    w = max(0.6 + 3.9 * ncol + 1.1, 9.4)  # room for the title and legend with a single panel
    fig_h = 1.75 + 3.6 * nrow
    fig = _figure(w, fig_h)
    gs = fig.add_gridspec(nrow, ncol + 1, width_ratios=[1.0] * ncol + [0.06], left=0.75 / w, right=1.0 - 1.25 / w,
                          top=1.0 - 0.95 / fig_h, bottom=1.0 / fig_h, wspace=0.12, hspace=0.3)
    panel = {"env": env, "frame": frame, "norm": Normalize(vmin=zmin, vmax=zmax), "z_range": (zmin, zmax),
             "limits": limits, "undefined_means": undefined_means, "unit": unit, "contours": {}, "undefined": False}
    sc = None
    for ci, name in enumerate(names):
        r, c = divmod(ci, ncol)
        ax = fig.add_subplot(gs[r, c])
        sc = _configuration_panel(ax, result, conf == ci, z, name, panel)
        if r == nrow - 1 or ci + ncol >= n:
            ax.set_xlabel("true airspeed (m/s)")
        else:
            ax.tick_params(labelbottom=False)
        if c == 0:
            ax.set_ylabel("altitude (km, geopotential)")
        else:
            ax.tick_params(labelleft=False)
    cax = fig.add_subplot(gs[:, ncol])
    cb = fig.colorbar(sc, cax=cax)
    cb.set_label(cbar_label)
    _colour_bar_limits(cax, limits, zmin, zmax, unit)
    handles = _map_legend(result, panel, undefined_label)
    fig.legend(handles=handles, loc="lower left", ncol=3 if ncol > 1 else 2, fontsize=7.0,
               bbox_to_anchor=(0.005, 0.0), frameon=True)
    _title(fig, title, case, _verdict(result))
    return fig


def _colour_range(z, limits):
    """(low, high) of the colour scale: the finite values, widened when flat; a limit just beyond
    the values joins the scale (its line is then drawn on the colour bar)."""
    fin = np.isfinite(z)
    if fin.any():
        zmin, zmax = float(np.min(z[fin])), float(np.max(z[fin]))
    else:
        zmin, zmax = 0.0, 1.0
    if zmax - zmin < 1e-6 * max(1.0, abs(zmax)):
        zmin, zmax = zmin - 0.05 * max(abs(zmin), 1.0), zmax + 0.05 * max(abs(zmax), 1.0)
    span = zmax - zmin
    for lim, _, _ in limits:
        if np.isfinite(lim) and zmin - 0.3 * span <= lim < zmin:
            zmin = float(lim) - 0.02 * span
        elif np.isfinite(lim) and zmax < lim <= zmax + 0.3 * span:
            zmax = float(lim) + 0.02 * span
    return zmin, zmax


def _map_frame(pts, env) -> dict:
    """The envelope outline (or None), the axis limits (m/s, km) and the altitudes of the iso-lines."""
    v_all = np.asarray(pts.airspeed, float)
    h_all = np.asarray(pts.altitude, float)
    outline = _outline_tas(env) if env is not None else None
    vx = np.concatenate([v_all, outline[0]]) if outline is not None else v_all
    hx = np.concatenate([h_all, outline[1]]) if outline is not None else h_all
    vpad = 0.04 * max(float(np.ptp(vx)), 1.0)
    hpad = 0.04 * max(float(np.ptp(hx)), 100.0)
    return {
        "v": v_all, "h": h_all, "outline": outline,
        "xlim": (float(np.min(vx)) - vpad, float(np.max(vx)) + vpad),
        "ylim": ((float(np.min(hx)) - hpad) * 1e-3, (float(np.max(hx)) + hpad) * 1e-3),
        "h_plot": np.linspace(env.altitude[0], env.altitude[1], 121) if env is not None else None,
    }


def _configuration_panel(ax, result, m, z, name, panel):
    """One configuration's points (mask `m`): outline, iso-lines, limit contours, points, failures, title."""
    ver = result.verification
    env, frame = panel["env"], panel["frame"]
    v, h, zz = frame["v"][m], frame["h"][m], z[m]
    outline = frame["outline"]
    if outline is not None:
        ax.fill(outline[0], outline[1] * 1e-3, facecolor="#f4f4f4", edgecolor="none", zorder=0)
        _draw_outline(ax, (outline[0], outline[1] * 1e-3))
    if env is not None:
        _iso_lines(ax, env, result.schedule, frame["h_plot"])
    if env is not None and m.sum() >= 3:
        _limit_contours(ax, env, v, h, zz, panel)
    ok = np.isfinite(zz)
    sc = ax.scatter(v[ok], h[ok] * 1e-3, c=zz[ok], cmap=COLORMAP, norm=panel["norm"], s=24, marker="o",
                    edgecolors=PALETTE["ink"], linewidths=0.35, zorder=4)
    if (~ok).any():
        panel["undefined"] = True
        ax.scatter(v[~ok], h[~ok] * 1e-3, marker="^", s=26, facecolors="white", edgecolors=PALETTE["ink"],
                   linewidths=0.9, zorder=4)
    fm = ~np.asarray(ver.passed, bool)[m]
    if fm.any():
        ax.scatter(v[fm], h[fm] * 1e-3, s=95, zorder=5, **_FAIL_RING)
    nf = int(fm.sum())
    head = f"{name}: {m.sum()} points" + (f", {nf} fail" if nf else ", all pass")
    if nf:
        binds = [b for b, f in zip(np.asarray(ver.binding, dtype=object)[m], fm) if f]
        kinds, counts = np.unique(np.asarray(binds, dtype=str), return_counts=True)
        order = np.argsort(-counts)
        head += "\nbinding where failing: " + ", ".join(f"{kinds[k]} {counts[k]}" for k in order[:3])
    ax.set_title(head, fontsize=9 if not nf else 8.5)
    ax.set_xlim(*frame["xlim"])
    ax.set_ylim(*frame["ylim"])
    return sc


def _limit_contours(ax, env, v, h, zz, panel):
    """Contours of the limits on a triangulation of one configuration's points (inside the envelope)."""
    zmin, zmax = panel["z_range"]
    unit = panel["unit"]
    vu, hu, zu = _unique_points(v, h, zz)
    if panel["undefined_means"] == "met":
        zc = np.where(np.isfinite(zu), zu, zmax + 10.0 * max(zmax - zmin, 1.0))
    else:
        zc = zu
    tri = _triangulation(env, vu, hu)
    if tri is None:
        return
    bad_t = ~np.isfinite(zc[tri.triangles]).all(1)
    if tri.mask is not None:
        bad_t |= tri.mask
    tri.set_mask(bad_t)
    zc = np.where(np.isfinite(zc), zc, 0.0)
    for lim, words, ls in panel["limits"]:
        if not np.isfinite(lim):
            continue
        zt = zc[tri.triangles][~bad_t] if (~bad_t).any() else np.array([])
        if zt.size == 0 or not (zt.min() < lim < zt.max()):
            continue
        try:
            cs = ax.tricontour(tri, zc, levels=[lim], colors=[PALETTE["limit"]], linewidths=1.5,
                               linestyles=[ls], zorder=3)
            ax.clabel(cs, fmt={lim: f"{lim:.3g}{(' ' + unit) if unit else ''}"}, fontsize=7, inline=True)
            panel["contours"][words] = ls
        except (ValueError, RuntimeError):
            pass


def _colour_bar_limits(cax, limits, zmin, zmax, unit):
    """Each limit on the colour bar, or a note at its end when it lies beyond the scale."""
    for lim, words, ls in limits:
        if np.isfinite(lim) and zmin <= lim <= zmax:
            cax.axhline(lim, color="white", linewidth=3.2, zorder=5)
            cax.axhline(lim, color=PALETTE["limit"], linewidth=1.8, linestyle=ls, zorder=6)
    for lim, words, ls in limits:
        if np.isfinite(lim) and not (zmin <= lim <= zmax):
            below = lim < zmin
            cax.text(0.5, -0.015 if below else 1.015,
                     f"limit {lim:.3g}{(' ' + unit) if unit else ''}\n({'below' if below else 'above'} scale)",
                     transform=cax.transAxes, ha="center", va="top" if below else "bottom", fontsize=7,
                     color=PALETTE["limit"])


def _map_legend(result, panel, undefined_label):
    """The legend under the panels: points, failures, undefined values, limits, envelope and breakpoints."""
    from matplotlib.lines import Line2D

    unit = panel["unit"]
    handles = [
        Line2D([], [], linestyle="none", marker="o", markerfacecolor=_mid_colour(), markeredgecolor=PALETTE["ink"],
               markersize=5, label="verification point (colour: value)"),
        Line2D([], [], linestyle="none", marker="o", markerfacecolor="none", markeredgecolor=PALETTE["limit"],
               markersize=9, markeredgewidth=1.4, label="fails a requirement (any)"),
    ]
    if panel["undefined"]:
        handles.append(Line2D([], [], linestyle="none", marker="^", markerfacecolor="white",
                              markeredgecolor=PALETTE["ink"], markersize=6, label=undefined_label))
    for lim, words, ls in panel["limits"]:
        if np.isfinite(lim):
            drawn = words in panel["contours"]
            handles.append(Line2D([], [], color=PALETTE["limit"], linewidth=1.5, linestyle=ls,
                                  label=f"{words} {lim:.3g}{(' ' + unit) if unit else ''}"
                                        + ("" if drawn else " (not crossed)")))
    if panel["frame"]["outline"] is not None:
        handles.append(Line2D([], [], color=PALETTE["ink"], linewidth=1.2, label="flight envelope"))
        words = " and ".join(DISPLAY[v][0] for v in result.schedule.variables)
        handles.append(Line2D([], [], color=PALETTE["critical"], linewidth=0.8, linestyle=(0, (1, 2)),
                              label=f"breakpoints ({words})"))
    else:
        handles.append(Line2D([], [], linestyle="none", label="no envelope: points are the conditions (no contours)"))
    return handles


def _mid_colour():
    from matplotlib import colormaps

    return colormaps[COLORMAP](0.55)


def _draw_damping_map(case, result, env):
    band = _criterion(case, "damping_ratio")
    measure = case.requirements.damping_measure
    limits = []
    if band is not None:
        limits = [(band[0], "damping band lower limit", (0, (6, 3))), (band[1], "damping band upper limit", "-.")]
    words = "equivalent-system" if measure == "equivalent" else "closed-loop modal"
    return _map_figure(
        case, result, env, result.verification.damping_ratio,
        title=f"Short-period damping ratio with the schedule ({words}, the measure the requirement judges)",
        cbar_label=f"damping ratio ({measure})",
        limits=limits,
        undefined_label="no damping ratio (divergent short period)",
        undefined_means="failed",
    )


def _draw_margin_map(case, result, env):
    band = _criterion(case, "gain_margin")
    limits = [] if band is None else [(band[0], "gain-margin requirement", (0, (6, 3)))]
    return _map_figure(
        case, result, env, result.verification.smallest_margin_db,
        title="Smallest gain margin with the schedule (up or down, loop broken at the actuator, exact delay)",
        cbar_label="smallest gain margin (dB)",
        limits=limits,
        undefined_label="no phase crossing: gain margin unbounded",
        undefined_means="met",
        unit="dB",
    )
