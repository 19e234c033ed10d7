"""The loop-response plot: gain and phase of ``L(jw)`` at the chosen gain, with the margins.

The look (docs/plots.md):

* the frequency range comes from the loop: a decade below and above the crossings that set
  the reported margins and the bare short-period frequency (inside the case's frequency
  range), not a fixed 1e-3..1e3 rad/s; crossings outside it are counted in a note and left
  to design.json;
* the required margins are pale keep-out strips about the critical levels (0 dB plus and
  minus the required gain margin, judged up and down; -180 deg (mod 360) plus and minus the
  required phase margin), so a crossing inside a strip is visibly short of the requirement;
* each reported margin is a shaded distance between the curve and the critical level with
  a two-headed arrow and a tag naming it, at the crossing that sets it; every other crossing
  in view is a small grey dot without a value (it is not a margin);
* the headline numbers are one status line under the title; there is no box beside the axes;
* an unstable closed loop gets no margins: the status line and the axes say
  "closed loop unstable: no margins".

Nothing is computed here: the curve, its range and every margin drawn come from a
:class:`damper.analysis.loop_curves.LoopCurve` (the same numbers as design.json).
"""

from __future__ import annotations

import numpy as np

from ..style import LINES, PALETTE, _criteria, _figure, _fmt_band, _log_x, _render, _short_log_labels

#: Half-width of a shaded margin column, decades.
COLUMN_DECADES = 0.035
MARGIN_COLOUR = PALETTE["tertiary"]
#: Characters of the status line before it wraps (between its parts).
STATUS_WIDTH = 130
OTHER_COLOUR = "#8a8a8a"


def loop_response_plot(case, curve, stem):
    """Loop-response plot of one condition at one gain (exact delay); in the ``--figures`` formats.

    Parameters
    ----------
    case : Case
        For the title and the required margins.
    curve : LoopCurve
        :func:`damper.analysis.loop_curves.loop_curve` of the condition at the gain.
    stem : str or path
        Output path without extension.

    Returns
    -------
    list of str
    """
    return _render(_draw_bode, stem, case, curve)


def _interp_log(w, y, wq):
    return float(np.interp(np.log10(wq), np.log10(w), y))


def _fmt(v, fmt, unit, none):
    return f"{v:{fmt}} {unit}".strip() if np.isfinite(v) else none


def _required(case, name, unit):
    reqs = [c for c in _criteria(case, name) if np.isfinite(c.lower) or np.isfinite(c.upper)]
    return reqs[0] if reqs else None, (f" (required {_fmt_band(reqs[0].lower, reqs[0].upper, unit)})" if reqs else "")


def status_line(case, b) -> str:
    """The headline numbers under the title (the same values as design.json)."""
    head = f"K = {b.gain_s:.4g} s"
    if b.per_unit_gain:
        return (f"{head}: the damper is off, so there is no loop and no margins; "
                "drawn: L per unit gain (K = 1 s), for its shape only")
    if not b.stable:
        return f"{head}  |  closed loop unstable: no margins"
    _, g_req = _required(case, "gain_margin", "dB")
    _, p_req = _required(case, "phase_margin", "deg")
    _, d_req = _required(case, "delay_margin", "s")
    parts = [
        head,
        "closed loop stable",
        "gain margin " + _fmt(b.gain_margin_db, ".1f", "dB", "unbounded, no phase crossing below 0 dB") + g_req,
        "phase margin " + _fmt(b.phase_margin_deg, ".1f", "deg", "unbounded, |L| < 1 everywhere") + p_req,
        "delay margin " + _fmt(b.delay_margin_s, ".3g", "s", "unbounded") + d_req,
        "disk margin alpha " + _fmt(b.disk_margin, ".2f", "", "none"),
    ]
    if np.isfinite(b.gain_margin_low_db):
        parts.insert(3, "downward gain margin " + _fmt(b.gain_margin_low_db, ".1f", "dB", ""))
    lines, line = [], ""
    for part in parts:  # wrapped between parts, never inside one
        if line and len(line) + len(part) + 5 > STATUS_WIDTH:
            lines.append(line)
            line = ""
        line = f"{line}  |  {part}" if line else part
    return "\n".join(lines + [line])


def _critical_levels(pmin, pmax):
    lo_k = int(np.floor((pmin + 180.0) / 360.0))
    hi_k = int(np.ceil((pmax + 180.0) / 360.0))
    return [-180.0 + 360.0 * k for k in range(lo_k, hi_k + 1) if pmin - 1.0 <= -180.0 + 360.0 * k <= pmax + 1.0]


