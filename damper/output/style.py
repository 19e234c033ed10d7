"""The look and the files of every figure: palette, line styles, rc settings, DPI, figure creation
and atomic saving, file-name rules, and small axis helpers.

Used by every module of :mod:`damper.output.figures`: :data:`PALETTE` and :data:`LINES` for
the design, schedule and compare figures, :data:`SAMPLE_COLOURS` and :data:`ROBUSTNESS_RC` for
the robustness figures, :data:`HISTORY_COLOURS` and :data:`HISTORY_RC` for the time histories;
one :data:`DPI`; :func:`new_figure` and :func:`save_figure` (atomic, formats chosen per run);
the file-name rules :func:`safe_name`, :func:`plot_slugs` and :func:`label_slug`. matplotlib is
imported inside the functions, so importing this module is cheap.
"""

from __future__ import annotations

import io
import os
import re

import numpy as np

from .files import write_atomic

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
#: Resolution of every PNG, dots per inch.
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
    # titles at a fixed height above the axes: no axis here has ticks or labels on top, so the
    # automatic placement (a layout of every tick label per draw) finds the same place, slower
    "axes.titley": 1.0,
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

#: Samples of an uncertainty study (Okabe-Ito colours, safe for the common colour-vision
#: deficiencies; every series also has its own marker or hatch). Ink and grid as :data:`PALETTE`.
SAMPLE_COLOURS = {
    "ink": PALETTE["ink"],
    "pass": "#0072B2",  # blue
    "fail": "#D55E00",  # vermillion
    "box": "#009E73",  # bluish green: requirement box
    "box_fill": "#d6f0e8",
    "nominal": "#000000",
    "worst": "#CC79A7",  # reddish purple
    "positive": "#56B4E9",  # sky blue
    "negative": "#E69F00",  # orange
    "grid": PALETTE["grid"],
}
#: rc settings of the robustness figures: the house settings with smaller legends, no hatch
#: colour of their own and lighter grid lines.
ROBUSTNESS_RC = {k: v for k, v in _RC.items() if k not in ("grid.alpha", "legend.edgecolor", "hatch.color")}
ROBUSTNESS_RC.update({"legend.fontsize": 7.5, "svg.hashsalt": "damper-robust", "hatch.linewidth": 0.7})

#: Time histories (responses, failures): bare airframe, airframe with the damper, the input;
#: limits in the palette's limit colour; light grid and zero line.
HISTORY_COLOURS = {
    "augmented": "#00696b",  # deep teal
    "bare": "#a0785a",  # warm grey-brown
    "input": "#5b5b8f",
    "limit": PALETTE["limit"],
    "grid": "#e4e4e4",
    "zero": "#9a9a9a",
    "subtitle": "#444444",
}
#: One colour per condition of a failure figure (least slack first).
CONDITION_COLOURS = ("#8c2d19", "#1d5c8f", "#5d7a1f", "#6b4a8a")
#: rc settings of the time-history figures: no top and right spines.
#: Text stays text in the SVG (as in the house settings): no glyph outlines to compute and write.
HISTORY_RC = {"axes.titley": 1.0, "font.size": 8.5, "axes.spines.top": False, "axes.spines.right": False,
              "svg.hashsalt": "damper", "svg.fonttype": "none", "font.family": "sans-serif",
              "font.sans-serif": ["DejaVu Sans"]}


# ---------------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------------
def _figure(width, height):
    return new_figure(width, height)


def _save(fig, stem):
    return save_figure(fig, stem, DPI)


def _render(draw, stem, *args, rc=None):
    """Draw ``draw(*args)`` under the house rc settings (or `rc`) and save it as `stem`; the written paths."""
    import matplotlib

    with matplotlib.rc_context(_RC if rc is None else rc):
        fig = draw(*args)
        return _save(fig, stem)


def _plain_log_label(v, _pos=None):
    """A log-axis tick label as a plain number (0.01, 1, 100): readable, and no mathtext to lay out."""
    return f"{v:g}"


def _log_x(ax):
    """Log frequency/gain axis with a light minor grid at 2 and 5 (fewer ticks: faster)."""
    from matplotlib.ticker import FuncFormatter, NullFormatter

    ax.set_xscale("log")
    ax.xaxis.set_major_formatter(FuncFormatter(_plain_log_label))
    _log_minor_2_5(ax.xaxis)
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.grid(True, which="major")
    ax.grid(True, which="minor", alpha=0.35)


