"""Figure of the hardover failures: the airframe's motion after the failure, with its limits.

One figure (in the ``--figures`` formats) for the conditions with the least slack to their tightest limit: the
incremental load factor, pitch-attitude change, angle-of-attack change and pitch rate from the
failure until the pilot acts, and the surface the failed damper drives; the transient limits as
dashed lines. Nothing is computed here beyond rad to deg; the histories come from
:func:`damper.analysis.failure_run.run_failures`. matplotlib is imported inside the function.
"""

from __future__ import annotations

import math

import numpy as np

from ..style import CONDITION_COLOURS, HISTORY_COLOURS, HISTORY_RC
from .kinds import FigureKind

R2D = 180.0 / math.pi
#: The limits' colour, as in every time-history figure.
LIMIT_COLOUR = HISTORY_COLOURS["limit"]
STEM = "failures-hardover"
#: The family's one figure.
HARDOVER = FigureKind(STEM, "hardover failures at the conditions with the least slack: the airframe's motion until the "
                               "pilot acts, limits dashed")
KINDS = (HARDOVER,)

PANELS = (
    ("load_factor", 1.0, "incremental load\nfactor, g", "load_factor_g"),
    ("theta", R2D, "pitch-attitude\nchange, deg", "pitch_attitude_rad"),
    ("alpha", R2D, "angle-of-attack\nchange, deg", "angle_of_attack_rad"),
    ("q", R2D, "pitch rate\ndeg/s", None),
    ("surface", R2D, "surface\ndeg", None),
)


def failure_plot_jobs(run, out, title) -> list:
    """The plot jobs ``(fn, args)`` of a failure run (none without hardover histories)."""
    import os

    if not run.worst:
        return []
    spec = run.spec
    lim = spec.limits
    bands = {"load_factor_g": lim.load_factor_g, "pitch_attitude_rad": lim.pitch_attitude_rad,
             "angle_of_attack_rad": lim.angle_of_attack_rad}
    curves = [(run.names[i], slack, h) for i, slack, h in run.worst]
    subtitle = (f"damper hardover at t = 0 (loop broken, the sign with the least slack), no pilot action for "
                f"{spec.recognition_time_s:g} s; dashed: transient limits")
    return [(plot_hardovers, (os.path.join(out, "plots", STEM), curves, bands, title, subtitle))]


def plot_hardovers(stem, curves, bands, title, subtitle=""):
    """Draw the hardover transients of a few conditions on shared axes; in the ``--figures`` formats.

    Parameters
    ----------
    stem : str
        Path without extension.
    curves : list of (str, float, TimeHistory)
        Condition name, tightest slack (fraction) and its one-condition histories.
    bands : dict
        ``load_factor_g`` (g), ``pitch_attitude_rad``, ``angle_of_attack_rad`` (rad): (lower,
        upper) or None.
    title, subtitle : str

    Returns
    -------
    list of str
        The files written.
    """
    import matplotlib

    from ..style import align_ylabels_once, new_figure, save_figure

    with matplotlib.rc_context(HISTORY_RC):
        fig = new_figure(7.5, 9.0)
        fig.subplots_adjust(left=1.0 / 7.5, right=1.0 - 0.15 / 7.5, bottom=0.5 / 9.0, top=1.0 - 1.05 / 9.0,
                            hspace=0.14)
        axes = fig.subplots(len(PANELS), 1, sharex=True)
        for ax, (series, scale, label, band_key) in zip(axes, PANELS):
            for k, (name, slack, h) in enumerate(curves):
                ax.plot(h.time, np.asarray(getattr(h, series)) * scale, color=CONDITION_COLOURS[k % 4], lw=1.4,
                        label=f"{name} (slack {100 * slack:+.0f} %)")
            band = bands.get(band_key) if band_key else None
            if band is not None:
                for j, edge in enumerate(band):
                    ax.axhline(edge * scale, color=LIMIT_COLOUR, lw=1.0, ls="--", label="limit" if j == 0 else None)
            ax.set_ylabel(label)
            ax.grid(True, color=HISTORY_COLOURS["grid"], lw=0.6)
            ax.axhline(0.0, color=HISTORY_COLOURS["zero"], lw=0.5)
        axes[0].legend(loc="lower left", bbox_to_anchor=(0.0, 1.02), ncol=3, fontsize=7.0, frameon=False)
        axes[-1].set_xlabel("time after the failure, s")
        t = curves[0][2].time
        axes[-1].set_xlim(t[0], t[-1])
        align_ylabels_once(axes)  # the limits are final here
        fig.suptitle(title, fontsize=10, x=0.02, y=0.985, ha="left")
        if subtitle:
            fig.text(0.02, 0.952, subtitle, fontsize=7.5, ha="left", color=HISTORY_COLOURS["subtitle"])
        return save_figure(fig, stem)
