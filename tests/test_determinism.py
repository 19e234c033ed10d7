"""Same input, same command: byte-identical outputs (design.md s.8, common practice)."""

import os

from .conftest import ROOT
from .shared_runs import run_main

DEMO = os.path.join(ROOT, "cases", "utility_single_aft_cg.yaml")


def _outputs(out):
    return {name: (out / name).read_bytes() for name in sorted(os.listdir(out)) if name.endswith((".json", ".csv", ".yaml", ".h"))}


def test_design_twice_gives_identical_bytes(tmp_path, shared_run):
    import json

    # the first run is the shared `design DEMO --out run --no-plots` (tests/shared_runs.py); the
    # second repeats its command line byte for byte in a directory of its own
    shared = shared_run("utility_single_aft_cg")
    assert shared.code == 0 and shared.argv[1] == DEMO, shared.stderr
    first = _outputs(shared.path)
    code, _, err = run_main(shared.argv, cwd=tmp_path)
    assert code == 0, err
    second = _outputs(tmp_path / "run")
    assert first.keys() == second.keys() and "design.json" in first
    # the manifest lists report.html, which carries its build date (docs/run-directory.md):
    # every other entry is the same
    manifests = [json.loads(run.pop("manifest.json")) for run in (first, second)]
    for m in manifests:
        m["files"] = [f for f in m["files"] if f["path"] != "report.html"]
    assert manifests[0] == manifests[1] and len(manifests[0]["files"]) > 1
    for name in first:
        assert first[name] == second[name], name


def test_outputs_carry_provenance(shared_run):
    import hashlib
    import json

    shared = shared_run("utility_single_aft_cg")  # design DEMO --no-plots (tests/shared_runs.py)
    assert shared.code == 0, shared.stderr
    doc = json.loads((shared.path / "design.json").read_text())
    prov = doc["provenance"]
    with open(DEMO, "rb") as fh:
        assert prov["input_sha256"] == hashlib.sha256(fh.read()).hexdigest()
    for key in ("tool_version", "numpy", "scipy", "python", "command", "seed"):
        assert key in prov
    assert "--out" in prov["command"]
