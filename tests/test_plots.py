"""Design plots: files written and readable; the Bode annotations agree with the drawn curve."""

import os
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from damper.analysis.assess import assess
from damper.analysis.search import SearchSettings, search
from damper.case import load_case
from damper.analysis.design_figures import design_figure_inputs
from damper.analysis.locus import open_loop_poles
from damper.analysis.loop_curves import loop_curve
from damper.output import style
from damper.output.figures import design as plots
from damper.output.figures import loop_response as loop_plot
from damper.output.figures import root_locus as locus_plot

from .shared_runs import REPORT_OPTIONS


@pytest.fixture(scope="module", autouse=True)
def _both_formats(both_formats):
    """These tests check the PNG and the SVG of each figure (the default writes SVG alone)."""


ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")
KINDS = ("root-locus", "loop-response", "gain-sweep")


@pytest.fixture(scope="module")
def demo():
    case = load_case(DEMO)
    return case, search(case)


@pytest.fixture(scope="module")
def written(shared_run):
    """The design figures of the demo's shared report run (tests/shared_runs.py, REPORT_OPTIONS:
    ``--figures svg,png``), drawn by ``design`` through ``design_plots``: these tests used to draw
    the same 42 figures again; the run's own response figures are left out. Read only."""
    run = shared_run("utility_single_aft_cg", REPORT_OPTIONS)
    assert run.code == 0, run.stderr
    names = sorted(os.listdir(run.path / "plots"))
    paths = [os.path.join(str(run.path), "plots", n) for n in names
             if os.path.splitext(n)[0].endswith(tuple("-" + k for k in KINDS))]
    return run.path, paths, names


def test_every_condition_gets_three_plots_in_two_formats(demo, written):
    case, design = demo
    out, paths, names = written
    expected = {
        os.path.join(str(out), "plots", f"{style.safe_name(c.name)}-{kind}.{ext}")
        for c in design.conditions
        for kind in KINDS
        for ext in ("png", "svg")
    }
    assert set(paths) == expected  # [derived] 3 plots x 2 formats per condition
    # design_plots draws design_plot_jobs: one job per condition and kind, writing these files
    jobs = plots.design_plot_jobs(case, design, design_figure_inputs(case, design), out)
    assert len(jobs) == 3 * len(case.conditions)
    assert {args[-1] + ext for _, args in jobs for ext in (".png", ".svg")} == expected
    assert len(paths) == 6 * len(case.conditions)
    for p in paths:
        assert os.path.getsize(p) > 5000, p  # [derived] an empty figure is already several kB
    leftovers = [f for f in names if f.startswith(".tmp-")]
    assert leftovers == []  # atomic writes leave no temporary file behind


def test_png_files_are_images_of_sensible_size(written):
    import matplotlib.image as mpimg

    _, paths, _ = written
    for p in paths:
        if not p.endswith(".png"):
            continue
        img = mpimg.imread(p)
        h, w = img.shape[:2]
        # [derived] figures are 10.5-11.5 in wide and 6.6-11 in high (the sweep grows with its notes) at 120 dpi
        assert 1100 <= w <= 1500 and 700 <= h <= 1400, (p, img.shape)
        assert img.shape[2] in (3, 4)
        assert float(np.std(img[..., :3])) > 0.02, p  # not a blank canvas


def test_svg_files_parse_as_xml(written):
    _, paths, _ = written
    for p in paths:
        if p.endswith(".svg"):
            root = ET.parse(p).getroot()
            assert root.tag.endswith("svg"), p
            text = "".join(root.itertext())
            assert "(rad/s)" in text or "gain K (s)" in text, p  # units on the axes (text kept as text)


def _bode_at(case, assessment, i):
    """Bode data on the case grid plus every annotated crossing frequency (exact points)."""
    m = assessment.margins
    extra = np.concatenate([m.gain_crossings_rad_s[i], m.phase_crossings_rad_s[i]])
    extra = extra[np.isfinite(extra) & (extra > 0)]
    w = np.unique(np.concatenate([case.settings.grid(), extra]))
    return loop_curve(case, assessment, i, w=w)