def _log_minor_2_5(axis):
    """Minor ticks of a log axis at 2 and 5 of every decade only (as :func:`_log_x`)."""
    from matplotlib.ticker import LogLocator

    axis.set_minor_locator(LogLocator(base=10.0, subs=(2.0, 5.0)))


def _short_log_labels(axis, lo, hi):
    """Plain-number labels: on major and minor ticks of a log axis spanning under two decades, else on major ticks."""
    from matplotlib.ticker import FuncFormatter

    if hi / lo < 100.0:
        fmt = FuncFormatter(lambda v, _pos: f"{v:.3g}")
        axis.set_major_formatter(fmt)
        axis.set_minor_formatter(fmt)
    else:
        axis.set_major_formatter(FuncFormatter(_plain_log_label))


def align_ylabels_once(axes) -> None:
    """Put the y labels of `axes` at one place left of the widest tick label among them.

    What :meth:`matplotlib.figure.Figure.align_ylabels` gives, computed once from the tick
    labels' text widths (the font metrics the SVG backend uses; no drawing) instead of laying
    out every panel's tick labels again at each panel's draw. Call it after the limits and
    tick locators are final; the axes must have equal widths (stacked panels).
    """
    from matplotlib import cbook, rcParams
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextToPath

    text_to_path, prop = TextToPath(), FontProperties(size=rcParams["ytick.labelsize"])
    widest = 0.0
    for ax in axes:
        lo, hi = sorted(ax.get_ylim())
        tol = 1e-9 * (hi - lo)
        locs = [v for v in ax.yaxis.get_majorticklocs() if lo - tol <= v <= hi + tol]
        for text in ax.yaxis.get_major_formatter().format_ticks(locs):
            ismath = cbook.is_math_text(text)
            widest = max(widest, text_to_path.get_text_width_height_descent(text, prop, ismath=ismath)[0])
    size, pad = rcParams["ytick.major.size"], rcParams["ytick.major.pad"]
    reach = {"out": size, "inout": 0.5 * size}.get(rcParams["ytick.direction"], 0.0) + pad  # points
    for ax in axes:
        width_in = ax.get_position().width * ax.get_figure().get_figwidth()
        ax.yaxis.set_label_coords(-(reach + widest + ax.yaxis.labelpad) / 72.0 / width_in, 0.5)


def _in_view_locator(base):
    """`base` (a matplotlib tick locator) giving only the ticks inside the axis' view.

    matplotlib makes a tick (mark, grid line, label: several artists) for every location the
    locator gives and then draws those inside the view; locators give one or more beyond each
    end (about 30 % of the demo's ticks). The same test as matplotlib's, a little wider, so
    the drawn ticks are the same.
    """
    from matplotlib import ticker

    class InView(ticker.Locator):
        def __init__(self):
            self.base = base

        def set_axis(self, axis):
            super().set_axis(axis)
            self.base.set_axis(axis)

        def __call__(self):
            locs = np.asarray(self.base(), dtype=float)
            if locs.size == 0:
                return locs
            tr = self.axis.get_transform()
            lo, hi = sorted(tr.transform(np.asarray(self.axis.get_view_interval(), dtype=float)))
            t = tr.transform(locs)
            tol = 1e-6 * (hi - lo) if hi > lo else 0.0
            return locs[np.isfinite(t) & (t >= lo - tol) & (t <= hi + tol)]

        def tick_values(self, vmin, vmax):
            return self.base.tick_values(vmin, vmax)

        def nonsingular(self, v0, v1):
            return self.base.nonsingular(v0, v1)

        def view_limits(self, vmin, vmax):
            return self.base.view_limits(vmin, vmax)

    return InView()


def _prepare_for_drawing(fig) -> None:
    """Before the first rendering: no ticks made beyond the view, and axes whose axis label is empty
    skip its placement (a layout of every tick label per draw). What is drawn stays the same."""
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            if getattr(axis, "_autolabelpos", False) and not axis.label.get_text():
                axis.set_label_coords(0.5, 0.5)
            for get, put in ((axis.get_major_locator, axis.set_major_locator),
                             (axis.get_minor_locator, axis.set_minor_locator)):
                loc = get()
                if type(loc).__name__ != "InView" and not isinstance(loc, _NO_TICKS()):
                    put(_in_view_locator(loc))


