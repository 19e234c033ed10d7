"""The figures' shortcuts draw what matplotlib itself would draw.

Source (oracle): matplotlib's own selection of the ticks it draws (``Axis._update_ticks``)
and its own label alignment (``Figure.align_ylabels``), on the same figures.
"""

import gc
import io

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from damper.output.background import drawn  # noqa: E402
from damper.output.style import _prepare_for_drawing, align_ylabels_once, new_figure  # noqa: E402


def _panels():
    """Stacked panels with shared x: a log x axis, y data of very different widths of tick labels."""
    fig = new_figure(6.0, 6.0)
    axes = fig.subplots(3, 1, sharex=True)
    x = np.logspace(-2.7, 0.7, 50)
    for ax, scale in zip(axes, (1.0, 250.0, -0.0031)):
        ax.plot(x, scale * np.sin(3 * np.log(x)))
        ax.set_ylabel("a quantity\nwith a unit")
        ax.grid(True)
    axes[0].set_xscale("log")
    axes[-1].set_xlabel("gain K (s)")
    return fig, axes


def _drawn_ticks(fig):
    """Locations of the ticks matplotlib draws on every axis (after a rendering)."""
    fig.savefig(io.BytesIO(), format="svg")
    out = []
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            out.append(sorted(round(float(t.get_loc()), 12) for t in axis._update_ticks()))
    return out


def test_no_tick_beyond_the_view_and_the_same_ticks_drawn():
    plain, _ = _panels()
    wrapped, _ = _panels()
    _prepare_for_drawing(wrapped)
    assert _drawn_ticks(wrapped) == _drawn_ticks(plain)
    made = [len(axis.majorTicks) + len(axis.minorTicks) for ax in wrapped.axes for axis in (ax.xaxis, ax.yaxis)]
    made_plain = [len(axis.majorTicks) + len(axis.minorTicks) for ax in plain.axes for axis in (ax.xaxis, ax.yaxis)]
    assert sum(made) < sum(made_plain)  # the locators give ticks beyond the view; they are no longer made


def test_labels_aligned_once_sit_where_align_ylabels_puts_them():
    ref, ref_axes = _panels()
    ref.align_ylabels(ref_axes)
    ours, our_axes = _panels()
    align_ylabels_once(our_axes)
    x = {}
    for name, fig, axes in (("ref", ref, ref_axes), ("ours", ours, our_axes)):
        fig.savefig(io.BytesIO(), format="png", dpi=fig.dpi)  # label positions laid out at this dpi
        renderer = fig.canvas.get_renderer()
        x[name] = [ax.yaxis.label.get_window_extent(renderer).x1 for ax in axes]
    assert max(x["ref"]) - min(x["ref"]) < 0.01  # aligned (matplotlib)
    assert max(x["ours"]) - min(x["ours"]) < 0.01  # aligned (ours)
    # the same place to a pixel and a half at 100 dpi (ours from unhinted font metrics)
    assert x["ours"][0] == pytest.approx(x["ref"][0], abs=1.5)


def test_a_job_runs_with_the_collector_paused_and_restores_it():
    states = []

    def job(name):
        states.append(gc.isenabled())
        return [name]

    assert gc.isenabled()
    assert drawn(job, "a") == ["a"]
    assert states == [False] and gc.isenabled()
    with pytest.raises(ZeroDivisionError):
        drawn(lambda: 1 / 0)
    assert gc.isenabled()  # restored after an error too
