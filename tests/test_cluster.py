"""A robustness study on local processes and on Dask equals the study in one process (issue 23, items 4 and 5).

The reference is always the same study run in this process with one worker: the result must
not depend on where the blocks of samples are evaluated (Source: design.md section 10 and
issue 23: "robustness.json is byte-identical whatever the number of workers or machines and
identical to the local run (the recorded command line aside)"). The Dask clusters are
in-process ``distributed.LocalCluster(processes=False)`` started here; no network.
"""

from __future__ import annotations

import io
import json
import os
import sys
from contextlib import redirect_stderr, redirect_stdout

import pytest

from damper.cli import main

from .conftest import ROOT



@pytest.fixture(scope="module", autouse=True)
def _needs_distributed():
    """Skip without dask.distributed (imported here, not at collection: it takes about a second
    to import, which every pytest worker would pay even when it runs none of these tests)."""
    pytest.importorskip("distributed")

UNCERTAIN = os.path.join(ROOT, "cases", "utility_single_uncertain.yaml")


def _small_case(tmp_path):
    """Two conditions of the uncertain demo with three uncertain parameters (8 corners)."""
    import yaml

    with open(UNCERTAIN, encoding="utf-8") as fh:
        doc = yaml.safe_load(fh)
    doc["conditions"] = doc["conditions"][:2]
    doc["uncertainty"] = {"samples": 40, "seed": 7, "parameters": [
        {"name": "M_alpha", "relative": 0.3}, {"name": "M_q", "relative": 0.3}, {"name": "delay", "relative": 0.5}]}
    path = tmp_path / "small.yaml"
    path.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
    return str(path)


