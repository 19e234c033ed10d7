"""Same input, same command: byte-identical outputs (design.md s.8, common practice)."""

import os
import shutil

from damper.cli import main

from .conftest import ROOT

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")


def _run(out):
    assert main(["design", DEMO, "--out", str(out), "--no-plots"]) == 0
    return {name: (out / name).read_bytes() for name in sorted(os.listdir(out)) if name.endswith((".json", ".csv", ".yaml", ".h"))}


def test_design_twice_gives_identical_bytes(tmp_path, capsys):
    out = tmp_path / "run"
    first = _run(out)
    shutil.rmtree(out)
    second = _run(out)
    assert first.keys() == second.keys() and "design.json" in first
    for name in first:
        assert first[name] == second[name], name


def test_outputs_carry_provenance(tmp_path, capsys):
    import hashlib
    import json

    out = tmp_path / "run"
    _run(out)
    doc = json.loads((out / "design.json").read_text())
    prov = doc["provenance"]
    with open(DEMO, "rb") as fh:
        assert prov["input_sha256"] == hashlib.sha256(fh.read()).hexdigest()
    for key in ("tool_version", "numpy", "scipy", "python", "command", "seed"):
        assert key in prov
    assert "--out" in prov["command"]