def _keep_out(case, ax_g, ax_p, levels):
    """Pale strips where the curve must not be at a crossing: the required margins."""
    g_req, _ = _required(case, "gain_margin", "dB")
    p_req, _ = _required(case, "phase_margin", "deg")
    style = {"facecolor": PALETTE["limit"], "alpha": 0.10, "edgecolor": "none", "zorder": 0}
    handles = []
    if g_req is not None and np.isfinite(g_req.lower) and g_req.lower > 0:
        h = ax_g.axhspan(-g_req.lower, g_req.lower, **style)
        handles.append((h, f"within the required gain margin ({g_req.lower:.3g} dB) of 0 dB"))
    if p_req is not None and np.isfinite(p_req.lower) and p_req.lower > 0:
        for level in levels:
            h = ax_p.axhspan(level - p_req.lower, level + p_req.lower, **style)
        if levels:
            handles.append((h, f"within the required phase margin ({p_req.lower:.3g} deg) of -180 deg"))
    return handles


def _margin_mark(ax, w, y_curve, y_level, text, side):
    """A reported margin: a shaded distance from the curve to the critical level, an arrow and a tag."""
    lo, hi = w * 10.0**-COLUMN_DECADES, w * 10.0**COLUMN_DECADES
    ax.fill_between([lo, hi], [y_curve] * 2, [y_level] * 2, color=MARGIN_COLOUR, alpha=0.28, linewidth=0, zorder=2)
    ax.annotate("", xy=(w, y_level), xytext=(w, y_curve), zorder=5,
                arrowprops={"arrowstyle": "<|-|>", "color": MARGIN_COLOUR, "linewidth": 1.3, "shrinkA": 0, "shrinkB": 0,
                            "mutation_scale": 9})
    ax.plot([w], [y_curve], marker="o", markersize=6.5, color=MARGIN_COLOUR, markeredgecolor="white", zorder=6,
            linestyle="none")
    ax.annotate(text, xy=(w * 10.0 ** (side * 2.2 * COLUMN_DECADES), 0.5 * (y_curve + y_level)),
                ha="left" if side > 0 else "right", va="center", fontsize=8.2, color=PALETTE["ink"], zorder=7,
                bbox={"boxstyle": "larrow,pad=0.25" if side > 0 else "rarrow,pad=0.25", "fc": "white",
                      "ec": MARGIN_COLOUR, "linewidth": 1.0})


def _side(w, lo, hi):
    """+1: tag to the right of the mark, -1: to the left (whichever side has more room, in decades)."""
    return 1 if np.log10(hi / w) >= np.log10(w / lo) else -1


def _other_crossings(ax_g, ax_p, b, lo, hi):
    """Every crossing in view that does not set a reported margin: a grey dot, no value."""
    w = b.frequency_rad_s
    set_by = {b.gain_crossover_rad_s, b.phase_crossover_rad_s, b.phase_crossover_low_rad_s} if b.stable else set()
    shown = [0, 0]
    for wc, _ in b.gain_crossings_rad_s_deg:
        if lo <= wc <= hi and not any(np.isclose(wc, x) for x in set_by):
            ax_g.plot([wc], [0.0], marker="o", markersize=4.5, color=OTHER_COLOUR, linestyle="none", zorder=4)
            ax_p.plot([wc], [_interp_log(w, b.phase_deg, wc)], marker="o", markersize=4.5, color=OTHER_COLOUR,
                      linestyle="none", zorder=4)
            shown[0] += 1
    for wp, _ in b.phase_crossings_rad_s_db:
        if lo <= wp <= hi and wp > 0 and not any(np.isclose(wp, x) for x in set_by):
            ax_g.plot([wp], [_interp_log(w, b.gain_db, wp)], marker="D", markersize=4, color=OTHER_COLOUR,
                      linestyle="none", zorder=4)
            ax_p.plot([wp], [_interp_log(w, b.phase_deg, wp)], marker="D", markersize=4, color=OTHER_COLOUR,
                      linestyle="none", zorder=4)
            shown[1] += 1
    return shown


