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
    import json

    out = tmp_path / "run"
    first = _run(out)
    shutil.rmtree(out)
    second = _run(out)
    assert first.keys() == second.keys() and "design.json" in first
    # the manifest lists report.html, which carries its build date (docs/run-directory.md):
    # every other entry is the same
    manifests = [json.loads(run.pop("manifest.json")) for run in (first, second)]
    for m in manifests:
        m["files"] = [f for f in m["files"] if f["path"] != "report.html"]
    assert manifests[0] == manifests[1] and len(manifests[0]["files"]) > 1
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
