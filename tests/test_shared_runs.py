"""The shared end-to-end runs of the tests (tests/shared_runs.py) are keyed by what they run.

A demo named with or without ``.yaml`` is the same command line, so it must be the same
shared run: two keys for one command designed every demo case twice per test run.
"""

from .shared_runs import NO_PLOTS, REPORT_OPTIONS, _key, case_path, design_argv


def test_a_demo_named_with_or_without_yaml_is_one_shared_run():
    for options in (NO_PLOTS, REPORT_OPTIONS):
        assert _key("utility_single_aft_cg", options) == _key("utility_single_aft_cg.yaml", options)
        assert design_argv("utility_single_aft_cg", options) == design_argv("utility_single_aft_cg.yaml", options)
    assert _key("utility_single_aft_cg", NO_PLOTS) != _key("utility_single_aft_cg", REPORT_OPTIONS)
    assert _key("utility_single_aft_cg", NO_PLOTS) != _key("survey_uav_altitude", NO_PLOTS)
    assert case_path("utility_single_aft_cg").is_file()
