"""Overlay plots of two designs (``damper compare``): each condition's damping and margins
against the gain for both runs, and both schedules over the compared points.

Run A is drawn in the primary style (solid, circles), run B in the secondary style
(dashed, squares) of :mod:`damper.output.style`; the values come computed from the caller.
"""

from __future__ import annotations

import numpy as np

from ..style import LINES, PALETTE, _plain_log_label, _render, new_figure  # the house style


def _line(ax, x, y, which, label):
    kw = dict(LINES[which])
    kw["markevery"] = max(1, len(x) // 10)
    ax.plot(x, y, label=label, **kw)


def overlay_sweep_plot(stem, title, sweep_a, sweep_b, chosen, band, labels=("A", "B")):
    """Damping ratio, gain margin and phase margin against K for two runs at one condition.

    Parameters
    ----------
    stem : str
        Output path without extension (PNG and SVG are written).
    title : str
    sweep_a, sweep_b : damper.analysis.compare_points.Sweep
        Each run's loop against the gain (s).
    chosen : tuple of (float or None)
        Each run's chosen gain, s (drawn as vertical lines).
    band : tuple of (float or None)
        The damping band (lower, upper) of run B's requirements.
    labels : tuple of str

    Returns
    -------
    list of str
        The files written.
    """
    return _render(_draw_overlay, stem, title, sweep_a, sweep_b, chosen, band, labels)


def _draw_overlay(title, sa, sb, chosen, band, labels):
    fig = new_figure(7.2, 7.0)
    axes = fig.subplots(3, 1, sharex=True)
    panels = (("damping", "damping ratio"), ("gain_margin_db", "gain margin, dB"),
              ("phase_margin_deg", "phase margin, deg"))
    for ax, (field, ylabel) in zip(axes, panels):
        for sweep, which, label in ((sa, "primary", labels[0]), (sb, "secondary", labels[1])):
            y = np.where(sweep.stable, getattr(sweep, field), np.nan)  # margins of an unstable loop are not margins
            _line(ax, sweep.gains, y, which, f"run {label}")
        for k, which, label in zip(chosen, ("primary", "secondary"), labels):
            if k is not None and k > 0:
                ax.axvline(k, color=PALETTE[which], linestyle=":", linewidth=1.2)
        ax.set_ylabel(ylabel)
        ax.set_xscale("log")
        ax.xaxis.set_major_formatter(_plain_log_label)
    lo, hi = band
    if lo is not None or hi is not None:
        ylo, yhi = axes[0].get_ylim()
        axes[0].axhspan(lo if lo is not None else ylo, hi if hi is not None else yhi, color=PALETTE["band"],
                        alpha=0.5, zorder=0, label="required band (B)")
        axes[0].set_ylim(ylo, yhi)
    axes[0].legend(loc="best")
    axes[0].set_title(title)
    axes[-1].set_xlabel("pitch-rate gain K, s (dotted: each run's chosen gain)")
    fig.tight_layout()
    return fig


def schedule_overlay_plot(stem, title, pressure, gains, slack, labels=("A", "B")):
    """Both schedules' gains and worst slack at the compared points against dynamic pressure.

    Parameters
    ----------
    pressure : ndarray, shape (n,)
        Dynamic pressure at each point, Pa.
    gains : tuple of ndarray, shape (n,)
        Each run's scheduled gain there, s.
    slack : tuple of ndarray, shape (n,)
        Each run's worst normalised requirement slack there (negative: a requirement missed).

    Returns
    -------
    list of str
    """
    return _render(_draw_schedules, stem, title, pressure, gains, slack, labels)


def _draw_schedules(title, q, gains, slack, labels):
    fig = new_figure(7.2, 5.6)
    top, bottom = fig.subplots(2, 1, sharex=True)
    order = np.argsort(q, kind="stable")
    for k, s, which, label in zip(gains, slack, ("primary", "secondary"), labels):
        kw = dict(LINES[which])
        kw.pop("linestyle")
        kw["markersize"] = 3.5
        top.plot(q[order], k[order], linestyle="none", label=f"run {label}", **kw)
        bottom.plot(q[order], s[order], linestyle="none", label=f"run {label}", **kw)
    bottom.axhline(0.0, **LINES["limit"])
    top.set_ylabel("scheduled gain K, s")
    bottom.set_ylabel("worst normalised slack")
    bottom.set_xlabel("dynamic pressure, Pa (each point of both verification grids)")
    top.set_title(title)
    top.legend(loc="best")
    fig.tight_layout()
    return fig
