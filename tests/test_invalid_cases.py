"""The malformed-case corpus: every file gives one exact, clear line and exit code 2.

tests/cases/invalid/*.yaml are small invented cases, each with one thing wrong;
tests/cases/invalid/expected.yaml holds the exact stderr line of each (paths
relative to the repository root, where the CLI is run). Every message must name
the file, the key path (where there is one) and the value (where there is one).
Source of every expected line: [derived] from the loader's documented message
format (docs/errors.md), checked by reading each as a user would.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

from damper.case import load_case
from damper.cli import main
from damper.errors import CaseError, _show

ROOT = Path(__file__).resolve().parents[1]
CORPUS = ROOT / "tests" / "cases" / "invalid"
EXPECTED = yaml.safe_load((CORPUS / "expected.yaml").read_text(encoding="utf-8"))
FILES = sorted(p.name for p in CORPUS.glob("*.yaml") if p.name != "expected.yaml")

#: Problems with the file as a whole: no key path to name.
FILE_LEVEL = {
    "empty.yaml",
    "comments_only.yaml",
    "top_level_list.yaml",
    "top_level_scalar.yaml",
    "non_utf8.yaml",
    "missing_title.yaml",
    "missing_conditions.yaml",
    "yaml_bad_indent.yaml",
    "yaml_mapping_in_value.yaml",
    "yaml_tab_indent.yaml",
    "yaml_two_documents.yaml",
    "yaml_unclosed_flow.yaml",
    "yaml_unclosed_quote.yaml",
    "yaml_undefined_alias.yaml",
    "yaml_unhashable_key.yaml",
    # the section's key path is named inside the message
    "missing_altitude.yaml",
    "missing_M_q.yaml",
    "missing_pitch_inertia.yaml",
}

#: Files whose message must show the offending value (a value exists and is the problem).
VALUE_PREFIXES = ("type_", "unit_", "nonfinite_", "negative_", "zero_", "octal_", "base60_", "hex_", "huge_")
NO_VALUE = {"type_condition_item_empty.yaml", "type_null_required.yaml"}  # nothing was written
VALUE_FILES = {
    "M_delta_zero.yaml",
    "Cm_delta_zero.yaml",
    "altitude_beyond_atmosphere.yaml",
    "altitude_below_atmosphere.yaml",
    "geometric_altitude_below_model.yaml",
    "mach_too_high.yaml",
    "delay_too_long.yaml",
    "points_per_decade_low.yaml",
    "duplicate_condition_name.yaml",
    "notch_depth_ge_width.yaml",
    "range_backwards.yaml",
    "range_high_below_default.yaml",
    "hertz_angular_frequency.yaml",
    "sample_rate_angle.yaml",
    "altitude_kind_typo.yaml",
    "filter_unknown_kind.yaml",
    "text_yes_no.yaml",
    "condition_mass_zero.yaml",
    "alias_bomb.yaml",
    "bad_date_value.yaml",
    "quantity_text_too_long.yaml",
    "condition_name_too_long.yaml",
    # issue 17
    "subnormal_M_delta.yaml",
    "M_delta_negligible.yaml",
    "speed_beyond_orbital.yaml",
    "speed_above_mach_limit.yaml",
    "mass_absurd.yaml",
    "pitch_inertia_absurd.yaml",
    "travel_beyond_half_turn.yaml",
    "response_steps_too_many.yaml",
    "envelope_speed_above_mach_limit.yaml",
    # issue 18
    "schedule_inverse_q_wrong_variable.yaml",
    "response_step_over_tenth.yaml",
    "response_output_step_below_step.yaml",
    "uncertainty_delay_without_delay.yaml",
    "uncertainty_speed_derivative_short_period.yaml",
    "uncertainty_sensor_not_first_order.yaml",
}

#: A sample run as real processes, to prove there is no traceback outside Python's own handler.
SUBPROCESS_SAMPLE = (
    "unknown_key.yaml",
    "yaml_unclosed_quote.yaml",
    "tag_os_system.yaml",
    "non_utf8.yaml",
    "empty.yaml",
    "unit_wrong_dimension_speed.yaml",
    "octal_leading_zero.yaml",
    "merge_bomb.yaml",
    "alias_bomb.yaml",
    "overflowing_model.yaml",
    "unit_power_tower_speed.yaml",
    "unit_power_tower_mass.yaml",
    "too_many_conditions.yaml",
)


def _rel(name: str) -> str:
    return f"tests/cases/invalid/{name}"


def _run_cli(argv):
    return subprocess.run(
        [sys.executable, "-m", "damper", *argv],
        cwd=ROOT,
        capture_output=True,
        text=True,
        timeout=120,
        env={**os.environ, "PYTHONWARNINGS": "ignore"},
    )


def test_corpus_is_complete():
    assert len(FILES) >= 45
    assert sorted(EXPECTED) == sorted(FILES), "expected.yaml and the corpus files must match one to one"


@pytest.mark.parametrize("name", FILES)
def test_message_in_process(name, capsys, monkeypatch):
    monkeypatch.chdir(ROOT)
    code = main(["assess", _rel(name), "--gain", "0.3"])
    out, err = capsys.readouterr()
    lines = err.splitlines()
    assert code == 2, err
    assert out == ""
    assert len(lines) == 1, err
    assert "Traceback" not in err
    assert lines[0] == EXPECTED[name]
    assert lines[0].startswith(f"damper: error: {_rel(name)}")


@pytest.mark.parametrize("name", FILES)
def test_message_names_path_and_value(name, monkeypatch):
    monkeypatch.chdir(ROOT)
    with pytest.raises(CaseError) as info:
        load_case(_rel(name))
    exc = info.value
    assert exc.file == _rel(name)
    line = EXPECTED[name]
    if name not in FILE_LEVEL:
        assert exc.path, f"{name}: no key path in {line!r}"
        assert f": {exc.path}" in line
    if (name.startswith(VALUE_PREFIXES) or name in VALUE_FILES) and name not in NO_VALUE:
        assert exc.value is not CaseError._UNSET, f"{name}: no value in {line!r}"
        assert f" = {_show(exc.value)}: " in line


@pytest.mark.parametrize("name", SUBPROCESS_SAMPLE)
def test_message_subprocess(name):
    proc = _run_cli(["assess", _rel(name), "--gain", "0.3"])
    assert proc.returncode == 2, proc.stderr
    assert "Traceback" not in proc.stderr
    assert proc.stderr.splitlines() == [EXPECTED[name]]
    assert proc.stdout == ""


def test_debug_shows_traceback():
    proc = _run_cli(["--debug", "assess", _rel("unknown_key.yaml"), "--gain", "0.3"])
    assert proc.returncode != 0
    assert "Traceback" in proc.stderr
    assert "CaseError" in proc.stderr
    assert "unknown key 'airsped'" in proc.stderr


def test_huge_file_is_refused(tmp_path):
    # a valid start followed by > 2 MB of comment lines: refused before parsing
    path = tmp_path / "huge.yaml"
    body = (CORPUS / "unknown_key.yaml").read_text(encoding="utf-8").replace("airsped", "airspeed")
    path.write_text(body + ("# padding line of an invented case file\n" * 60_000), encoding="utf-8")
    assert path.stat().st_size > 2_000_000
    proc = _run_cli(["assess", str(path), "--gain", "0.3"])
    assert proc.returncode == 2
    assert proc.stderr.splitlines() == [
        f"damper: error: {path}: is too large for a case file (more than 2000000 bytes)"
    ]


def test_huge_multibyte_file_is_too_large_not_bad_utf8(tmp_path):
    # the read stops at the size limit, possibly inside a multi-byte character
    path = tmp_path / "huge_utf8.yaml"
    path.write_text("title: " + "\u00b0" * 1_100_000 + "\n", encoding="utf-8")
    with pytest.raises(CaseError) as info:
        load_case(path)
    assert str(info.value) == f"{path}: is too large for a case file (more than 2000000 bytes)"


def test_deep_nesting_is_refused(tmp_path, capsys):
    path = tmp_path / "deep.yaml"
    path.write_text("title: " + "[" * 5000 + "]" * 5000 + "\n", encoding="utf-8")
    code = main(["assess", str(path), "--gain", "0.3"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.splitlines() == [f"damper: error: {path}: YAML is nested too deeply for a case file"]


def test_special_files_are_refused_without_blocking(tmp_path, capsys):
    # issue 17: a FIFO given as the case file blocked forever (a device never ends)
    fifo = tmp_path / "case.yaml"
    os.mkfifo(fifo)
    proc = _run_cli(["assess", str(fifo), "--gain", "0.3"])  # the 120 s time-out guards the old hang
    assert proc.returncode == 2
    assert proc.stderr.splitlines() == [
        f"damper: error: {fifo}: is a FIFO (named pipe), not a regular file: give a case file (damper never reads "
        "from a pipe or a device, which could block or never end)"
    ]
    if os.path.exists("/dev/zero"):
        assert main(["assess", "/dev/zero", "--gain", "0.3"]) == 2
        assert "is a character device, not a regular file" in capsys.readouterr().err
    run = tmp_path / "run"
    run.mkdir()
    os.mkfifo(run / "design.json")
    assert main(["robust", str(CORPUS.parent.parent.parent / "cases" / "utility_single_uncertain.yaml"),
                 "--design", str(run), "--out", str(tmp_path / "out")]) == 2
    assert "is a FIFO (named pipe)" in capsys.readouterr().err


def test_missing_file_and_directory(tmp_path, capsys):
    missing = tmp_path / "absent.yaml"
    assert main(["assess", str(missing), "--gain", "0.3"]) == 2
    assert capsys.readouterr().err.splitlines() == [f"damper: error: {missing}: no such file"]
    assert main(["assess", str(tmp_path), "--gain", "0.3"]) == 2
    assert capsys.readouterr().err.splitlines() == [f"damper: error: {tmp_path}: is a directory, not a case file"]


def test_merge_keys_override_instead_of_duplicate():
    # '<<' merges are plain YAML: the mapping's own keys win, this is no duplicate
    text = """
