"""Figures of the time responses: bare and augmented histories of one condition and input.

Nothing is computed here beyond unit conversion for display (rad to deg); the histories come
from :mod:`damper.analysis.response`. matplotlib is imported inside the plotting function.
"""

from __future__ import annotations

import math

import numpy as np

from ..style import HISTORY_COLOURS, HISTORY_RC, label_slug

#: The time-history colours of :mod:`damper.output.style`.
AUGMENTED_COLOUR = HISTORY_COLOURS["augmented"]
BARE_COLOUR = HISTORY_COLOURS["bare"]
LIMIT_COLOUR = HISTORY_COLOURS["limit"]
INPUT_COLOUR = HISTORY_COLOURS["input"]

R2D = 180.0 / math.pi

#: Excursions beyond which a small-perturbation (linear) model is commonly taken as no longer
#: valid (common practice, round values): (history field, display scale, limit, unit, name).
SMALL_PERTURBATION_LIMITS = (
    ("theta", R2D, 10.0, "deg", "pitch attitude"),
    ("alpha", R2D, 10.0, "deg", "angle of attack"),
    ("load_factor", 1.0, 1.0, "g", "load factor increment"),
)


def linear_range_note(bare, augmented):
    """The plot's note when a drawn history leaves the small-perturbation range, else "".

    Compares the largest drawn excursions (bare and augmented) with
    :data:`SMALL_PERTURBATION_LIMITS`; returns the text and the exceeded fields.
    """
    over, fields = [], []
    for name, scale, limit, unit, label in SMALL_PERTURBATION_LIMITS:
        peak = max(float(np.nanmax(np.abs(np.asarray(getattr(h, name))))) * scale for h in (bare, augmented))
        if peak > limit:
            over.append(f"{label} reaches {peak:.3g} {unit} (beyond about {limit:g} {unit})")
            fields.append(name)
    if not over:
        return "", ()
    text = ("Outside the small-perturbation range: " + "; ".join(over) + ". The linear model (common practice: "
            "attitude and angle of attack within about 10 deg, load factor within about 1 g of trim) shows the trend, "
            "not reliable values; scale the input down or check with a nonlinear simulation.")
    return text, tuple(fields)


# ---------------------------------------------------------------------------
# Plots
# ---------------------------------------------------------------------------


#: The panels of a response figure: (history field, display scale, axis label).
PANELS = (
    ("q", R2D, "pitch rate\ndeg/s"),
    ("alpha", R2D, "angle of attack\ndeg"),
    ("theta", R2D, "pitch attitude\ndeg"),
    ("load_factor", 1.0, "load factor\nincrement, g"),
    ("surface", R2D, "surface\ndeg"),
    ("surface_rate", R2D, "surface rate\ndeg/s"),
)


def plot_response(stem, bare, augmented, *, title, subtitle="", rate_limit=None, travel=None, stride=1):
    """Bare and augmented histories of one condition on shared axes; in the ``--figures`` formats.

    Parameters
    ----------
    stem : str
        Path without extension; ``.png`` and ``.svg`` are written.
    bare, augmented : TimeHistory
        One condition each (1-D series).
    title, subtitle : str
    rate_limit, travel : float or None
        rad/s and rad, drawn as dashed lines on the surface panels.
    stride : int
        Plot every `stride`-th sample.

    Returns
    -------
    list of str
        The files written.
    """
    import matplotlib

    from ..style import align_ylabels_once, new_figure, save_figure

    t = bare.time[::stride]
    note, exceeded = linear_range_note(bare, augmented)
    with matplotlib.rc_context(HISTORY_RC):
        fig = new_figure(7.5, 10.0)
        # fixed margins (inches converted to fractions) instead of a layout pass: one draw per file
        top_in = 1.1 if note else 0.7
        fig.subplots_adjust(left=0.95 / 7.5, right=1.0 - 0.15 / 7.5, bottom=0.5 / 10.0, top=1.0 - top_in / 10.0,
                            hspace=0.12)
        axes = fig.subplots(len(PANELS), 1, sharex=True)
        _response_curves(axes, t, bare, augmented, stride, rate_limit, travel)
        axes[-1].set_xlabel("time, s")
        axes[-1].set_xlim(t[0], t[-1])
        fig.suptitle(title, fontsize=10, x=0.02, y=0.985, ha="left")
        if subtitle:
            fig.text(0.02, 0.955, subtitle, fontsize=8, ha="left", color=HISTORY_COLOURS["subtitle"])
        if note:
            _linear_range_marks(fig, axes, note, exceeded)
        align_ylabels_once(axes)  # after the last artist: the limits are final
        written = save_figure(fig, stem)
    return written




