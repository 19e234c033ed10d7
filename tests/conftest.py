"""Shared test helpers."""

import os
import sys

import numpy as np
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
if ROOT not in sys.path:
    sys.path.insert(0, ROOT)

from damper.model.airframe import Derivatives  # noqa: E402

#: Textbook general-aviation example (Nelson, Flight Stability and Automatic Control,
#: 2nd ed., chapter 4): published dimensional derivatives, from memory, converted
#: from ft to m. u0 = 176 ft/s.
FT = 0.3048
TEXTBOOK_GA = Derivatives(
    airspeed=np.asarray(176 * FT),
    Z_alpha=np.asarray(-355.42 * FT),
    Z_q=np.asarray(0.0),
    Z_delta=np.asarray(-28.17 * FT),
    M_alpha=np.asarray(-8.80),
    M_alpha_dot=np.asarray(-0.90),
    M_q=np.asarray(-2.05),
    M_delta=np.asarray(-11.87),
)


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


def random_derivatives(rng, n, unstable_fraction=0.0):
    """Invented, physically plausible random derivatives (test data only)."""
    v = rng.uniform(30, 250, n)
    d = Derivatives(
        airspeed=v,
        Z_alpha=-rng.uniform(50, 1500, n),
        Z_q=-rng.uniform(0, 5, n),
        Z_delta=-rng.uniform(0, 60, n),
        M_alpha=-rng.uniform(0.5, 40, n) * np.where(rng.uniform(size=n) < unstable_fraction, -0.3, 1.0),
        M_alpha_dot=-rng.uniform(0, 1.5, n),
        M_q=-rng.uniform(0.3, 5, n),
        M_delta=-rng.uniform(3, 60, n),
    )
    return d


LB = 4.4482216152605  # N (force pound), by definition
SLUG = 14.593902937  # kg (one lbf s^2/ft), by definition


def textbook_ga_inputs() -> dict:
    """The textbook general-aviation example's inputs to ``from_coefficients``, SI.

    Source: Nelson, Flight Stability and Automatic Control, 2nd ed., ch. 4 general-aviation
    example inputs (read in secondary public copies, shared/references.md s.3): sea level,
    u0 = 176 ft/s, W = 2750 lb, S = 184 ft^2, c = 5.7 ft, Iy = 3000 slug ft^2 and the
    coefficients below.
    """
    from damper.atmosphere import RHO0

    v = 176 * FT
    return dict(
        dynamic_pressure=0.5 * RHO0 * v * v,
        airspeed=v,
        mass=2750 * LB / 9.80665,
        pitch_inertia=3000 * SLUG * FT**2,
        wing_area=184 * FT**2,
        mean_chord=5.7 * FT,
        CL_alpha=4.44,
        CD=0.05,
        CL_delta=0.355,
        Cm_alpha=-0.683,
        Cm_alpha_dot=-4.36,
        Cm_q=-9.96,
        Cm_delta=-0.923,
    )


#: Speed derivatives of the textbook general-aviation example (Nelson, Flight Stability
#: and Automatic Control, 2nd ed., chapter 4, dimensional derivatives, from memory):
#: X_u = -0.045 1/s, X_w = 0.036 1/s (so X_alpha = u0 X_w), Z_u = -0.369 1/s, M_u = 0.
TEXTBOOK_GA_SPEED = dict(X_u=-0.045, X_alpha=0.036 * 176 * FT, Z_u=-0.369, M_u=0.0)


def textbook_longitudinal():
    """The textbook general-aviation example as a four-state longitudinal model."""
    from damper.model.longitudinal import with_speed_terms

    return with_speed_terms(TEXTBOOK_GA, **TEXTBOOK_GA_SPEED)


def random_longitudinal(rng, n, unstable_fraction=0.0, climb=False):
    """Invented, physically plausible random longitudinal derivatives (test data only).

    The short-period part is :func:`random_derivatives`; Z_u near -2 g / V (level flight),
    X_u a small drag term, X_alpha of either sign, M_u a small tuck or thrust effect.
    """
    from damper.model.longitudinal import with_speed_terms

    d = random_derivatives(rng, n, unstable_fraction)
    v = d.airspeed
    return with_speed_terms(
        d,
        X_u=-rng.uniform(0.005, 0.08, n),
        X_alpha=rng.uniform(-3.0, 10.0, n),
        Z_u=-2 * 9.80665 / v * rng.uniform(0.8, 1.2, n),
        M_u=rng.uniform(-0.003, 0.003, n),
        X_delta=rng.uniform(-1.0, 1.0, n),
        flight_path_angle=rng.uniform(-0.1, 0.1, n) if climb else 0.0,
    )


