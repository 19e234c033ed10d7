"""Gain-schedule plots: the gain table and maps of what the schedule achieves over the envelope.

:func:`schedule_plots` takes the case and the
:class:`~damper.analysis.schedule.ScheduleResult` of
:func:`damper.analysis.schedule.design_schedule` and writes, into ``<out_dir>/plots/``:

``schedule-gain.png`` / ``.svg``
    1-D schedule: the gain K (s) against the schedule variable (breakpoints as markers, the
    interpolated law drawn densely (interpolated by the analysis), clamping beyond the table
    dotted), the verification points on it (marker by configuration, failing points ringed),
    and below it the worst normalised slack at every verification point.
    2-D schedule: a heat map of the bilinearly interpolated gain over (speed variable,
    altitude) with the breakpoint grid, every node's gain written on it and the envelope
    outline; beside it one line of K against the speed variable per altitude breakpoint.
``schedule-damping-map.png`` / ``.svg``
    Achieved short-period damping ratio (the measure the requirements judge) at the
    verification points over altitude (km) x true airspeed (m/s), one panel per
    configuration, with contour lines at the damping band limits.
``schedule-margin-map.png`` / ``.svg``
    The smallest gain margin (dB, up or down) at the same points, with the contour at the
    gain-margin requirement.

Every map rings the verification points that fail any requirement, draws the envelope
outline (:func:`damper.analysis.envelope.speed_limits`) and the breakpoints as iso-lines.
Contours are interpolated linearly on a triangulation of the verification points (triangles
outside the envelope dropped); the points carry the computed values.

Nothing here computes a measure: values come from the verification, and the gain between the
breakpoints from :class:`damper.analysis.schedule_figures.ScheduleFigureInputs`. Drawing-time
geometry only: the envelope's speed limits.

Visual identity: the palette of :mod:`damper.output.style`; colour scales ``cividis``
(monotone in lightness, readable with the common colour-vision deficiencies and in
greyscale); configurations differ by marker shape as well as colour; failures are ringed.
matplotlib is imported inside the functions (Agg canvas, no pyplot state).
"""

from __future__ import annotations

import os

import numpy as np

from ..style import COLORMAP, PALETTE, _RC, _figure, _save
from .kinds import FigureKind

#: The family's figures (``plots/<stem>.png`` / ``.svg``); the captions are the report's.
GAIN = FigureKind("schedule-gain", "schedule gain")
DAMPING_MAP = FigureKind("schedule-damping-map", "schedule damping map")
MARGIN_MAP = FigureKind("schedule-margin-map", "schedule margin map")
KINDS = (GAIN, DAMPING_MAP, MARGIN_MAP)

#: How each schedule / map variable is shown: (words, unit shown, factor from SI).
DISPLAY = {
    "dynamic_pressure": ("dynamic pressure", "kPa", 1e-3),
    "equivalent_airspeed": ("equivalent airspeed", "m/s", 1.0),
    "airspeed": ("true airspeed", "m/s", 1.0),
    "mach": ("Mach number", "", 1.0),
    "altitude": ("altitude", "km", 1e-3),
}
#: Configurations: marker, colour, line style (greyscale tells them apart by marker).
_CONFIG_STYLE = (
    ("o", PALETTE["primary"], "-"),
    ("s", PALETTE["secondary"], "--"),
    ("^", PALETTE["tertiary"], "-."),
    ("D", "#6a4c93", ":"),
    ("v", "#7f6000", (0, (5, 1, 1, 1))),
    ("P", "#3d3d3d", (0, (3, 1))),
)
_FAIL_RING = {"marker": "o", "facecolors": "none", "edgecolors": PALETTE["limit"], "linewidths": 1.4}


def _axis_label(var):
    words, unit, _ = DISPLAY[var]
    return f"{words} ({unit})" if unit else words


def _style(i):
    return _CONFIG_STYLE[i % len(_CONFIG_STYLE)]


def _criterion(case, name):
    for c in case.requirements.criteria:
        if c.name == name:
            return float(c.lower), float(c.upper)
    return None