def _reported_margins(ax_g, ax_p, b, lo, hi):
    """The reported margins (stable loop only), each at the crossing that sets it."""
    w = b.frequency_rad_s
    if not b.stable or b.per_unit_gain:
        return 0
    drawn = 0
    if np.isfinite(b.gain_crossover_rad_s) and np.isfinite(b.phase_margin_signed_deg):
        wc = b.gain_crossover_rad_s
        ph = _interp_log(w, b.phase_deg, wc)
        ref = ph - b.phase_margin_signed_deg  # the -180 deg (mod 360) level the margin is measured from
        _margin_mark(ax_p, wc, ph, ref, f"phase margin {b.phase_margin_deg:.1f} deg\nat {wc:.3g} rad/s",
                     _side(wc, lo, hi))
        drawn += 1
    for wp, value, name in ((b.phase_crossover_rad_s, b.gain_margin_db, "gain margin"),
                            (b.phase_crossover_low_rad_s, b.gain_margin_low_db, "downward gain margin")):
        if np.isfinite(wp) and np.isfinite(value):
            g = _interp_log(w, b.gain_db, wp) if wp > w[0] else float(b.gain_db[0])
            _margin_mark(ax_g, max(wp, w[0]), g, 0.0, f"{name} {value:.1f} dB\nat {wp:.3g} rad/s", _side(wp, lo, hi))
            drawn += 1
    return drawn


def _outside_note(b, lo, hi):
    """Crossings outside the drawn range, counted (their values are in design.json)."""
    lo, hi = lo * (1 - 1e-9), hi * (1 + 1e-9)
    out_g = [wc for wc, _ in b.gain_crossings_rad_s_deg if not lo <= wc <= hi]
    out_p = [(wp, gm) for wp, gm in b.phase_crossings_rad_s_db if not lo <= wp <= hi and wp > 0]
    if not out_g and not out_p:
        return ""
    parts = []
    if out_p:
        ws = [wp for wp, _ in out_p]
        depth = min(abs(gm) for _, gm in out_p)
        parts.append(f"{len(out_p)} phase crossing{'s' if len(out_p) > 1 else ''} at {min(ws):.3g}-{max(ws):.3g} rad/s "
                     f"(|L| at least {depth:.0f} dB from 0 dB there)" if len(ws) > 1 else
                     f"1 phase crossing at {ws[0]:.3g} rad/s (|L| {depth:.0f} dB from 0 dB there)")
    if out_g:
        parts.append(f"{len(out_g)} gain crossing{'s' if len(out_g) > 1 else ''} at "
                     + ", ".join(f"{x:.3g}" for x in out_g) + " rad/s")
    return "Outside the drawn range: " + "; ".join(parts) + ". Every crossing is listed in design.json."


def _phase_limits(b):
    pmin, pmax = float(np.nanmin(b.phase_deg)), float(np.nanmax(b.phase_deg))
    if b.stable and np.isfinite(b.gain_crossover_rad_s) and np.isfinite(b.phase_margin_signed_deg):
        ref = _interp_log(b.frequency_rad_s, b.phase_deg, b.gain_crossover_rad_s) - b.phase_margin_signed_deg
        pmin, pmax = min(pmin, ref), max(pmax, ref)
    if not _critical_levels(pmin, pmax):  # keep the nearest -180 deg (mod 360) level in view
        near = -180.0 + 360.0 * round((0.5 * (pmin + pmax) + 180.0) / 360.0)
        pmin, pmax = min(pmin, near), max(pmax, near)
    return pmin, pmax


def _axes_setup(ax_g, ax_p, b, lo, hi, pmin, pmax):
    from matplotlib.ticker import MultipleLocator

    finite_g = b.gain_db[np.isfinite(b.gain_db)]
    g_lo = max(float(finite_g.min()), -200.0) if finite_g.size else -60.0
    g_hi = max(float(finite_g.max()), 0.0)
    pad = 0.08 * max(g_hi - g_lo, 20.0)
    ax_g.set_ylim(min(g_lo, -10.0) - pad, g_hi + pad)
    ax_p.yaxis.set_major_locator(MultipleLocator(180.0 if pmax - pmin > 540 else 45.0 if pmax - pmin < 200 else 90.0))
    ppad = 0.08 * max(pmax - pmin, 90.0)
    ax_p.set_ylim(pmin - ppad, pmax + ppad)
    ax_g.set_xlim(lo, hi)
    ax_g.set_ylabel("gain |L| (dB)")
    ax_p.set_ylabel("phase of L (deg)")
    ax_p.set_xlabel("frequency (rad/s)")
    for ax in (ax_g, ax_p):
        _log_x(ax)
    _short_log_labels(ax_p.xaxis, lo, hi)
    ax_g.tick_params(which="both", labelbottom=False)


