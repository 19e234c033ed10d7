"""Streaming reductions of a Monte Carlo study equal one in-memory reduction, whatever the chunking.

Issue 17, item 5: the robustness study keeps pass counts, the lowest-slack samples, histograms
and a bounded subsample instead of every sample; "results equal an in-memory reduction of the
same samples, whatever the chunking". The in-memory reductions here are written directly
with numpy over all samples at once (np.argmin, a stable np.argsort, sums, a histogram
counted bin by bin) [derived: the definitions in damper/analysis/sample_stats.py].
"""

import numpy as np
import pytest

from damper.analysis import robustness as rb
from damper.analysis.sample_stats import SLACK_EDGES, SampleSummary
from damper.analysis.uncertainty import resolve_axes, sample_at, sample_rows, uncertainty_spec
from damper.case import load_case_text


def _fake_results(rng, c=3, n=4, m=500):
    """Invented per-sample results with ties, NaN and +-inf slacks (test data only)."""
    slacks = np.round(rng.normal(0.3, 0.6, (c, n, m)), 1)  # rounding makes many ties
    slacks[0, 1, rng.choice(m, 7, replace=False)] = np.nan
    slacks[1, 2, rng.choice(m, 5, replace=False)] = np.inf
    slacks[2, 0, rng.choice(m, 3, replace=False)] = -np.inf
    return {
        "slacks": slacks,
        "values": rng.normal(size=(c, n, m)),
        "damping": rng.uniform(0.2, 1.0, (n, m)),
        "gain_margin": rng.uniform(3, 12, (n, m)),
        "phase_margin": rng.uniform(20, 80, (n, m)),
        "unconverged": rng.uniform(size=(n, m)) < 0.1,
        "ambiguous": rng.uniform(size=(n, m)) < 0.05,
    }


def _block(res, a, b):
    return {k: v[..., a:b] for k, v in res.items()}


def _fold(res, cuts, shown_end, keep):
    edges = [0, *cuts, res["slacks"].shape[-1]]
    parts = [SampleSummary.of_block(a, _block(res, a, b), shown_end, keep) for a, b in zip(edges, edges[1:])]
    out = parts[0]
    for p in parts[1:]:
        out = out.merge(p)
    return out, parts


def _in_memory(res, keep):
    """The reductions computed over all samples at once [derived: module docstring definitions]."""
    s = res["slacks"]
    worst = np.argmin(s, -1)
    order = np.argsort(s, -1, kind="stable")[..., :keep]
    w = np.min(s, 0)
    hist = np.zeros((s.shape[1], len(SLACK_EDGES) + 2), dtype=np.int64)
    for i in range(s.shape[1]):
        for x in w[i]:
            if np.isnan(x):
                hist[i, 0] += 1
            elif x < SLACK_EDGES[0]:
                hist[i, 1] += 1
            elif x > SLACK_EDGES[-1]:
                hist[i, -1] += 1
            else:
                k = min(int(np.searchsorted(SLACK_EDGES, x, side="right")) - 1, len(SLACK_EDGES) - 2)
                hist[i, 2 + k] += 1
    return worst, order, hist


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_streaming_equals_one_reduction_whatever_the_chunking(seed):
    rng = np.random.default_rng(seed)
    res = _fake_results(rng)
    m = res["slacks"].shape[-1]
    keep, shown_end = 6, 130
    worst, order, hist = _in_memory(res, keep)
    met = res["slacks"] >= 0
    for trial in range(6):
        cuts = sorted(rng.choice(np.arange(1, m), size=trial * 7, replace=False)) if trial else []
        got, parts = _fold(res, cuts, shown_end, keep)
        assert got.count == m and got.start == 0
        np.testing.assert_array_equal(got.passed, met.sum(-1))
        np.testing.assert_array_equal(got.passed_all, np.all(met, 0).sum(-1))
        assert got.joint == int(np.all(met, (0, 1)).sum())
        np.testing.assert_array_equal(got.unconverged, res["unconverged"].sum(-1))
        np.testing.assert_array_equal(got.ambiguous, res["ambiguous"].sum(-1))
        np.testing.assert_array_equal(got.histogram, hist)
        assert int(got.histogram.sum()) == m * res["slacks"].shape[1]
        np.testing.assert_array_equal(got.extremes.worst_index, worst)
        np.testing.assert_array_equal(got.extremes.worst_slack, np.take_along_axis(res["slacks"], worst[..., None], -1)[..., 0])
        np.testing.assert_array_equal(got.extremes.worst_value, np.take_along_axis(res["values"], worst[..., None], -1)[..., 0])
        np.testing.assert_array_equal(got.extremes.low_index, order)
        np.testing.assert_array_equal(got.extremes.low_slack, np.take_along_axis(res["slacks"], order, -1))
        for key in ("slacks", "values", "damping", "gain_margin", "phase_margin"):
            np.testing.assert_array_equal(getattr(got, f"shown_{key}"), res[key][..., :shown_end])
        # merging is associative: a balanced tree gives the same as the left fold
        while len(parts) > 1:
            parts = [parts[k].merge(parts[k + 1]) if k + 1 < len(parts) else parts[k] for k in range(0, len(parts), 2)]
        tree = parts[0]
        np.testing.assert_array_equal(tree.extremes.low_index, got.extremes.low_index)
        np.testing.assert_array_equal(tree.histogram, got.histogram)