def _fmt_band(band, unit=""):
    lo, hi = band
    u = f" {unit}" if unit else ""
    if np.isfinite(lo) and np.isfinite(hi):
        return f"{lo:.3g} to {hi:.3g}{u}"
    if np.isfinite(lo):
        return f">= {lo:.3g}{u}"
    return f"<= {hi:.3g}{u}"


def _outline_tas(env, n=121):
    """Envelope outline as (true airspeed m/s, altitude m): lower edge up, upper edge down."""
    h = np.linspace(env.altitude[0], env.altitude[1], n) if env.altitude[1] > env.altitude[0] else np.array(
        [env.altitude[0]]
    )
    lo, hi = env.speed_limits(h)
    ok = np.isfinite(lo) & np.isfinite(hi)
    h, lo, hi = h[ok], lo[ok], hi[ok]
    if h.size == 0:
        return None
    v = np.concatenate([lo, hi[::-1], lo[:1]])
    a = np.concatenate([h, h[::-1], h[:1]])
    return v, a


def _draw_outline(ax, xy, label="flight envelope"):
    if xy is None:
        return None
    (ln,) = ax.plot(xy[0], xy[1], color=PALETTE["ink"], linewidth=1.2, linestyle="-", zorder=2, label=label)
    return ln


def _title(fig, main, case, note=None):
    """Title at the top left; the case title and a verdict below it, wrapped to the figure width."""
    import textwrap

    width_in = fig.get_figwidth()
    height_in = fig.get_figheight()
    fig.suptitle(main, fontsize=11, x=0.01, ha="left", y=1.0 - 0.08 / height_in, va="top", color=PALETTE["ink"])
    sub = case.title if note is None else f"{case.title}  |  {note}"
    chars = max(int(width_in * 15.5), 40)  # about 15 characters per inch at 8 pt
    fig.text(0.01, 1.0 - 0.36 / height_in, "\n".join(textwrap.wrap(sub, chars)), fontsize=8, ha="left", va="top",
             color=PALETTE["critical"], linespacing=1.25)


def _verdict(result):
    ver = result.verification
    n = ver.passed.size
    nf = int(np.sum(~ver.passed))
    if nf == 0:
        return f"all {n} verification points meet every requirement"
    return f"{nf} of {n} verification points fail (ringed)"


# ---------------------------------------------------------------------------------
# 1. gain against the schedule variable
# ---------------------------------------------------------------------------------
def _draw_gain_1d(case, result, inputs):
    sch = result.schedule
    var = sch.variables[0]
    bp = np.asarray(sch.breakpoints[0], float)
    kb = np.asarray(sch.gains, float).ravel()
    xd, kd = inputs.line.x, inputs.line.gain_s
    fig = _figure(7.6, 6.6)
    gs = fig.add_gridspec(2, 1, height_ratios=(3.0, 2.0), hspace=0.08, left=0.11, right=0.97, top=0.82, bottom=0.17)
    ax = fig.add_subplot(gs[0])
    axs = fig.add_subplot(gs[1], sharex=ax)
    sx = DISPLAY[var][2]
    law_handles, bp_label = _law_line(ax, sch, xd, kd, bp, sx)
    bad = _breakpoints_1d(ax, axs, result, bp, kb, sx, bp_label)
    conf_handles, slack = _verification_1d(ax, axs, result, sx)
    ws = np.asarray(result.design.worst_slack, float).ravel()  # design slack at the breakpoints (worst over their points)
    okb = np.isfinite(ws) & (np.asarray(result.design.points).ravel() > 0)
    if ws.size == bp.size and okb.any():
        axs.scatter(bp[okb] * sx, ws[okb], marker="D", s=40, facecolors="white", edgecolors=PALETTE["chosen"],
                    linewidths=1.3, zorder=6)
    axs.axhline(0.0, color=PALETTE["limit"], linewidth=1.3, linestyle=(0, (6, 3)), zorder=2)
    _axes_1d(ax, axs, var, kd, kb, slack)
    handles = _legend_1d(law_handles, bp_label, conf_handles, bad.size == bp.size and bad.any())
    fig.legend(handles=handles, loc="lower center", ncol=3, fontsize=7.2, frameon=True, bbox_to_anchor=(0.5, 0.0))
    _title(fig, f"Gain schedule in {DISPLAY[var][0]}: {bp.size} breakpoints", case, _verdict(result))
    return fig


