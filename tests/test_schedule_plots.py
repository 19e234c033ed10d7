"""Schedule plots: every file written, PNGs readable images, SVGs well-formed XML, labels present.

Two demo cases: the regional twin-jet (2-D schedule in altitude and Mach) and the survey UAV
(1-D schedule in dynamic pressure). Each schedule is designed once per module.
"""

import dataclasses
import os
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from damper.analysis.schedule_figures import schedule_figure_inputs
from damper.analysis.schedule import design_schedule
from damper.case import load_case
from damper.output.figures.schedule import schedule_plots


@pytest.fixture(scope="module", autouse=True)
def _both_formats(both_formats):
    """These tests check the PNG and the SVG of each figure (the default writes SVG alone)."""


ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
CASES = {
    "regional": os.path.join(ROOT, "cases", "regional_twinjet_envelope.yaml"),
    "uav": os.path.join(ROOT, "cases", "survey_uav_altitude.yaml"),
}
# [derived] the module docstring of damper/output/figures/schedule.py: three plots, PNG then SVG
STEMS = ("schedule-gain", "schedule-damping-map", "schedule-margin-map")


@pytest.fixture(scope="module")
def designed():
    out = {}
    for name, path in CASES.items():
        case = load_case(path)
        out[name] = (case, design_schedule(case))
    return out


@pytest.fixture(scope="module")
def written(designed, tmp_path_factory):
    out = {}
    for name, (case, result) in designed.items():
        run = tmp_path_factory.mktemp(name)
        out[name] = (run, schedule_plots(case, result, run, schedule_figure_inputs(case, result)))
    return out


def _svg_text(path):
    root = ET.parse(path).getroot()
    return root, " ".join(t for t in root.itertext())


@pytest.mark.parametrize("name", sorted(CASES))
def test_three_plots_in_two_formats(written, name):
    run, paths = written[name]
    # [derived] file names from the module docstring; everything under <out_dir>/plots
    expected = [os.path.join(str(run), "plots", f"{s}.{ext}") for s in STEMS for ext in ("png", "svg")]
    assert paths == expected
    for p in paths:
        assert os.path.getsize(p) > 1000  # [derived] an empty figure alone is larger; 0 bytes means nothing written


@pytest.mark.parametrize("name", sorted(CASES))
def test_png_are_images_and_svg_are_xml(written, name):
    import matplotlib.image as mpimg

    _, paths = written[name]
    for p in paths:
        if p.endswith(".png"):
            img = mpimg.imread(p)
            # [derived] RGBA raster at least a few hundred pixels each way (figures are 7-12 in at 120 dpi)
            assert img.ndim == 3 and img.shape[2] == 4
            assert min(img.shape[:2]) > 300
            assert np.ptp(img[..., :3]) > 0.5  # not a blank canvas
        else:
            root, _ = _svg_text(p)
            assert root.tag.endswith("svg")


def test_uav_gain_plot_labels_units(written, designed):
    _, paths = written["uav"]
    _, text = _svg_text(paths[1])
    # [derived] the UAV schedules in dynamic pressure, shown in kPa with the EAS on a second axis
    assert "dynamic pressure (kPa)" in text
    assert "equivalent airspeed (m/s)" in text
    assert "damper gain K (s)" in text
    _, result = designed["uav"]
    # [derived] one annotated value per breakpoint, written with 3 significant figures
    for k in np.ravel(result.schedule.gains):
        assert f"{k:.3g} s" in text


def test_regional_gain_plot_is_a_table_over_altitude_and_mach(written, designed):
    _, paths = written["regional"]
    _, text = _svg_text(paths[1])
    _, result = designed["regional"]
    assert result.schedule.variables == ("altitude", "mach")  # [derived] cases/regional_twinjet_envelope.yaml
    assert "Mach number" in text and "altitude (km)" in text
    for k in np.ravel(result.schedule.gains):  # [derived] every node's gain is written on the heat map
        assert f"{k:.3g}" in text


@pytest.mark.parametrize("name", sorted(CASES))
def test_maps_one_panel_per_configuration(written, designed, name):
    _, paths = written[name]
    _, result = designed[name]
    for p in (paths[3], paths[5]):
        _, text = _svg_text(p)
        assert "true airspeed (m/s)" in text
        assert "flight envelope" in text  # [derived] both demo cases have an envelope section
        for conf in result.configurations:  # [derived] panel titles start with the configuration name
            assert f"{conf}:" in text


def test_failures_and_undefined_values_are_drawn(designed, tmp_path):
    """Invented failures: every third point fails, some damping and margins undefined (NaN)."""
    case, result = designed["uav"]
    ver = result.verification
    n = ver.passed.size
    passed = np.arange(n) % 3 != 0
    damping = np.where(np.arange(n) % 17 == 0, np.nan, ver.damping_ratio)
    margin = np.where(np.arange(n) % 11 == 0, np.nan, ver.smallest_margin_db)
    bad = dataclasses.replace(ver, passed=passed, damping_ratio=damping, smallest_margin_db=margin)
    feasible = np.zeros_like(np.asarray(result.design.feasible, bool))
    res = dataclasses.replace(result, verification=bad, passed=False,
                              design=dataclasses.replace(result.design, feasible=feasible))
    paths = schedule_plots(case, res, tmp_path, schedule_figure_inputs(case, res))
    assert len(paths) == 6  # [derived] same six files whatever the verdict
    _, gain_text = _svg_text(paths[1])
    assert "fails a requirement" in gain_text
    assert "no gain meets every requirement" in gain_text  # infeasible breakpoints flagged
    _, damp_text = _svg_text(paths[3])
    # [derived] number of invented failures: indices 0, 3, 6, ... of n points
    assert f"{int(np.sum(~passed))} of {n} verification points fail" in damp_text
    assert "no damping ratio (divergent short period)" in damp_text
    _, margin_text = _svg_text(paths[5])
    assert "gain margin unbounded" in margin_text


def test_svg_identical_on_rerun(designed, written, tmp_path):
    case, result = designed["regional"]
    _, first = written["regional"]
    again = schedule_plots(case, result, tmp_path, schedule_figure_inputs(case, result))
    # [derived] svg.hashsalt fixed and the date left out: a rerun writes the same bytes
    for a, b in zip(first, again):
        if a.endswith(".svg"):
            with open(a, "rb") as fa, open(b, "rb") as fb:
                assert fa.read() == fb.read()
