"""Every JSON document and gain table of every demo case's design run, hashed.

A restructuring of the code must not change a single output byte. This test reads the shared
design run of every demo case (tests/shared_runs.py: without figures, which are checked
elsewhere; the report is written but not hashed) and compares the SHA-256
of each JSON document, CSV, YAML and C header with `tests/data/demo_run_hashes.json`
(common practice: a golden-file regression test). Left out, because they hold what differs
between two honest runs: in each document's provenance the recorded command line (it holds
`--out`), the input's path and the versions of python and its libraries; and the run's
manifest (it lists files by their own hashes).

When an output changes on purpose, regenerate the stored hashes and say why in the commit:

    python tests/test_run_hashes.py --update
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import tempfile

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
STORE = os.path.join(ROOT, "tests", "data", "demo_run_hashes.json")
DEMOS = ("utility_single_aft_cg", "utility_single_uncertain", "survey_uav_altitude", "regional_twinjet_envelope",
         "survey_uav_loiter_longitudinal", "light_twin_damper_authority")
#: What a document's ``provenance`` keeps: the rest (the command line with --out, the input's
#: path, the versions of python and its libraries) differs between two honest runs.
KEPT_PROVENANCE = ("tool", "tool_version", "input_sha256", "seed")


def _strip(obj):
    """The document without the values that differ between honest runs (see the module notes)."""
    if isinstance(obj, dict):
        return {
            k: ({p: v[p] for p in KEPT_PROVENANCE if p in v} if k == "provenance" and isinstance(v, dict) else _strip(v))
            for k, v in obj.items()
        }
    if isinstance(obj, list):
        return [_strip(v) for v in obj]
    return obj


def hash_run(out_dir):
    """{file: sha256} of the JSON documents and tables of a design run (JSON normalised, tables raw)."""
    hashes = {}
    for base, _, files in os.walk(out_dir):
        for name in sorted(files):
            if not name.endswith((".json", ".csv", ".yaml", ".h")) or name == "manifest.json":
                continue
            path = os.path.join(base, name)
            rel = os.path.relpath(path, out_dir)
            with open(path, "rb") as fh:
                data = fh.read()
            if name.endswith(".json"):
                data = json.dumps(_strip(json.loads(data)), sort_keys=True).encode()
            hashes[rel] = hashlib.sha256(data).hexdigest()
    return dict(sorted(hashes.items()))


@pytest.mark.parametrize("case_name", DEMOS)
def test_demo_run_outputs_are_unchanged(case_name, shared_run):
    with open(STORE, encoding="utf-8") as fh:
        stored = json.load(fh)[case_name]
    run = shared_run(case_name)
    assert run.code in (0, 3), run.stderr
    now = hash_run(run.path)
    changed = sorted(k for k in set(stored) | set(now) if stored.get(k) != now.get(k))
    assert not changed, (
        f"{case_name}: outputs changed: {changed}. If on purpose, run "
        "`python tests/test_run_hashes.py --update` and say why in the commit."
    )


if __name__ == "__main__" and "--update" in sys.argv:
    sys.path.insert(0, ROOT)
    from tests.shared_runs import shared_design

    table = {}
    with tempfile.TemporaryDirectory() as tmp:
        for name in DEMOS:
            run = shared_design(tmp, name)  # the same command line as the test's shared runs
            assert run.code in (0, 3), run.stderr
            table[name] = hash_run(run.path)
    os.makedirs(os.path.dirname(STORE), exist_ok=True)
    with open(STORE, "w", encoding="utf-8") as fh:
        json.dump(table, fh, indent=1, sort_keys=True)
        fh.write("\n")
    print(f"wrote {STORE}: " + ", ".join(f"{k} ({len(v)} files)" for k, v in table.items()))