def _law_line(ax, sch, xd, kd, bp, sx):
    """The scheduled gain: inside the table solid, clamped ends dotted (or the fitted law); its legend entries."""
    from matplotlib.lines import Line2D

    if sch.form == "table":
        inside = (xd >= bp[0]) & (xd <= bp[-1])
        ax.plot(xd[inside] * sx, kd[inside], color=PALETTE["primary"], linewidth=1.8, zorder=3,
                label="scheduled gain (linear between breakpoints)")
        for part in (xd < bp[0], xd > bp[-1]):
            if part.any():
                ax.plot(xd[part] * sx, kd[part], color=PALETTE["primary"], linewidth=1.4, linestyle=(0, (1.5, 1.5)),
                        zorder=3)
        law_handles = [Line2D([], [], color=PALETTE["primary"], linewidth=1.8,
                              label="scheduled gain (linear between breakpoints)"),
                       Line2D([], [], color=PALETTE["primary"], linewidth=1.4, linestyle=(0, (1.5, 1.5)),
                              label="held constant beyond the table")]
        return law_handles, "breakpoint (designed gain)"
    ax.plot(xd * sx, kd, color=PALETTE["primary"], linewidth=1.8, zorder=3)
    law_handles = [Line2D([], [], color=PALETTE["primary"], linewidth=1.8,
                          label=f"K = {sch.k_ref:.3g} s x {sch.q_ref * 1e-3:.3g} kPa / q (fitted law)")]
    return law_handles, "breakpoint design gain (fit data)"


def _breakpoints_1d(ax, axs, result, bp, kb, sx, bp_label):
    """Breakpoints with their gains, the infeasible ones crossed; returns the infeasible mask."""
    ax.scatter(bp * sx, kb, marker="D", s=46, facecolors="white", edgecolors=PALETTE["chosen"], linewidths=1.4,
               zorder=6, label=bp_label)
    # infeasible breakpoints: no gain met every requirement at all their design points
    bad = ~np.asarray(result.design.feasible, bool).ravel()
    if bad.size == bp.size and bad.any():
        ax.scatter(bp[bad] * sx, kb[bad], marker="X", s=60, color=PALETTE["limit"], zorder=7,
                   label="breakpoint without a gain meeting every requirement")
    for b, k in zip(bp, kb):
        ax.annotate(f"{k:.3g} s", (b * sx, k), textcoords="offset points", xytext=(5, 7), fontsize=7.5,
                    color=PALETTE["ink"], zorder=8)
    for b in bp:
        ax.axvline(b * sx, color=PALETTE["grid"], linewidth=0.9, linestyle=(0, (4, 3)), zorder=1)
        axs.axvline(b * sx, color=PALETTE["grid"], linewidth=0.9, linestyle=(0, (4, 3)), zorder=1)
    return bad


def _verification_1d(ax, axs, result, sx):
    """Verification points per configuration (gain above, worst slack below), failures ringed."""
    from matplotlib.lines import Line2D

    ver = result.verification
    xv = np.asarray(ver.points.values[0], float)
    conf = np.asarray(ver.points.configuration, int)
    names = result.configurations or tuple(f"configuration {i}" for i in range(int(conf.max()) + 1))
    slack = np.asarray(ver.worst_slack, float)
    conf_handles = []
    for ci, name in enumerate(names):
        m = conf == ci
        if not m.any():
            continue
        mk, col, _ = _style(ci)
        # every configuration sits on the same line: alternate large hollow and small filled markers
        hollow = ci % 2 == 0
        ax.scatter(xv[m] * sx, ver.gains[m], marker=mk, s=max(62.0 - 12.0 * ci, 30.0) if hollow else 15.0,
                   facecolors="none" if hollow else col, edgecolors=col, linewidths=1.1 if hollow else 0.0,
                   zorder=4 + 0.01 * ci)
        axs.scatter(xv[m] * sx, np.clip(slack[m], -2.0, None), marker=mk, s=24 if hollow else 15.0,
                    facecolors="none" if hollow else col, edgecolors=col, linewidths=1.0 if hollow else 0.0,
                    zorder=4)
        conf_handles.append(Line2D([], [], linestyle="none", marker=mk, color=col, markersize=5,
                                   markerfacecolor="none" if hollow else col, markeredgewidth=1.1,
                                   label=f"verification point, {name}"))
    fail = ~np.asarray(ver.passed, bool)
    if fail.any():
        ax.scatter(xv[fail] * sx, ver.gains[fail], s=130, zorder=5, **_FAIL_RING)
        axs.scatter(xv[fail] * sx, np.clip(slack[fail], -2.0, None), s=90, zorder=5, **_FAIL_RING)
    return conf_handles, slack