def test_summaries_merge_only_in_sample_order():
    rng = np.random.default_rng(4)
    res = _fake_results(rng, m=20)
    a = SampleSummary.of_block(0, _block(res, 0, 10), 5, 3)
    b = SampleSummary.of_block(10, _block(res, 10, 20), 5, 3)
    with pytest.raises(ValueError):
        b.merge(a)


CASE = """
title: sampling (invented)
aircraft: {mass: 1000, pitch_inertia: 1500}
conditions:
  - {name: c1, airspeed: 60, altitude: 0, derivatives: {Z_alpha: -150, M_alpha: -16, M_q: -2, M_delta: -10}}
  - {name: c2, airspeed: 80, altitude: 0, derivatives: {Z_alpha: -250, M_alpha: -20, M_q: -2.5, M_delta: -14}}
loop:
  actuator: {bandwidth: "25 rad/s"}
  delay: "0.02 s"
requirements:
  damping_ratio: {min: 0.6, max: 1.3}
  gain_margin: {min: 6}
  phase_margin: {min: 45}
uncertainty:
  samples: 300
  seed: 11
  parameters:
    - {name: M_alpha, relative: 0.2}
    - {name: M_q, relative: 0.3, distribution: normal, truncate: 2.5}
    - {name: M_delta, relative: 0.15}
    - {name: delay, relative: 0.3}
"""


def test_samples_are_rows_of_one_generator_regenerated_from_seed_and_index():
    # Source: the sampling rule of docs/robustness.md (row g of default_rng(seed).random((N, p)),
    # the normal axis by the inverse CDF of the same draw)
    from scipy.special import ndtr, ndtri

    case = load_case_text(CASE)
    spec = uncertainty_spec(case)
    axes = resolve_axes(case, spec, np.full(2, 0.2))
    r = np.random.default_rng(11).random((9000, 4))
    expected = 2.0 * r - 1.0
    lo = ndtr(-2.5)
    expected[:, 1] = np.clip(ndtri(lo + r[:, 1] * (1 - 2 * lo)) / 2.5, -1, 1)
    for start, count in ((0, 9000), (0, 1), (4095, 2), (4096, 4096), (8191, 809), (77, 5000)):
        np.testing.assert_array_equal(sample_rows(axes, 11, start, count), expected[start : start + count])
    np.testing.assert_array_equal(sample_at(axes, 11, [8999, 3, 4096]), expected[[8999, 3, 4096]])


def _same_result(a, b):
    assert a.joint_passed == b.joint_passed and a.evaluations == b.evaluations
    for ca, cb in zip(a.conditions, b.conditions):
        np.testing.assert_array_equal(ca.passed, cb.passed)
        np.testing.assert_array_equal(ca.worst_slack_histogram, cb.worst_slack_histogram)
        np.testing.assert_array_equal(ca.sensitivity, cb.sensitivity)
        for wa, wb in zip(ca.worst, cb.worst):
            assert (wa.source, wa.index) == (wb.source, wb.index)
            np.testing.assert_array_equal([wa.slack, wa.value, *wa.u], [wb.slack, wb.value, *wb.u])


def test_study_results_do_not_depend_on_blocks_shards_or_workers(monkeypatch):
    import dataclasses

    case = load_case_text(CASE)
    spec = uncertainty_spec(case)
    ref = rb.robustness(case, 0.2, spec, workers=1)
    assert np.isfinite(ref.conditions[0].sensitivity).any() and ref.joint_passed < spec.samples  # not trivial
    _same_result(ref, rb.robustness(case, 0.2, dataclasses.replace(spec, chunk=50), workers=2))
    monkeypatch.setattr(rb, "SHARD_SAMPLES", 64)  # shards of 64 samples, blocks cut at their edges
    _same_result(ref, rb.robustness(case, 0.2, dataclasses.replace(spec, chunk=30), workers=2))


def test_a_bounded_subsample_changes_no_count_or_worst_case(monkeypatch):
    case = load_case_text(CASE)
    spec = uncertainty_spec(case)
    full = rb.robustness(case, 0.2, spec, workers=1)
    monkeypatch.setattr(rb, "MAX_SHOWN", 40)
    part = rb.robustness(case, 0.2, spec, workers=1)
    assert full.shown == 300 and part.shown == 40  # [derived: min(samples, MAX_SHOWN)]
    assert part.slacks.shape == (len(part.criteria), 2, 40)
    np.testing.assert_array_equal(part.slacks, full.slacks[..., :40])
    np.testing.assert_array_equal(part.samples_u, full.samples_u[:40])
    assert part.joint_passed == full.joint_passed
    for cf, cp in zip(full.conditions, part.conditions):
        np.testing.assert_array_equal(cf.passed, cp.passed)
        np.testing.assert_array_equal(cf.worst_slack_histogram, cp.worst_slack_histogram)
        np.testing.assert_array_equal([w.slack for w in cf.worst], [w.slack for w in cp.worst])
        assert cp.shown == 40