def _draw_bode(case, b):
    import textwrap

    name = b.condition
    w = b.frequency_rad_s
    lo, hi = float(w[0]), float(w[-1])
    fig = _figure(10.5, 7.4)
    gs = fig.add_gridspec(2, 1, left=0.085, right=0.97, top=0.83, bottom=0.235, hspace=0.08)
    ax_g = fig.add_subplot(gs[0])
    ax_p = fig.add_subplot(gs[1], sharex=ax_g)
    ax_g.plot(w, b.gain_db, color=PALETTE["primary"], linewidth=1.8, zorder=3)
    ax_p.plot(w, b.phase_deg, color=PALETTE["secondary"], linewidth=1.8, zorder=3)
    pmin, pmax = _phase_limits(b)
    levels = _critical_levels(pmin, pmax)
    ax_g.axhline(0.0, **LINES["critical"], zorder=1)
    for level in levels:
        ax_p.axhline(level, **LINES["critical"], zorder=1)
    keep = [] if b.per_unit_gain else _keep_out(case, ax_g, ax_p, levels)
    drawn = _reported_margins(ax_g, ax_p, b, lo, hi)
    others = _other_crossings(ax_g, ax_p, b, lo, hi)
    _axes_setup(ax_g, ax_p, b, lo, hi, pmin, pmax)
    if not b.stable and not b.per_unit_gain:
        ax_g.text(0.5, 0.5, "closed loop unstable: no margins", transform=ax_g.transAxes, ha="center", va="center",
                  fontsize=13, color=PALETTE["limit"], bbox={"boxstyle": "round,pad=0.4", "fc": "white",
                                                              "ec": PALETTE["limit"]}, zorder=8)
    _legend(fig, keep, drawn, others, b)
    notes = [n for n in (_outside_note(b, lo, hi), _range_note(b, lo, hi)) if n]
    fig.text(0.085, 0.02, "\n".join(textwrap.fill(n, 150) for n in notes), fontsize=7.8, va="bottom",
             color=PALETTE["ink"])
    fig.suptitle(f"{name}: loop response L(jw), loop broken at the actuator input", fontsize=12, x=0.085,
                 ha="left", y=0.975)
    fig.text(0.085, 0.925, status_line(case, b), fontsize=8.8, va="top", color=PALETTE["ink"],
             fontweight="bold")
    delay = f"exact {b.delay_s * 1e3:.3g} ms delay (no Pade)" if b.delay_s > 0 else "no delay in the loop"
    fig.text(0.085, 0.865, f"{case.title}  |  {delay}  |  values as in design.json", fontsize=8.2,
             color=PALETTE["ink"])
    return fig


def _range_note(b, lo, hi):
    sets = [b.gain_crossover_rad_s, b.phase_crossover_rad_s, b.phase_crossover_low_rad_s]
    what = "the crossings that set the margins and " if any(np.isfinite(x) for x in sets) else ""
    if not b.stable and b.gain_crossings_rad_s_deg:
        what = "the gain crossings and "
    return (f"Frequency range {lo:.3g}-{hi:.3g} rad/s: a decade beyond {what}the "
            f"bare short-period frequency ({b.short_period_rad_s:.3g} rad/s).")


def _legend(fig, keep, drawn, others, b):
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    h = [Line2D([], [], color=PALETTE["primary"], linewidth=1.8, label="gain |L|"),
         Line2D([], [], color=PALETTE["secondary"], linewidth=1.8, label="phase of L"),
         Line2D([], [], **LINES["critical"], label="0 dB and -180 deg (mod 360)")]
    h += [Patch(facecolor=PALETTE["limit"], alpha=0.10, label=label) for _, label in keep]
    if drawn:
        h.append(Patch(facecolor=MARGIN_COLOUR, alpha=0.4, label="reported margin, at the crossing that sets it"))
    what = "of an unstable loop (not a margin)" if not b.stable else "not setting a margin (in design.json)"
    for n, marker, kind in ((others[0], "o", "gain crossing |L| = 1"), (others[1], "D", "phase crossing -180 deg")):
        if n:
            h.append(Line2D([], [], marker=marker, color=OTHER_COLOUR, linestyle="none", markersize=4.5,
                            label=f"{kind}, {what}"))
    fig.legend(handles=h, loc="upper left", bbox_to_anchor=(0.08, 0.17), ncol=3, frameon=False, fontsize=8)


__all__ = ["loop_response_plot", "status_line"]