def _axes_1d(ax, axs, var, kd, kb, slack):
    """Labels and limits; equivalent airspeed on top when the variable is the dynamic pressure."""
    ax.set_ylabel("damper gain K (s)\n(rad surface per rad/s pitch rate)")
    ax.set_ylim(bottom=0.0, top=max(float(np.nanmax(kd)), float(np.nanmax(kb))) * 1.18)
    ax.tick_params(labelbottom=False)
    axs.set_xlabel(_axis_label(var))
    axs.set_ylabel("worst slack\n(+ met, - missed)")
    if np.nanmin(slack) < -2.0:
        axs.text(0.99, 0.03, "slack below -2 drawn at -2", transform=axs.transAxes, ha="right", va="bottom",
                 fontsize=7, color=PALETTE["critical"])
    if var == "dynamic_pressure":
        from ...atmosphere import RHO0

        top = ax.secondary_xaxis(
            "top",
            functions=(lambda q: np.sqrt(np.maximum(2e3 * np.asarray(q, float) / RHO0, 0.0)),
                       lambda v: RHO0 * np.asarray(v, float) ** 2 / 2e3),
        )
        top.set_xlabel("equivalent airspeed (m/s)", fontsize=8)
        top.tick_params(labelsize=7.5)


def _legend_1d(law_handles, bp_label, conf_handles, any_bad):
    from matplotlib.lines import Line2D

    handles = law_handles + [
        Line2D([], [], linestyle="none", marker="D", markerfacecolor="white", markeredgecolor=PALETTE["chosen"],
               markersize=6, label=bp_label + " / design slack"),
        *conf_handles,
        Line2D([], [], linestyle="none", marker="o", markerfacecolor="none", markeredgecolor=PALETTE["limit"],
               markersize=9, markeredgewidth=1.4, label="fails a requirement"),
        Line2D([], [], color=PALETTE["limit"], linewidth=1.3, linestyle=(0, (6, 3)),
               label="slack 0 (requirement boundary)"),
    ]
    if any_bad:
        handles.append(Line2D([], [], linestyle="none", marker="X", color=PALETTE["limit"], markersize=7,
                              label="breakpoint: no gain meets every requirement"))
    return handles