def file_stem(i_condition: int, condition: str, j_input: int, label: str) -> str:
    """``response-<nn>-<condition>-<m>-<input>`` (numbered, so names never collide)."""
    return f"response-{i_condition + 1:02d}-{label_slug(condition)}-{j_input + 1}-{label_slug(label)}"


def _response_curves(axes, t, bare, augmented, stride, rate_limit, travel):
    """Bare and augmented histories on every panel; the input (gust or pilot) and the surface limits."""
    def s(h, name, scale=1.0):
        return np.asarray(getattr(h, name))[::stride] * scale

    gust = bool(np.any(np.asarray(augmented.gust_alpha) != 0))
    for ax, (name, scale, label) in zip(axes, PANELS):
        ax.plot(t, s(bare, name, scale), color=BARE_COLOUR, lw=1.2, label="bare airframe (K = 0)")
        ax.plot(t, s(augmented, name, scale), color=AUGMENTED_COLOUR, lw=1.6, label="with damper")
        ax.set_ylabel(label)
        ax.grid(True, color=HISTORY_COLOURS["grid"], lw=0.6)
        ax.axhline(0.0, color=HISTORY_COLOURS["zero"], lw=0.5)
    ax_alpha = axes[1]
    if gust:
        ax_alpha.plot(t, s(augmented, "gust_alpha", R2D), color=INPUT_COLOUR, lw=1.0, ls=":",
                      label="gust angle w/V")
    ax_surf, ax_rate = axes[4], axes[5]
    if not gust:
        ax_surf.plot(t, s(augmented, "pilot", R2D), color=INPUT_COLOUR, lw=1.0, ls=":", label="pilot command")
    if travel is not None and math.isfinite(travel):
        for sign in (1, -1):
            ax_surf.axhline(sign * travel * R2D, color=LIMIT_COLOUR, lw=1.0, ls="--",
                            label="travel limit" if sign > 0 else None)
    if rate_limit is not None and math.isfinite(rate_limit):
        for sign in (1, -1):
            ax_rate.axhline(sign * rate_limit * R2D, color=LIMIT_COLOUR, lw=1.0, ls="--",
                            label="rate limit" if sign > 0 else None)
    axes[0].legend(loc="upper right", fontsize=7.5, frameon=False, ncol=2)
    for ax in (ax_alpha, ax_surf, ax_rate):
        handles, labels = ax.get_legend_handles_labels()
        extra = [(hd, lb) for hd, lb in zip(handles, labels) if lb not in ("bare airframe (K = 0)", "with damper")]
        if extra:
            ax.legend(*zip(*extra), loc="upper right", fontsize=7.5, frameon=False)


def _linear_range_marks(fig, axes, note, exceeded):
    """The note under the title and dotted lines at the small-perturbation limits that are exceeded."""
    import textwrap

    fig.text(0.02, 0.945, textwrap.fill(note, 125), fontsize=7.5, ha="left", va="top", color=LIMIT_COLOUR)
    for ax, (name, scale, label) in zip(axes, PANELS):
        for field, _, limit, _, _ in SMALL_PERTURBATION_LIMITS:
            if field == name and field in exceeded:
                for sign in (1, -1):
                    ax.axhline(sign * limit, color=LIMIT_COLOUR, lw=0.7, ls=":", alpha=0.8)