def _check_annotations(b, tol_db=0.02, tol_deg=0.05):
    w = b.frequency_rad_s
    for wc, pm in b.gain_crossings_rad_s_deg:
        k = int(np.argmin(np.abs(w - wc)))
        # [derived] a gain crossing is |L| = 1, i.e. 0 dB on the drawn curve
        assert abs(b.gain_db[k]) < tol_db, (wc, b.gain_db[k])
        # [derived] PM = phase + 180 deg (mod 360): the drawn phase minus PM is -180 (mod 360)
        off = np.mod(b.phase_deg[k] - pm + 180.0 + 180.0, 360.0) - 180.0
        assert abs(off) < tol_deg, (wc, b.phase_deg[k], pm)
    for wp, gm in b.phase_crossings_rad_s_db:
        if wp == 0.0:
            continue
        k = int(np.argmin(np.abs(w - wp)))
        # [derived] a phase crossing is phase = -180 deg (mod 360) on the drawn curve
        off = np.mod(b.phase_deg[k] + 180.0 + 180.0, 360.0) - 180.0
        assert abs(off) < tol_deg, (wp, b.phase_deg[k])
        # [derived] GM = -20 log10 |L| at that frequency
        assert abs(-b.gain_db[k] - gm) < tol_db, (wp, b.gain_db[k], gm)


def test_bode_annotations_agree_with_the_drawn_response_at_the_chosen_gains(demo):
    case, design = demo
    for i in range(len(design.conditions)):
        b = _bode_at(case, design.chosen, i)
        assert b.gain_s == pytest.approx(design.conditions[i].chosen_gain, rel=1e-12)
        gm = design.chosen.margins.gain_margin_db[i]
        if np.isfinite(gm):
            assert b.gain_margin_db == pytest.approx(gm)
            assert any(g == pytest.approx(gm) for _, g in b.phase_crossings_rad_s_db)  # the headline one is annotated
        _check_annotations(b)


def test_bode_annotations_with_gain_crossings(demo):
    """At a high gain the loop crosses 0 dB (twice, with the washout): the PM annotations hold too."""
    case, _ = demo
    a = assess(case, np.full(len(case.conditions), 0.8), with_bandwidth=False)
    seen = 0
    for i in range(len(case.conditions)):
        b = _bode_at(case, a, i)
        _check_annotations(b)
        seen += len(b.gain_crossings_rad_s_deg)
        if np.isfinite(b.phase_margin_deg):
            assert any(p == pytest.approx(b.phase_margin_deg) for _, p in b.gain_crossings_rad_s_deg)
    assert seen >= len(case.conditions)  # [derived] 0.8 s is well above where |L| first reaches 1 (sweep data)


def test_an_infeasible_condition_still_gets_its_plots(demo, tmp_path):
    """Gains far above the feasible range (1-6 s, [derived] from the demo sweep): the closest miss is drawn."""
    case, _ = demo
    design = search(case, SearchSettings(gain_min=1.0, gain_max=6.0, points=21))
    assert not design.conditions[0].feasible
    paths = locus_plot.root_locus(case, design, 0, tmp_path / "rl", open_loop_poles(case))
    paths += loop_plot.loop_response_plot(case, loop_curve(case, design.chosen, 0), tmp_path / "bode")
    paths += plots.gain_sweep_plot(case, design, 0, tmp_path / "sweep")
    assert len(paths) == 6 and all(os.path.getsize(p) > 5000 for p in paths)
    text = "".join(ET.parse(str(tmp_path / "sweep.svg")).getroot().itertext())
    assert "closest miss" in text
    assert "slack -inf" not in text and "-inf" not in text  # issue 19: said in words


def test_safe_names():
    assert style.safe_name("SL climb / fwd: 20 %") == "sl-climb-fwd-20"
    assert style.safe_name("../..") == "condition"
    assert style.safe_name("CON") == "condition-con"
    assert style.safe_name("10kft-cruise-aft") == "10kft-cruise-aft"


def test_case_slug_is_the_safe_name_of_the_case_file():
    """Source: issue 18 ("one file-name rule"): ``damper robust``'s default directory uses style's rule."""
    assert style.case_slug("cases/Utility Single (v2).yaml") == "utility-single-v2"  # [derived] safe_name's rule
    assert style.case_slug("/x/utility_single_uncertain.yaml") == "utility_single_uncertain"


def test_the_gain_sweep_names_its_edges_by_the_registered_labels(demo, written):
    """Source: issue 18 ("labels come from the criteria, not from copies"): every edge of every
    condition is named on its gain sweep by the criterion's registered label, never by its key."""
    from damper.requirements.registry import KINDS as CRITERIA

    case, design = demo
    out, _, _ = written
    seen = 0
    for cond, slug in zip(design.conditions, style.plot_slugs(case.names)):
        text = "".join(ET.parse(str(out / "plots" / f"{slug}-gain-sweep.svg")).getroot().itertext())
        for e in (e for pair in cond.edges for e in pair if e.binding in CRITERIA):
            assert CRITERIA[e.binding].label in text, (cond.name, e.binding)
            seen += 1
        assert "damping_ratio" not in text and "\ncap\n" not in text
    assert seen >= 2  # [derived] the demo's sweeps end at damping and CAP edges (its design.json)


def test_importing_the_module_does_not_import_matplotlib():
    code = "import sys, damper.output.figures.design; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == "False"