def _draw_gain_2d(case, result, inputs):
    env = inputs.envelope
    d = _grid_2d(result, inputs.map)
    fig = _figure(11.6, 5.0)
    gs = fig.add_gridspec(1, 4, width_ratios=(1.0, 0.04, 0.17, 0.85), wspace=0.04, left=0.06, right=0.985, top=0.84,
                          bottom=0.25)
    ax = fig.add_subplot(gs[0])
    cax = fig.add_subplot(gs[1])
    axl = fig.add_subplot(gs[3])
    _gain_image(fig, ax, cax, d)
    outline_handle = _outline_2d(ax, env, d) if env is not None else None
    infeas = _nodes_2d(ax, d)
    ver, ssx, hsx = result.verification, d["ssx"], d["hsx"]
    fail = ~np.asarray(ver.passed, bool)
    ax.scatter(d["svv"] * ssx, d["hv"] * hsx, marker=".", s=6, color=PALETTE["ink"], alpha=0.55, linewidths=0,
               zorder=3)
    if fail.any():
        ax.scatter(d["svv"][fail] * ssx, d["hv"][fail] * hsx, s=60, zorder=5, **_FAIL_RING)
    ax.set_xlabel(_axis_label(d["sv"]))
    ax.set_ylabel(_axis_label("altitude"))
    ax.set_xlim(d["s_lo"] * ssx, d["s_hi"] * ssx)
    ax.set_ylim(d["h_lo"] * hsx, d["h_hi"] * hsx)
    ax.grid(False)
    ax.set_title("gain table over the envelope (node values in s)", fontsize=9)
    _k_lines(axl, inputs.map, env, d)
    ax.legend(handles=_legend_2d(outline_handle is not None, infeas.any()), loc="upper center", ncol=2, fontsize=7.2,
              bbox_to_anchor=(0.5, -0.13))
    _title(fig, f"Gain schedule in altitude and {DISPLAY[d['sv']][0]}: {d['hb'].size} x {d['sb'].size} nodes", case,
           _verdict(result))
    return fig


def _grid_2d(result, gmap) -> dict:
    """The table's nodes as [altitude, speed variable] arrays, the verification points, the drawn
    ranges (SI) and the interpolated gain on a dense grid (s, from the analysis's `gmap`)."""
    from matplotlib.colors import Normalize

    sch = result.schedule
    ver = result.verification
    ia = sch.variables.index("altitude")
    G = np.asarray(sch.gains, float)
    hs = (lambda a: a) if ia == 0 else (lambda a: a.T)  # to [i_alt, j_speed]
    d = {"ia": ia, "sv": sch.variables[1 - ia], "hb": np.asarray(sch.breakpoints[ia], float),
         "sb": np.asarray(sch.breakpoints[1 - ia], float), "G_hs": hs(G),
         "counts_hs": hs(np.asarray(result.design.points).reshape(G.shape)),
         "feas_hs": hs(np.asarray(result.design.feasible, bool).reshape(G.shape)),
         "hv": np.asarray(ver.points.values[ia], float), "svv": np.asarray(ver.points.values[1 - ia], float)}
    d["h_lo"], d["h_hi"] = gmap.altitude_range_m
    d["s_lo"], d["s_hi"] = gmap.speed_range
    d["Kd"] = gmap.gain_s
    kmin = float(min(np.nanmin(d["Kd"]), np.nanmin(G)))
    d["kmax"] = kmax = float(max(np.nanmax(d["Kd"]), np.nanmax(G)))
    d["norm"] = Normalize(vmin=kmin, vmax=kmax if kmax > kmin else kmin + 1e-6)
    d["ssx"], d["hsx"] = DISPLAY[d["sv"]][2], DISPLAY["altitude"][2]
    return d


def _gain_image(fig, ax, cax, d):
    """The interpolated gain as an image with its colour bar, and the breakpoint lines."""
    ssx, hsx = d["ssx"], d["hsx"]
    im = ax.imshow(d["Kd"], origin="lower", aspect="auto", cmap=COLORMAP, norm=d["norm"], interpolation="bilinear",
                   extent=(d["s_lo"] * ssx, d["s_hi"] * ssx, d["h_lo"] * hsx, d["h_hi"] * hsx), zorder=0)
    cb = fig.colorbar(im, cax=cax)
    cb.set_label("damper gain K (s), bilinear between nodes")
    for b in d["sb"]:
        ax.axvline(b * ssx, color="white", linewidth=0.8, alpha=0.9, zorder=1)
        ax.axvline(b * ssx, color=PALETTE["ink"], linewidth=0.6, linestyle=(0, (3, 3)), zorder=1)
    for b in d["hb"]:
        ax.axhline(b * hsx, color="white", linewidth=0.8, alpha=0.9, zorder=1)
        ax.axhline(b * hsx, color=PALETTE["ink"], linewidth=0.6, linestyle=(0, (3, 3)), zorder=1)