# ---------------------------------------------------------------------------------
# Shared end-to-end runs and the `slow` marker (DEVELOPERS.md, "How to test")
# ---------------------------------------------------------------------------------
@pytest.fixture(scope="session")
def shared_run(tmp_path_factory):
    """``shared_run(case_name, options=("--no-plots",))``: a design run of a demo case built
    once per test run (tests/shared_runs.py) and read by every test that asks for it.

    ``shared_run.text(name, text, options=())``: the case ``text`` designed by the real executable
    in a subprocess (tests/test_progress.py reads its standard error).

    Never write into the returned ``SharedRun.path``: copy it (``run.copy_to(tmp_path / "x")``).
    At the end of the session every run handed out must be unchanged.
    """
    from .shared_runs import NO_PLOTS, case_stem, shared_design, shared_process_design, snapshot

    base = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER"):
        base = base.parent  # common to every worker of this test run
    runs, handed = {}, {}

    def get(case_name, options=NO_PLOTS):
        key = (case_stem(case_name), tuple(options))  # "x" and "x.yaml": one run
        if key not in runs:  # one SharedRun per run and process: its parsed documents are kept
            runs[key] = shared_design(base / "shared-runs", case_name, options)
            handed.setdefault(runs[key].path, snapshot(runs[key].path))
        return runs[key]

    def get_text(name, text, options=()):
        """The case ``text`` designed by ``python -m damper`` in a subprocess (shared_process_design)."""
        key = ("text", name, text, tuple(options))
        if key not in runs:
            runs[key] = shared_process_design(base / "shared-runs", name, text, options)
            handed.setdefault(runs[key].path, snapshot(runs[key].path))
        return runs[key]

    get.text = get_text
    yield get
    changed = [str(p) for p, snap in handed.items() if snapshot(p) != snap]
    assert not changed, f"a test wrote into a shared run (copy it instead): {changed}"