title: Invented merge case
aircraft: {mass: 5000, pitch_inertia: 20000}
conditions:
  - &base
    name: low
    airspeed: 120
    altitude: 1000
    derivatives: {Z_alpha: -250, M_alpha: -6, M_q: -1.2, M_delta: -10}
  - <<: *base
    name: high
    altitude: 6000
"""
    from damper.case import load_case_text

    case = load_case_text(text, "merge.yaml")
    assert case.names == ("low", "high")
    assert case.conditions[1].altitude_input == 6000.0
    assert case.conditions[1].airspeed == 120.0


def test_design_refuses_an_envelope_case_without_a_schedule_before_any_output(tmp_path, monkeypatch, capsys):
    """An envelope case with no schedule: is valid for assess, but gives design nothing to do:
    one line, exit 2, and no run directory (common practice: refuse rather than write an
    empty design)."""
    import re

    text = (ROOT / "cases" / "regional_twinjet_envelope.yaml").read_text(encoding="utf-8")
    section = re.search(r"^schedule:\n(?:[ #].*\n|\n)*", text, re.M)
    assert section is not None
    case = tmp_path / "no_schedule.yaml"
    case.write_text(text[: section.start()] + text[section.end():], encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    assert main(["assess", str(case), "--gain", "0.3", "--json"]) in (0, 3)  # valid input elsewhere
    capsys.readouterr()
    code = main(["design", str(case), "--out", str(tmp_path / "run"), "--no-plots"])
    err = capsys.readouterr().err.splitlines()
    assert code == 2
    assert len(err) == 1 and "nothing to design" in err[0] and "schedule:" in err[0]
    assert not (tmp_path / "run").exists()