def _outline_2d(ax, env, d):
    """The flight envelope in (speed variable, altitude); returns its line (None when nothing to draw)."""
    ssx, hsx = d["ssx"], d["hsx"]
    h_o = np.linspace(env.altitude[0], env.altitude[1], 121)
    lo_s, hi_s = env.speed_range_in(d["sv"], h_o)
    ok = np.isfinite(lo_s) & np.isfinite(hi_s)
    if not ok.any():
        return None
    xs = np.concatenate([lo_s[ok], hi_s[ok][::-1], lo_s[ok][:1]]) * ssx
    ys = np.concatenate([h_o[ok], h_o[ok][::-1], h_o[ok][:1]]) * hsx
    ax.plot(xs, ys, color="white", linewidth=3.0, zorder=2)
    (line,) = ax.plot(xs, ys, color=PALETTE["ink"], linewidth=1.3, zorder=2, label="flight envelope")
    return line


def _nodes_2d(ax, d):
    """Nodes: designed (white diamond), copied (no envelope point: square), infeasible (cross), each
    with its gain (italic and starred when copied). Returns the infeasible mask."""
    ssx, hsx, hb, sb = d["ssx"], d["hsx"], d["hb"], d["sb"]
    Hn, Sn = np.meshgrid(hb, sb, indexing="ij")
    designed = d["counts_hs"] > 0
    ax.scatter(Sn[designed] * ssx, Hn[designed] * hsx, marker="D", s=26, facecolors="white",
               edgecolors=PALETTE["chosen"], linewidths=1.1, zorder=4, clip_on=False)
    if (~designed).any():
        ax.scatter(Sn[~designed] * ssx, Hn[~designed] * hsx, marker="s", s=26, facecolors="white",
                   edgecolors=PALETTE["chosen"], linewidths=1.0, zorder=4, clip_on=False)
    infeas = designed & ~d["feas_hs"]
    if infeas.any():
        ax.scatter(Sn[infeas] * ssx, Hn[infeas] * hsx, marker="X", s=55, color=PALETTE["limit"], zorder=5,
                   clip_on=False)
    for i in range(hb.size):
        for j in range(sb.size):
            txt = f"{d['G_hs'][i, j]:.3g}" + ("" if designed[i, j] else "*")
            # label towards the inside of the plot so edge nodes stay readable
            right = j == sb.size - 1 and sb.size > 1
            top = i == hb.size - 1 and hb.size > 1
            ax.annotate(txt, (sb[j] * ssx, hb[i] * hsx), textcoords="offset points",
                        xytext=(-5 if right else 5, -5 if top else 5), ha="right" if right else "left",
                        va="top" if top else "bottom", fontsize=7.2, color=PALETTE["ink"], zorder=6,
                        style="normal" if designed[i, j] else "italic",
                        bbox=dict(boxstyle="round,pad=0.15", facecolor="white", edgecolor="none", alpha=0.85))
    return infeas


def _k_lines(axl, gmap, env, d):
    """Right panel: K against the speed variable, one line per altitude breakpoint (dotted outside the envelope)."""
    from matplotlib import colormaps
    from matplotlib.lines import Line2D

    ssx, hsx, sb = d["ssx"], d["hsx"], d["sb"]
    cmap = colormaps[COLORMAP]
    styles = ("-", "--", "-.", ":", (0, (5, 1, 1, 1)), (0, (3, 1)))
    markers = ("o", "s", "^", "D", "v", "P", "X", "<", ">", "h")
    sdense = gmap.line_speed
    line_handles = []
    for i, h in enumerate(d["hb"]):
        col = cmap(0.05 + 0.65 * (i / max(d["hb"].size - 1, 1)))  # stop short of the pale end: visible on white
        ls, mk = styles[i % len(styles)], markers[i % len(markers)]
        kline = gmap.line_gain_s[i]
        if env is not None:
            a, b = env.speed_range_in(d["sv"], np.array([h]))
            inside = (sdense >= a[0] * (1 - 1e-9)) & (sdense <= b[0] * (1 + 1e-9))
        else:
            inside = np.ones(sdense.size, bool)
        axl.plot(sdense * ssx, kline, color=col, linewidth=0.8, linestyle=(0, (1, 2)), zorder=2)
        kin = np.where(inside, kline, np.nan)
        axl.plot(sdense * ssx, kin, color=col, linewidth=1.8, linestyle=ls, zorder=3)
        axl.scatter(sb * ssx, d["G_hs"][i], marker=mk, s=30, color=col, edgecolors=PALETTE["ink"], linewidths=0.6,
                    zorder=4)
        line_handles.append(Line2D([], [], color=col, linestyle=ls, marker=mk, markeredgecolor=PALETTE["ink"],
                                   markersize=5, linewidth=1.6, label=f"{h * hsx:.3g} km"))
    axl.set_xlabel(_axis_label(d["sv"]))
    axl.set_ylabel("damper gain K (s)")
    axl.set_ylim(bottom=0.0, top=d["kmax"] * 1.12)
    axl.set_title("K along each altitude breakpoint", fontsize=9)
    axl.legend(handles=line_handles, fontsize=7.2, loc="upper center", bbox_to_anchor=(0.5, -0.13), ncol=3,
               title="altitude breakpoint (dotted: outside the envelope at that altitude)", title_fontsize=7.2)


