"""The command line: assess JSON structure, design run directory rules, sweep."""

import json
import os
import subprocess
import sys

from damper.cli import main

from .conftest import ROOT

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")


def test_assess_json_structure(capsys):
    assert main(["assess", DEMO, "--gain", "0.1", "--json"]) in (0, 3)  # 0 met, 3 not met: the verdict (docs/verdict.md) is checked in tests/test_verdict.py
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["conditions"]) == 7
    c = doc["conditions"][0]
    # the contract of the foundation issue
    assert set(["name", "gain_s", "bare", "closed_loop", "margins"]) <= set(c)
    assert set(["damping_ratio", "natural_frequency_rad_s", "period_s"]) <= set(c["bare"]["short_period"])
    assert set(["stable", "eigenvalues", "short_period"]) <= set(c["closed_loop"])
    assert set(["damping_ratio", "natural_frequency_rad_s", "ambiguous"]) <= set(c["closed_loop"]["short_period"])
    for key in ("gain_margin_db", "gain_margin_low_db", "phase_margin_deg", "gain_crossover_rad_s",
                "phase_crossover_rad_s", "delay_margin_s", "disk_margin"):
        assert key in c["margins"]
    assert all(len(e) == 2 for e in c["closed_loop"]["eigenvalues"])
    # handling-qualities additions
    assert set(["damping_ratio", "natural_frequency_rad_s", "time_delay_s", "mismatch"]) <= set(c["closed_loop"]["equivalent"])
    names = [k["name"] for k in c["criteria"]]
    assert names[0] == "stability" and "damping_ratio" in names
    assert all(set(["value", "lower", "upper", "slack", "met", "source"]) <= set(k) for k in c["criteria"])
    assert "provenance" in doc and len(doc["provenance"]["input_sha256"]) == 64
    assert "caution" in doc


def test_no_crossing_is_null(capsys):
    # a small gain: |L| < 1 everywhere, so no gain crossing and no phase margin (null)
    assert main(["assess", DEMO, "--gain", "0.01", "--json"]) in (0, 3)  # 0 met, 3 not met: the verdict (docs/verdict.md) is checked in tests/test_verdict.py
    c = json.loads(capsys.readouterr().out)["conditions"][0]
    assert c["margins"]["phase_margin_deg"] is None
    assert c["margins"]["gain_crossover_rad_s"] is None
    assert c["margins"]["delay_margin_s"] is None


def test_table_output_has_units_and_caution(capsys):
    assert main(["assess", DEMO, "--gain", "0.1"]) in (0, 3)  # 0 met, 3 not met: the verdict (docs/verdict.md) is checked in tests/test_verdict.py
    out = capsys.readouterr().out
    assert "rad/s" in out and "dB" in out and "deg" in out
    assert "Preliminary engineering analysis" in out


def test_bad_gain_is_a_clear_error(capsys):
    assert main(["assess", DEMO, "--gain", "nan"]) == 2
    assert "--gain" in capsys.readouterr().err


def test_design_writes_and_refuses_to_overwrite(tmp_path, capsys, shared_run):
    shared = shared_run("utility_single_aft_cg")  # design DEMO --no-plots (tests/shared_runs.py)
    assert shared.code == 0, shared.stderr
    out = shared.copy_to(tmp_path / "run")  # written into below: a copy
    doc = json.loads((out / "design.json").read_text())
    c = doc["conditions"][0]
    assert set(["chosen_gain_s", "feasible_gains_s", "edges", "measures"]) <= set(c)
    for cond in doc["conditions"]:
        if cond["feasible"]:
            assert any(a <= cond["chosen_gain_s"] <= b for a, b in cond["feasible_gains_s"])
    before = (out / "design.json").read_bytes()
    capsys.readouterr()
    assert main(["design", DEMO, "--out", str(out), "--no-plots"]) == 2
    assert "earlier run" in capsys.readouterr().err
    assert (out / "design.json").read_bytes() == before
    assert main(["design", DEMO, "--out", str(out), "--no-plots", "--force"]) == 0


def test_sweep_unknown_condition_suggests(capsys):
    assert main(["sweep", DEMO, "--condition", "SL-climb-fw"]) == 2
    assert "did you mean 'SL-climb-fwd'" in capsys.readouterr().err


def test_help_is_fast_and_imports_nothing_heavy():
    # design.md s.9: start-up must not import numpy/scipy/matplotlib/python-control
    code = "import sys; from damper.cli import _parser; _parser(); print(sorted(m for m in ('numpy','scipy','matplotlib','control','pint') if m in sys.modules))"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True).stdout
    assert out.strip() == "[]"


def test_negative_values_in_exponent_form_reach_the_option(capsys):
    # argparse alone reads '-1e-3' as an option ('expected one argument'); the value
    # reaches --gain-min and gets the command's own message [common practice].
    assert main(["design", DEMO, "--gain-min", "-1e-3", "--out", "unused"]) == 2
    err = capsys.readouterr().err
    assert "--gain-min = -0.001" in err and "expected one argument" not in err
    assert main(["assess", DEMO, "--gain", "-inf"]) == 2
    assert "--gain = -inf" in capsys.readouterr().err