def _robust(args):
    """Run ``damper robust`` in this process; (exit code, stdout, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        code = main(["robust", *args])
    return code, out.getvalue(), err.getvalue()


def _without_command(path):
    """The bytes of robustness.json without its one line holding the recorded command line."""
    with open(path, "rb") as fh:
        lines = fh.read().split(b"\n")
    kept = [line for line in lines if not line.lstrip().startswith(b'"command": ')]
    assert len(kept) == len(lines) - 1  # exactly one such line
    return b"\n".join(kept)


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """The small case and its robustness.json from one process and one worker (the reference)."""
    tmp = tmp_path_factory.mktemp("cluster")
    case = _small_case(tmp)
    out = tmp / "local"
    code, _, err = _robust([case, "--gain", "0.25", "--workers", "1", "--no-plots", "--quiet", "--out", str(out)])
    assert code in (0, 3), err
    return case, tmp, _without_command(out / "robustness.json")


@pytest.fixture(scope="module", params=[1, 3], ids=["1-worker", "3-workers"])
def cluster(request):
    """An in-process Dask cluster with 1 or 3 single-thread workers."""
    import distributed

    with distributed.LocalCluster(n_workers=request.param, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as lc:
        yield lc


def test_cluster_run_is_byte_identical_to_the_local_run(small, cluster):
    case, tmp, reference = small
    out = tmp / f"dask-{len(cluster.workers)}"
    code, stdout, err = _robust([case, "--gain", "0.25", "--cluster", cluster.scheduler_address, "--no-plots",
                                 "--quiet", "--out", str(out)])
    assert code in (0, 3), err
    assert "Traceback" not in err
    assert _without_command(out / "robustness.json") == reference
    doc = json.loads((out / "robustness.json").read_text(encoding="utf-8"))
    assert "--cluster" in doc["provenance"]["command"]  # the only difference is where it ran
    assert f"on the Dask cluster at {cluster.scheduler_address}" in stdout


def _design_robustness(case, out, *extra):
    """robustness.json (without its command line) of ``damper design`` run in this process."""
    with redirect_stdout(io.StringIO()), redirect_stderr(io.StringIO()):
        code = main(["design", case, "--no-plots", "--no-report", "--no-responses", "--quiet", "--out", str(out),
                     *extra])
    assert code in (0, 3)
    return _without_command(out / "robustness.json")


@pytest.fixture(scope="module")
def design_local(small):
    """The local design run's robustness.json: the reference of both cluster sizes (it was
    designed once per cluster, the same command on the same case)."""
    case, tmp, _ = small
    return _design_robustness(case, tmp / "design-local")


def test_design_runs_its_robustness_stage_on_the_cluster(small, cluster, design_local):
    case, tmp, _ = small
    remote = _design_robustness(case, tmp / f"design-dask-{len(cluster.workers)}", "--cluster",
                                cluster.scheduler_address)
    assert remote == design_local


def test_two_local_processes_give_the_one_process_result(small):
    case, tmp, reference = small
    out = tmp / "processes-2"
    code, _, err = _robust([case, "--gain", "0.25", "--workers", "2", "--no-plots", "--quiet", "--out", str(out)])
    assert code in (0, 3), err
    assert _without_command(out / "robustness.json") == reference


@pytest.fixture(scope="module")
def inline_blocks(small):
    """(case, spec, study) of the small case in blocks of 8 loops, run in this process with one
    worker: the reference of both cluster sizes (it was run once per cluster, the same study)."""
    from damper.analysis.robustness import robustness, uncertainty_spec
    from damper.case import load_case

    case = load_case(small[0])
    spec = uncertainty_spec(case, chunk=8, refine_iterations=6)
    return case, spec, robustness(case, 0.25, spec, workers=1)


def test_many_small_blocks_spread_over_the_dask_workers_give_the_inline_result(inline_blocks, cluster):
    # blocks of 8 loops: the samples, corners and worst-case search cut into many tasks, so
    # several workers really share them and results arrive out of order
    import distributed

    from damper.analysis.robustness import robustness
    from damper.output.documents.jsonout import dumps
    from damper.output.documents.robustness import robustness_document

    case, spec, local = inline_blocks
    with distributed.Client(cluster, set_as_default=False) as client, \
            distributed.get_task_stream(client=client) as stream:
        remote = robustness(case, 0.25, spec, cluster=client)
    ran_on = {task["worker"] for task in stream.data}
    assert len(stream.data) > 20 and len(ran_on) >= min(2, len(cluster.workers))  # the workers did the work
    assert remote.evaluations == local.evaluations
    assert dumps(robustness_document(case, remote, command="c")) == dumps(robustness_document(case, local, command="c"))


def test_an_unreachable_scheduler_is_one_line_and_exit_2(small, tmp_path):
    import dask

    case = small[0]
    for command in (["robust", case, "--gain", "0.25"], ["design", case]):
        out = tmp_path / command[0]
        err = io.StringIO()
        # port 1 on this machine: nothing listens there (common practice: tcpmux, unused)
        with dask.config.set({"distributed.comm.timeouts.connect": "1s"}), redirect_stdout(io.StringIO()), \
                redirect_stderr(err):
            code = main([*command, "--cluster", "tcp://127.0.0.1:1", "--no-plots", "--out", str(out)])
        lines = err.getvalue().strip().splitlines()
        assert code == 2, err.getvalue()
        assert len(lines) == 1 and lines[0].startswith(
            "damper: error: --cluster tcp://127.0.0.1:1: cannot reach a Dask scheduler there"), lines
        assert not out.exists()  # nothing written


def test_without_dask_the_cluster_option_says_what_to_install(small, tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed raises ImportError
    code, _, err = _robust([small[0], "--gain", "0.25", "--cluster", "tcp://127.0.0.1:1", "--out", str(tmp_path / "r")])
    assert code == 2
    assert err.strip() == ("damper: error: --cluster needs dask.distributed, which is not installed: "
                           "pip install 'damper[cluster]'")


def test_workers_and_cluster_together_are_refused(small, tmp_path):
    code, _, err = _robust([small[0], "--gain", "0.25", "--workers", "2", "--cluster", "tcp://127.0.0.1:1",
                            "--out", str(tmp_path / "r")])
    assert code == 2 and err.startswith("damper: error: --workers and --cluster")


def test_a_dead_worker_process_is_one_line_not_a_traceback():
    from concurrent.futures import Future
    from concurrent.futures.process import BrokenProcessPool

    from damper.analysis.runners import _process_failure, _Translated
    from damper.errors import DamperError

    broken = Future()
    broken.set_exception(BrokenProcessPool("A process in the process pool was terminated abruptly"))
    with pytest.raises(DamperError, match="ended abruptly"):
        _Translated(broken, _process_failure).result()
    failed = Future()
    failed.set_exception(ZeroDivisionError("a bug"))  # a bug in a task stays a bug (exit 1 with its name)
    with pytest.raises(ZeroDivisionError):
        _Translated(failed, _process_failure).result()