def _legend_2d(with_outline, any_infeasible):
    from matplotlib.lines import Line2D

    handles = [
        Line2D([], [], linestyle="none", marker="D", markerfacecolor="white", markeredgecolor=PALETTE["chosen"],
               markersize=6, label="node designed at envelope points"),
        Line2D([], [], linestyle="none", marker="s", markerfacecolor="none", markeredgecolor=PALETTE["chosen"],
               markersize=6, label="node outside the envelope: gain copied from the nearest designed node (*)"),
        Line2D([], [], linestyle="none", marker=".", color=PALETTE["ink"], markersize=5, label="verification point"),
        Line2D([], [], linestyle="none", marker="o", markerfacecolor="none", markeredgecolor=PALETTE["limit"],
               markersize=8, markeredgewidth=1.4, label="fails a requirement"),
    ]
    if with_outline:
        handles.append(Line2D([], [], color=PALETTE["ink"], linewidth=1.3, label="flight envelope"))
    if any_infeasible:
        handles.append(Line2D([], [], linestyle="none", marker="X", color=PALETTE["limit"], markersize=7,
                              label="node: no gain meets every requirement"))
    return handles


# ---------------------------------------------------------------------------------
# all of them
# ---------------------------------------------------------------------------------
def schedule_plots(case, result, out_dir, inputs):
    """Write the schedule plots of `result` into ``<out_dir>/plots/``.

    Parameters
    ----------
    case : damper.case.model.Case
    result : damper.analysis.schedule.ScheduleResult
    out_dir : path
        Run directory; the files go to its ``plots`` sub-directory.
    inputs : damper.analysis.schedule_figures.ScheduleFigureInputs
        :func:`damper.analysis.schedule_figures.schedule_figure_inputs` of `case` and `result`:
        the envelope (None: a schedule over the case's conditions, drawn without an envelope)
        and the gain interpolated between the breakpoints.

    Returns
    -------
    list of str
        Written paths: ``schedule-gain``, ``schedule-damping-map``, ``schedule-margin-map``,
        each as ``.png`` then ``.svg``.
    """
    import matplotlib

    from .schedule_maps import _draw_damping_map, _draw_margin_map

    plot_dir = os.path.join(os.fspath(out_dir), "plots")
    paths = []
    one_d = len(result.schedule.variables) == 1
    jobs = (
        (GAIN.stem, _draw_gain_1d if one_d else _draw_gain_2d),
        (DAMPING_MAP.stem, lambda c, r, i: _draw_damping_map(c, r, i.envelope)),
        (MARGIN_MAP.stem, lambda c, r, i: _draw_margin_map(c, r, i.envelope)),
    )
    with matplotlib.rc_context(_RC):
        for stem, draw in jobs:
            fig = draw(case, result, inputs)
            paths += _save(fig, os.path.join(plot_dir, stem))
    return paths


__all__ = ["DAMPING_MAP", "DISPLAY", "GAIN", "KINDS", "MARGIN_MAP", "schedule_plots"]
