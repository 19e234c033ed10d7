"""Statistics of a Monte Carlo study, and its streaming reduction.

A study of a million samples cannot keep every sample's measures. It keeps, instead,
reductions that are merged block after block (:class:`SampleSummary`):

* pass counts per criterion and condition, per condition over all criteria, and jointly
  over all conditions; counts of unconverged fits and ambiguous modal picks;
* per criterion and condition the worst sample (the rule of ``np.argmin``: an undefined
  slack first, else the least, the lowest index on ties) and the lowest-slack samples in
  the order of a stable ``np.argsort`` (:class:`Extremes`), by global sample index;
* per condition a histogram of the worst slack over all criteria (:data:`SLACK_EDGES`);
* a bounded subsample, the samples of global index below ``shown_end``, for the plots
  and the rank correlations.

Every field is an integer count or a choice by a total order on (slack, global index),
so merging blocks gives exactly what one reduction of all the samples gives, however
the samples were cut into blocks (tests/test_sample_stats.py). The samples themselves are
not kept: any of them is regenerated from the seed and its index
(:func:`damper.analysis.uncertainty.sample_at`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Bin edges of the worst-slack histograms: normalised slack from -1 to 1 in steps of
#: 0.05 (below -1, above 1 and undefined are counted apart).
SLACK_EDGES = np.round(np.linspace(-1.0, 1.0, 41), 12)
_BIG = np.iinfo(np.int64).max


def clopper_pearson(k, n, confidence=0.95):
    """Exact (Clopper-Pearson) binomial confidence interval of a fraction ``k / n``.

    ``lower = B^-1(a/2; k, n - k + 1)`` (0 when k = 0), ``upper = B^-1(1 - a/2; k + 1, n - k)``
    (1 when k = n), ``a = 1 - confidence``, ``B^-1`` the beta quantile.

    Returns
    -------
    lower, upper : ndarray
    """
    from scipy.special import betaincinv  # the beta quantile (scipy.stats.beta.ppf), without importing scipy.stats

    k = np.asarray(k, dtype=float)
    n = np.asarray(n, dtype=float)
    a = 1.0 - confidence
    with np.errstate(invalid="ignore", divide="ignore"):
        lo = np.where(k > 0, betaincinv(np.maximum(k, 1e-300), n - k + 1.0, a / 2.0), 0.0)
        hi = np.where(k < n, betaincinv(k + 1.0, np.maximum(n - k, 1e-300), 1.0 - a / 2.0), 1.0)
    return lo, hi


def average_ranks(a):
    """1-based ranks along the last axis of `a` (r, N), tied values sharing their mean rank.

    The ``"average"`` method of ``scipy.stats.rankdata``, row by row, in numpy (importing
    scipy.stats costs more than ranking 10,000 samples): infinite values rank as the
    extremes, and a row holding NaN is all NaN (scipy's default ``nan_policy``).
    """
    a = np.asarray(a, dtype=float)
    n = a.shape[-1]
    order = np.argsort(a, axis=-1, kind="stable")
    v = np.take_along_axis(a, order, -1)
    idx = np.broadcast_to(np.arange(n), a.shape)
    first = np.ones(a.shape, dtype=bool)  # first of a run of equal sorted values
    first[..., 1:] = v[..., 1:] != v[..., :-1]
    last = np.ones(a.shape, dtype=bool)
    last[..., :-1] = first[..., 1:]
    start = np.maximum.accumulate(np.where(first, idx, 0), axis=-1)
    end = np.flip(np.minimum.accumulate(np.flip(np.where(last, idx, n - 1), -1), axis=-1), -1)
    ranks = np.empty(a.shape)
    np.put_along_axis(ranks, order, 0.5 * (start + end) + 1.0, -1)
    return np.where(np.isnan(a).any(-1, keepdims=True), np.nan, ranks)


def spearman(x, y, x_ranks=None):
    """Spearman rank correlation of every row of `x` (p, N) with every row of `y` (q, N).

    Average ranks for ties (:func:`average_ranks`); infinite values rank as the
    extremes. Constant rows give NaN. Returns shape (p, q). ``x_ranks``: the ranks of `x`
    when the caller has them already (``average_ranks(x)``; the same `x` against several `y`).
    """
    rx = average_ranks(x) if x_ranks is None else x_ranks
    ry = average_ranks(y)
    rx = rx - rx.mean(-1, keepdims=True)
    ry = ry - ry.mean(-1, keepdims=True)
    num = rx @ ry.T
    den = np.sqrt(np.sum(rx * rx, -1))[:, None] * np.sqrt(np.sum(ry * ry, -1))[None, :]
    with np.errstate(invalid="ignore", divide="ignore"):
        rho = num / den
    return np.where(den > 0, rho, np.nan)


# ---------------------------------------------------------------------------------
# Streaming reduction
# ---------------------------------------------------------------------------------
def _order_keys(slack, index):
    """lexsort keys (last is primary) of a stable argsort of `slack`: NaN last, then slack, then index."""
    nan = np.isnan(slack)
    return index, np.where(nan, 0.0, slack), nan


@dataclass(frozen=True)
class Extremes:
    """The worst and the lowest-slack samples per criterion and condition.

    Attributes
    ----------
    worst_slack, worst_value : ndarray, shape (n_criteria, n_conditions)
        Slack (normalised) and measure (its unit) of the worst sample: ``np.argmin``'s
        choice over all samples (the first undefined slack, else the least, the lowest
        index on ties).
    worst_index : ndarray of int64, shape (n_criteria, n_conditions)
        Its global sample index.
    low_slack, low_value : ndarray, shape (n_criteria, n_conditions, keep)
        The `keep` first samples in the order of a stable ``np.argsort`` of the slack
        (ascending, undefined last); padded with NaN.
    low_index : ndarray of int64, shape (n_criteria, n_conditions, keep)
        Their global indices (padding: the largest int64).
    """

    worst_slack: np.ndarray
    worst_value: np.ndarray
    worst_index: np.ndarray
    low_slack: np.ndarray
    low_value: np.ndarray
    low_index: np.ndarray

    @classmethod
    def of_block(cls, start, slacks, values, keep) -> "Extremes":
        """Extremes of one block: `slacks`, `values` (C, n, m) of samples ``start ... start + m - 1``."""
        c, n, m = slacks.shape
        index = start + np.arange(m, dtype=np.int64)
        j = np.argmin(slacks, -1)[..., None]
        order = np.argsort(slacks, -1, kind="stable")[..., :keep]
        pad = keep - order.shape[-1]
        low_s = np.take_along_axis(slacks, order, -1)
        low_v = np.take_along_axis(values, order, -1)
        low_i = index[order]
        if pad:
            fill = np.full((c, n, pad), np.nan)
            low_s = np.concatenate([low_s, fill], -1)
            low_v = np.concatenate([low_v, fill], -1)
            low_i = np.concatenate([low_i, np.full((c, n, pad), _BIG, np.int64)], -1)
        return cls(
            np.take_along_axis(slacks, j, -1)[..., 0],
            np.take_along_axis(values, j, -1)[..., 0],
            index[j[..., 0]],
            low_s, low_v, low_i,
        )

    def merge(self, other: "Extremes") -> "Extremes":
        """The extremes of the union of two disjoint sets of samples."""
        a_nan, b_nan = np.isnan(self.worst_slack), np.isnan(other.worst_slack)
        b_wins = np.where(
            a_nan | b_nan,
            b_nan & (~a_nan | (other.worst_index < self.worst_index)),
            (other.worst_slack < self.worst_slack)
            | ((other.worst_slack == self.worst_slack) & (other.worst_index < self.worst_index)),
        )
        keep = self.low_slack.shape[-1]
        s = np.concatenate([self.low_slack, other.low_slack], -1)
        v = np.concatenate([self.low_value, other.low_value], -1)
        i = np.concatenate([self.low_index, other.low_index], -1)
        order = np.lexsort(_order_keys(s, i), axis=-1)[..., :keep]
        return Extremes(
            np.where(b_wins, other.worst_slack, self.worst_slack),
            np.where(b_wins, other.worst_value, self.worst_value),
            np.where(b_wins, other.worst_index, self.worst_index),
            np.take_along_axis(s, order, -1),
            np.take_along_axis(v, order, -1),
            np.take_along_axis(i, order, -1),
        )


def _histogram(worst):
    """Counts per row of `worst` (n, m): [undefined, below -1, one per bin of SLACK_EDGES, above 1]."""
    n = worst.shape[0]
    bins = len(SLACK_EDGES) - 1
    with np.errstate(invalid="ignore"):
        col = np.clip(np.searchsorted(SLACK_EDGES, worst, side="right") - 1, 0, bins - 1) + 2
        col = np.where(worst < SLACK_EDGES[0], 1, col)
        col = np.where(worst > SLACK_EDGES[-1], bins + 2, col)
    col = np.where(np.isnan(worst), 0, col)
    flat = (np.arange(n)[:, None] * (bins + 3) + col).ravel()
    return np.bincount(flat, minlength=n * (bins + 3)).reshape(n, bins + 3).astype(np.int64)


@dataclass(frozen=True)
class SampleSummary:
    """Streaming reduction of consecutive samples ``start ... start + count - 1`` (module docstring).

    Attributes
    ----------
    start, count : int
    passed : ndarray of int64, shape (n_criteria, n_conditions)
        Samples meeting each criterion.
    passed_all : ndarray of int64, shape (n_conditions,)
        Samples meeting every criterion at the condition.
    joint : int
        Samples meeting every criterion at every condition.
    unconverged, ambiguous : ndarray of int64, shape (n_conditions,)
        Samples whose equivalent fit did not converge / whose modal pick was ambiguous.
    histogram : ndarray of int64, shape (n_conditions, len(SLACK_EDGES) + 2)
        Worst slack over all criteria: [undefined, below -1, one per bin, above 1].
    extremes : Extremes
    shown_end : int
        The subsample is the samples of global index below this.
    shown_slacks, shown_values : ndarray, shape (n_criteria, n_conditions, shown)
        Slack (normalised) and measure (its unit) of each criterion in the subsample.
    shown_damping, shown_gain_margin, shown_phase_margin : ndarray, shape (n_conditions, shown)
        Damping ratio (-), smallest gain margin (dB), phase margin (deg) of the subsample.
    """

    start: int
    count: int
    passed: np.ndarray
    passed_all: np.ndarray
    joint: int
    unconverged: np.ndarray
    ambiguous: np.ndarray
    histogram: np.ndarray
    extremes: Extremes
    shown_end: int
    shown_slacks: np.ndarray
    shown_values: np.ndarray
    shown_damping: np.ndarray
    shown_gain_margin: np.ndarray
    shown_phase_margin: np.ndarray

    @property
    def shown(self) -> int:
        """Samples in the subsample."""
        return self.shown_slacks.shape[-1]

    @classmethod
    def of_block(cls, start, res, shown_end, keep) -> "SampleSummary":
        """Reduce one block of evaluated samples.

        Parameters
        ----------
        start : int
            Global index of the block's first sample.
        res : dict
            ``values``, ``slacks`` (n_criteria, n_conditions, m); ``damping``, ``gain_margin``,
            ``phase_margin``, ``unconverged``, ``ambiguous`` (n_conditions, m).
        shown_end : int
        keep : int
            Lowest-slack samples kept per criterion and condition.
        """
        slacks = np.asarray(res["slacks"], dtype=float)
        m = slacks.shape[-1]
        met = slacks >= 0
        all_met = np.all(met, 0)
        s = max(0, min(m, shown_end - start))
        return cls(
            start=int(start),
            count=int(m),
            passed=met.sum(-1).astype(np.int64),
            passed_all=all_met.sum(-1).astype(np.int64),
            joint=int(np.all(all_met, 0).sum()),
            unconverged=np.asarray(res["unconverged"]).sum(-1).astype(np.int64),
            ambiguous=np.asarray(res["ambiguous"]).sum(-1).astype(np.int64),
            histogram=_histogram(np.min(slacks, 0)),
            extremes=Extremes.of_block(start, slacks, np.asarray(res["values"], dtype=float), keep),
            shown_end=int(shown_end),
            shown_slacks=slacks[..., :s].copy(),
            shown_values=np.asarray(res["values"], dtype=float)[..., :s].copy(),
            shown_damping=np.asarray(res["damping"], dtype=float)[..., :s].copy(),
            shown_gain_margin=np.asarray(res["gain_margin"], dtype=float)[..., :s].copy(),
            shown_phase_margin=np.asarray(res["phase_margin"], dtype=float)[..., :s].copy(),
        )

    def merge(self, other: "SampleSummary") -> "SampleSummary":
        """The summary of this block followed directly by `other` (``other.start == start + count``)."""
        if other.start != self.start + self.count or other.shown_end != self.shown_end:
            raise ValueError("summaries merge in sample order: the second must follow the first directly")

        def cat(a, b):  # no copy once the subsample is full
            return a if b.shape[-1] == 0 else np.concatenate([a, b], -1)

        return SampleSummary(
            start=self.start,
            count=self.count + other.count,
            passed=self.passed + other.passed,
            passed_all=self.passed_all + other.passed_all,
            joint=self.joint + other.joint,
            unconverged=self.unconverged + other.unconverged,
            ambiguous=self.ambiguous + other.ambiguous,
            histogram=self.histogram + other.histogram,
            extremes=self.extremes.merge(other.extremes),
            shown_end=self.shown_end,
            shown_slacks=cat(self.shown_slacks, other.shown_slacks),
            shown_values=cat(self.shown_values, other.shown_values),
            shown_damping=cat(self.shown_damping, other.shown_damping),
            shown_gain_margin=cat(self.shown_gain_margin, other.shown_gain_margin),
            shown_phase_margin=cat(self.shown_phase_margin, other.shown_phase_margin),
        )


__all__ = ["Extremes", "SLACK_EDGES", "SampleSummary", "average_ranks", "clopper_pearson", "spearman"]