def _NO_TICKS():
    from matplotlib.ticker import NullLocator

    return NullLocator


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
# figure creation and saving
# ---------------------------------------------------------------------------------
#: Formats a figure can be written in; the report embeds SVG when there is one, else PNG.
from .options import DEFAULT_FORMATS, KNOWN_FORMATS  # noqa: E402  (one list of formats, one default)
#: The formats of this process's figures (set once per run by the command, and in the plot
#: worker by its initializer).
_FORMATS = {"value": tuple(f for f in KNOWN_FORMATS if f in DEFAULT_FORMATS.split(","))}


def parse_formats(text: str) -> tuple:
    """``"svg,png"`` -> ``("png", "svg")``; raises ValueError naming what is not a format."""
    wanted = [t.strip().lower() for t in str(text).split(",") if t.strip()]
    bad = [t for t in wanted if t not in KNOWN_FORMATS]
    if bad or not wanted:
        raise ValueError(f"{text!r}: give one or more of {', '.join(KNOWN_FORMATS)}, separated by commas")
    return tuple(f for f in KNOWN_FORMATS if f in wanted)


def set_formats(formats) -> None:
    """Make `formats` (a subset of :data:`KNOWN_FORMATS`) the formats :func:`save_figure` writes."""
    _FORMATS["value"] = tuple(f for f in KNOWN_FORMATS if f in formats)


def use_option(text: str) -> None:
    """Set the formats from a ``--figures`` value; a bad value is a :class:`~damper.errors.DamperError` (exit 2)."""
    from ..errors import DamperError

    try:
        set_formats(parse_formats(text))
    except ValueError as exc:
        raise DamperError(f"--figures {exc}") from None


def formats() -> tuple:
    """The formats :func:`save_figure` writes in this process."""
    return _FORMATS["value"]


def new_figure(width, height):
    """A figure (inches) on its own Agg canvas (no pyplot, no global backend switch)."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure(figsize=(width, height))
    FigureCanvasAgg(fig)
    return fig


def save_figure(fig, stem, dpi=DPI):
    """Render `fig` in each of :func:`formats` into memory, then write ``stem.png`` / ``stem.svg`` atomically."""
    _prepare_for_drawing(fig)
    paths = []
    for fmt in formats():
        buf = io.BytesIO()
        if fmt == "svg":
            fig.savefig(buf, format=fmt, dpi=dpi, metadata={"Date": None})
        else:  # zlib level 3: a third less time than the default 6 for about 4 % larger files
            fig.savefig(buf, format=fmt, dpi=dpi, metadata={"Software": None}, pil_kwargs={"compress_level": 3})
        paths.append(write_atomic(f"{os.fspath(stem)}.{fmt}", buf.getvalue()))
    return paths


# ---------------------------------------------------------------------------------
# file names
# ---------------------------------------------------------------------------------
_WINDOWS_RESERVED = {"con", "prn", "aux", "nul", *(f"com{k}" for k in range(1, 10)), *(f"lpt{k}" for k in range(1, 10))}


def safe_name(name: str) -> str:
    """A filesystem-safe slug of a condition name (lower case, ``[a-z0-9._-]``)."""
    s = re.sub(r"[^A-Za-z0-9._-]+", "-", str(name)).strip("-._").lower()[:80].strip("-._")
    if not s:
        s = "condition"
    if s.split(".")[0] in _WINDOWS_RESERVED:
        s = "condition-" + s
    return s


def plot_slugs(names) -> list:
    """The file slug of every condition: :func:`safe_name`, made unique by a numeric suffix."""
    taken, out = set(), []
    for name in names:
        base = safe_name(name)
        slug, n = base, 2
        while slug in taken:
            slug, n = f"{base}-{n}", n + 1
        taken.add(slug)
        out.append(slug)
    return out


def case_slug(path) -> str:
    """A file-name fragment naming a case file: its name without the extension, by :func:`safe_name`.

    The default run directory of ``damper robust`` is ``robust-<case_slug>``.
    """
    return safe_name(os.path.splitext(os.path.basename(os.fspath(path)))[0])


def label_slug(text: str) -> str:
    """A file-name fragment from a label, case kept (letters, digits, '.', '_', '-'; at most 60).

    The rule of the response files' names (``response-01-SL-climb-fwd-1-doublet``), which
    responses.json lists: unlike :func:`safe_name` it keeps the case and joins with ``_``.
    """
    out = re.sub(r"[^A-Za-z0-9._-]+", "_", text).strip("._")
    return out[:60] or "x"

