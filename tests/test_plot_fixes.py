"""Plot fixes of issue 19: pass-fraction scale, scatter samples failing an unseen requirement,
small-perturbation note on responses, chosen gain 0 on the root-locus colour bar, the
gain-sweep subtitle inside the figure, no 'slack -inf'.

Oracles: Clopper-Pearson bounds from scipy.stats.beta (Clopper and Pearson, Biometrika 1934);
the small-perturbation thresholds are common practice (10 deg attitude / angle of attack,
1 g load factor increment); the rest are [derived] from the definitions stated beside them.
"""

from __future__ import annotations

import os
import xml.etree.ElementTree as ET
from types import SimpleNamespace

import matplotlib
import numpy as np
import pytest
from scipy.stats import beta

from damper.analysis.search import search
from damper.analysis.robustness_figures import sample_split
from damper.case import load_case
from damper.analysis.locus import open_loop_poles
from damper.output import style
from damper.output.figures import design as plots
from damper.output.figures.root_locus import root_locus
from damper.output.figures import robustness as robustness_plots
from damper.output.figures.responses import linear_range_note

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
DEG = np.pi / 180.0


def svg_text(path):
    return " ".join(ET.parse(path).getroot().itertext())


# ---------------------------------------------------------------------------------
# robustness plots (synthetic results: only the fields the plots read)
# ---------------------------------------------------------------------------------
def _cond(name, passed, n=2000):
    lo = beta.ppf(0.025, passed, n - passed + 1) if passed > 0 else 0.0  # Clopper-Pearson 95 %
    hi = beta.ppf(0.975, passed + 1, n - passed) if passed < n else 1.0
    f = passed / n
    return SimpleNamespace(name=name, fraction_all=f, lower_all=lo, upper_all=hi, passed_all=passed, samples=n,
                           fraction=np.array([f, 1.0]), lower=np.array([lo, 0.998]), upper=np.array([hi, 1.0]),
                           nominal_met=True)


def _result(conds, criteria=("damping_ratio", "gain_margin")):
    return SimpleNamespace(conditions=tuple(conds), criteria=tuple(SimpleNamespace(name=c) for c in criteria),
                           spec=SimpleNamespace(confidence=0.95, samples=2000, seed=1))


def test_pass_fraction_axis_is_the_whole_scale_and_never_reads_100_for_1999():
    case = SimpleNamespace(title="Invented case")
    with matplotlib.rc_context(style.ROBUSTNESS_RC):
        fig = robustness_plots._draw_pass(case, _result([_cond("a", 2000), _cond("b", 1999)]))
    ax = fig.axes[0]
    lo, hi = ax.get_xlim()
    assert lo <= 0.0 and hi >= 100.0  # [derived] the whole 0-100 % scale: no zoom
    texts = [t.get_text() for t in ax.texts]
    assert any("1999/2000 meet all (99.9 %" in t for t in texts), texts  # 99.95 % rounded down, never 100.0
    assert not any("1999/2000 meet all (100.0" in t for t in texts)


def test_samples_failing_only_an_unseen_requirement_are_told_apart():
    # criteria: damping, gain margin (on the axes), cap (not); slacks (criteria, conditions, samples)
    slacks = np.array([[[0.1, 0.2, -0.1, 0.3, 0.2]], [[0.5, 0.5, 0.5, -0.2, 0.5]], [[0.3, -0.4, -0.5, 0.1, 0.2]]])
    r = SimpleNamespace(criteria=tuple(SimpleNamespace(name=n) for n in ("damping_ratio", "gain_margin", "cap")),
                        slacks=slacks)
    split = sample_split(r, 0)
    # [derived] sample 1 meets both axes' requirements and misses cap; 2 misses damping too; 3 misses gain margin
    assert split.misses_off_axes.tolist() == [False, True, False, False, False]
    assert split.missed_off_axes == ("cap",)
    # [derived] only samples 0 and 4 have every slack >= 0
    assert split.meets_all.tolist() == [True, False, False, False, True]


def test_response_note_when_the_history_leaves_the_small_perturbation_range():
    t = np.linspace(0.0, 10.0, 101)
    small = SimpleNamespace(theta=3 * DEG * np.sin(t), alpha=2 * DEG * np.sin(t), load_factor=0.3 * np.sin(t))
    big = SimpleNamespace(theta=25 * DEG * np.sin(t), alpha=2 * DEG * np.sin(t), load_factor=3.0 * np.sin(t))
    assert linear_range_note(small, small) == ("", ())
    note, fields = linear_range_note(small, big)
    assert set(fields) == {"theta", "load_factor"}  # common practice: 10 deg and 1 g
    assert "pitch attitude reaches 25" in note and "load factor increment reaches 3" in note
    assert "10 deg" in note and "1 g" in note  # the thresholds are stated


# ---------------------------------------------------------------------------------
# design plots on the demo
# ---------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def demo():
    case = load_case(DEMO)
    return case, search(case)


def test_chosen_gain_zero_is_marked_on_the_colour_bar_and_the_sweep(demo, tmp_path):
    case, design = demo
    zero = [i for i, c in enumerate(design.conditions) if c.chosen_gain == 0.0]
    assert zero  # [derived] SL-climb-aft: the bare airframe meets every requirement with the most slack
    i = zero[0]
    root_locus(case, design, i, tmp_path / "rl", open_loop_poles(case))
    text = svg_text(tmp_path / "rl.svg")
    assert "K = 0 s" in text and "below" in text  # the mark under the bar names its value
    plots.gain_sweep_plot(case, design, i, tmp_path / "sw")
    assert "below the swept range" in svg_text(tmp_path / "sw.svg")


def test_gain_sweep_texts_stay_inside_the_figure(demo):
    case, design = demo
    with matplotlib.rc_context(style._RC):
        for i in range(len(design.conditions)):
            fig = plots._draw_sweep(case, design, i)
            fig.set_dpi(style.DPI)
            r = fig.canvas.get_renderer()
            for t in fig.texts:
                box = t.get_window_extent(r)
                assert box.x1 <= fig.bbox.width + 1 and box.x0 >= 0, (design.conditions[i].name, t.get_text())


def test_no_footnote_prints_an_infinite_slack():
    for v in (-np.inf, np.inf):
        assert "inf" not in plots._slack_text(v)
    assert plots._slack_text(-0.25) == "-0.25"  # [derived] finite slacks stay numbers
