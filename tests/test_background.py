"""Figures drawn by the background worker process equal those drawn in this process."""

import os

import pytest

from damper.output.background import PlotJobs, run_jobs


@pytest.fixture(scope="module", autouse=True)
def _both_formats(both_formats):
    """These tests check the PNG and the SVG of each figure (the default writes SVG alone)."""



def _tree(root):
    out = {}
    for dirpath, _, names in os.walk(root):
        for n in names:
            p = os.path.join(dirpath, n)
            with open(p, "rb") as f:
                out[os.path.relpath(p, root)] = f.read()
    return out


@pytest.fixture(scope="module")
def design():
    from damper.analysis.batches import sub_case
    from damper.analysis.search import SearchSettings, search
    from damper.case import load_case

    case = load_case(os.path.join(os.path.dirname(__file__), "..", "cases", "utility_single_aft_cg.yaml"))
    # the first two conditions: the four figures drawn below are theirs (3 per condition), and
    # which process draws a figure does not depend on the conditions not drawn
    case = sub_case(case, [0, 1])
    return case, search(case, SearchSettings(points=41))


def test_worker_process_draws_byte_identical_files(design, tmp_path):
    # common practice: output must not depend on which process draws it
    from damper.analysis.design_figures import design_figure_inputs
    from damper.output.figures.design import design_plot_jobs

    case, result = design
    here = tmp_path / "here"
    there = tmp_path / "there"
    jobs_here = design_plot_jobs(case, result, design_figure_inputs(case, result), here)[:4]
    jobs_there = design_plot_jobs(case, result, design_figure_inputs(case, result), there)[:4]
    paths_here = run_jobs(jobs_here)
    with PlotJobs(workers=1) as jobs:
        assert jobs.in_background
        first = jobs.submit_group(jobs_there[:2])
        fn, args = jobs_there[2]
        second = jobs.submit(fn, *args)
        third = jobs.submit_group(jobs_there[3:])
        all_paths = jobs.finish()
    assert all_paths == jobs.paths(first) + jobs.paths(second) + jobs.paths(third)
    assert [os.path.relpath(p, there) for p in all_paths] == [os.path.relpath(p, here) for p in paths_here]
    assert _tree(here) == _tree(there)
    assert len(_tree(here)) == 8  # 4 figures x (PNG, SVG)


def test_no_worker_runs_jobs_at_once_in_order(tmp_path, monkeypatch):
    monkeypatch.setenv("DAMPER_PLOT_WORKERS", "0")
    calls = []

    def job(name):
        calls.append(name)
        return [name]

    jobs = PlotJobs()
    assert not jobs.in_background
    a = jobs.submit(job, "a")
    assert calls == ["a"]  # ran when submitted
    b = jobs.submit_group([(job, ("b",)), (job, ("c",))])
    assert jobs.finish() == ["a", "b", "c"]
    assert jobs.paths(a) == ["a"] and jobs.paths(b) == ["b", "c"]


def test_job_errors_reach_the_caller(tmp_path):
    # a failing figure must fail the command, not vanish in the worker
    with PlotJobs(workers=1) as jobs:
        jobs.submit(os.listdir, str(tmp_path / "missing"))
        with pytest.raises(FileNotFoundError):
            jobs.finish()