#: Tests marked `slow` besides those using `shared_run` (node-id prefixes relative to tests/;
#: a prefix covers every parametrisation): end-to-end runs with figures, subprocesses, browser
#: screenshots, property tests and the oracle comparisons that took 0.5 s of CPU or more on the
#: 2-core machine. `python -m pytest -m "not slow"` is the quick inner loop (DEVELOPERS.md);
#: `@pytest.mark.slow` on a test works too.
SLOW = (
    "test_cluster.py",  # Dask clusters and worker processes
    "test_pipeline.py::test_figures_go_to_the_tightest_conditions",
    "test_pipeline.py::test_the_stages_run_in_order_and_stream_their_batches",
    "test_pipeline.py::test_responses_stream_per_batch_and_keep_each_note_once",
    "test_api_doc.py::test_api_doc_examples_run",
    "test_api_doc.py::test_package_docstring_examples_run_as_doctests",
    "test_authority_response.py",
    "test_background.py",
    "test_bandwidth_e2e.py::test_attitude_bandwidth_through_assess_json",
    "test_compare.py",
    "test_design_stream.py::test_outputs_do_not_depend_on_the_batch_size",
    "test_design_stream.py::test_more_conditions_than_max_figures_draws_the_tightest",
    "test_equivalent.py::test_batched_no_worse_than_scipy_oracle",
    "test_equivalent.py::test_fit_is_bit_for_bit_independent_of_batch_and_chunking",
    "test_failures.py",
    "test_failures_design.py",
    "test_gain_source.py",
    "test_interrupt.py",
    "test_invalid_cases.py::test_message_subprocess",
    "test_invalid_cases.py::test_deep_nesting_is_refused",
    "test_longitudinal_case.py::test_demo_case_designs_cleanly",
    "test_longitudinal_case.py::test_assess_json_matches_the_four_state_oracle",
    "test_longitudinal_case.py::test_force_and_moment_forms_of_the_speed_derivatives",
    "test_longitudinal_loop.py::test_reduction_to_the_two_state_loop",
    "test_longitudinal_loop.py::test_attitude_bandwidth_of_the_four_state_loop",
    "test_loop_plot.py",
    "test_margins.py::test_disk_margin_against_python_control",
    "test_margins_oracle.py::test_margins_equal_the_dense_oracle_on_random_loops",
    "test_output_errors.py",
    "test_plot_fixes.py",
    "test_plots.py",
    "test_progress.py",
    "test_properties_input.py",
    "test_report.py",
    "test_response.py::test_batched_equals_each_condition_alone",
    "test_response.py::test_delay_matches_high_order_pade",
    "test_response.py::test_gust_matches_linear_simulation_and_load_factor_definition",
    "test_response.py::test_respond_command_writes_files_and_refuses_to_overwrite",
    "test_response.py::test_respond_into_a_design_run_rebuilds_its_report",
    "test_response.py::test_travel_limit_binds",
    "test_response.py::test_unlimited_loop_matches_linear_simulation",
    "test_robustness.py::test_cli_robust_writes_and_refuses_to_overwrite",
    "test_robustness.py::test_same_seed_same_results_and_bytes_different_seed_differs",
    "test_run_directory.py",
    "test_sample_stats.py::test_study_results_do_not_depend_on_blocks_shards_or_workers",
    "test_sample_stats.py::test_a_bounded_subsample_changes_no_count_or_worst_case",
    "test_schedule.py::test_exports_round_trip_and_are_byte_identical",
    "test_schedule.py::test_too_sparse_schedule_is_caught_and_repaired",
    "test_schedule.py::test_refinement_stops_when_infeasible_breakpoints_make_no_progress",
    "test_schedule.py::test_conditions_schedule_warns_when_variants_share_a_breakpoint",
    "test_schedule_plots.py",
    "test_schedule_robustness.py",
    "test_search.py::test_two_disjoint_intervals_match_the_oracle",
    "test_search.py::test_policies",
    "test_search.py::test_edges_refined_to_1e4_relative",
    "test_search.py::test_equivalent_mismatch_band_judges_the_fit_cost",
    "test_search.py::test_infeasible_condition_names_the_binding_requirement",
    "test_sweep_output.py::test_sweep_json_on_every_demo_case",
    "test_turbulence.py::test_rms_equals_the_frequency_domain_integral",
    "test_turbulence.py::test_bare_airframe_equals_the_oracle_without_a_damper",
    "test_turbulence.py::test_rice_rate_agrees_with_a_simulated_crossing_count",
    "test_turbulence_case.py::test_design_json_carries_turbulence_at_the_chosen_gain",
    "test_understood.py::test_design_json_keeps_the_values_as_written",
    "test_unit_table.py::test_random_products_equal_pint",
    "test_verdict.py::test_assess_verdict_items_carry_the_oracle_damping",
    "test_verdict.py::test_failing_",
    "test_verdict.py::test_infeasible_design_exits_3",
    # 0.4-0.9 s of CPU each (measured with --durations on a quiet machine)
    "test_simulation_paths.py",  # both simulation loops on 26 hostile loops and a demo's, bit for bit
    "test_figure_ticks.py",  # figures drawn with and without the tick and label changes
    "test_worst_case_search.py",  # worst-case searches with and without the point cache
    "test_turbulence.py::test_long_seeded_simulation_agrees_within_its_statistical_error",
    "test_house.py::test_no_function_over_80_lines",  # the three walk every module's syntax tree
    "test_house.py::test_nothing_outside_the_case_layer_reads_the_validated_values",
    "test_case_sections.py::test_no_module_outside_the_case_layer_reads_a_raw_case",
)


def pytest_collection_modifyitems(config, items):
    for item in items:
        nodeid = item.nodeid.split("tests/", 1)[-1]
        if "shared_run" in getattr(item, "fixturenames", ()) or nodeid.startswith(SLOW):
            item.add_marker(pytest.mark.slow)


@pytest.fixture(scope="module")
def both_formats():
    """Figures in PNG and SVG for a test module that checks both (the default is SVG alone:
    ``damper.output.options.DEFAULT_FORMATS``); the default is restored afterwards."""
    from damper.output.style import KNOWN_FORMATS, formats, set_formats

    before = formats()
    set_formats(KNOWN_FORMATS)
    yield KNOWN_FORMATS
    set_formats(before)
