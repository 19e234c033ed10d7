"""The verdict items of each part of a run, from its analysis results (:mod:`damper.verdict`).

One function per part; each returns a :class:`~damper.verdict.Verdict` holding one summary item
(``condition`` None, ``requirement`` ``"all"``) and one item per requirement not met. Outputs
(terminal, JSON, report) and the exit status all read these objects; nothing is judged twice.
"""

from __future__ import annotations

import math

import numpy as np

from ..verdict import Detail, Item, Verdict, fraction_text


def _finite(x):
    x = float(x)
    return x if math.isfinite(x) else None


def criterion_detail(criterion, value) -> Detail:
    """Value, band and slack of one criterion in the criterion's own unit.

    Parameters
    ----------
    criterion : damper.requirements.criteria.Criterion
    value : float
        The measure, in ``criterion.kind.unit`` (NaN: undefined).
    """
    v = _finite(value)
    lo, hi = _finite(criterion.lower), _finite(criterion.upper)
    slack = None
    if v is not None:
        sides = [v - lo if lo is not None else math.inf, hi - v if hi is not None else math.inf]
        slack = _finite(min(sides))
    unit = criterion.kind.unit
    return Detail(value=v, lower=lo, upper=hi, slack=slack, unit="" if unit == "-" else unit)


def _miss_text(criterion, detail: Detail, stable: bool) -> str:
    if criterion.kind.needs_stability and not stable:
        return "closed loop unstable: no margin"
    if detail.value is None:
        return "undefined at this gain (no such mode, crossing or fit)"
    u = f" {detail.unit}" if detail.unit else ""
    if detail.lower is not None and detail.value < detail.lower:
        return f"{detail.value:.4g}{u} below {detail.lower:.4g}{u}"
    if detail.upper is not None and detail.value > detail.upper:
        return f"{detail.value:.4g}{u} above {detail.upper:.4g}{u}"
    return f"{detail.value:.4g}{u}"


def criteria_items(part: str, names, criteria_result, stable) -> list:
    """One item per (condition, criterion) not met.

    Parameters
    ----------
    part : str
    names : sequence of str
        Condition names, in the order of the last axis of the criteria arrays.
    criteria_result : damper.requirements.criteria.CriteriaResult
        Evaluated at one gain per condition (arrays of shape (n_criteria, n_conditions)).
    stable : array of bool, shape (n_conditions,)
        Closed-loop stability at that gain.
    """
    values = np.asarray(criteria_result.values, float).reshape(len(criteria_result.criteria), -1)
    met = np.asarray(criteria_result.met, bool).reshape(values.shape)
    stable = np.broadcast_to(np.asarray(stable, bool).reshape(-1), values.shape[1:])
    out = []
    for k, i in sorted(np.argwhere(~met).tolist(), key=lambda ki: (ki[1], ki[0])):  # by condition, then criterion
        c = criteria_result.criteria[k]
        d = criterion_detail(c, values[k, i])
        out.append(Item(part, names[i], c.name, False, d, _miss_text(c, d, bool(stable[i]))))
    return out


def design_misses(names, design) -> list:
    """The items of the conditions of one searched batch that have no feasible gain.

    Parameters
    ----------
    names : sequence of str
        The batch's condition names.
    design : damper.analysis.search.DesignResult
        Its search; the criteria at the chosen (least-bad) gain name what is missed.
    """
    a = design.chosen
    if a.criteria is None:
        return []
    bad = {n for n, c in zip(names, design.conditions) if not c.feasible}
    return [i for i in criteria_items("design", names, a.criteria, a.modes.stable) if i.condition in bad]


def design_verdict(names, feasible, misses, extra=()) -> Verdict:
    """The ``design`` part: every condition must have a gain meeting every requirement.

    Parameters
    ----------
    names : sequence of str
    feasible : sequence of bool
        Whether each condition has a feasible gain.
    misses : list of Item
        From :func:`design_misses`, batch by batch.
    extra : sequence of Item
        Requirements judged at the chosen gains but not steering the search (continuous
        turbulence); a miss among them makes the part not met, with its own items.
    """
    feasible = [bool(f) for f in feasible]
    n, k = len(feasible), sum(feasible)
    bad = [nm for nm, f in zip(names, feasible) if not f]
    extra = [i for i in extra if not i.met]
    text = (f"every condition ({n}) has a gain meeting every requirement" if not bad
            else f"{len(bad)} of {n} conditions have no gain meeting every requirement: {', '.join(bad[:8])}"
            + (" ..." if len(bad) > 8 else ""))
    if extra:
        at = sorted({i.condition for i in extra if i.condition})
        text += f"; at the chosen gains, {len(extra)} requirement(s) checked after the search not met ({', '.join(at[:8])})"
    summary = Item("design", None, "all", not bad and not extra,
                   Detail(value=k, lower=n, upper=None, slack=k - n, unit="conditions"), text)
    return Verdict((summary, *misses, *extra))


def assess_verdict(names, assessment, gain_text: str, extra=()) -> Verdict:
    """``damper assess``: every requirement at every condition, at the given gains (part ``design``).

    `extra` : items of further requirements judged at the same gains (e.g. continuous turbulence),
    counted in the summary like the rest.
    """
    if assessment.criteria is None and not extra:
        return Verdict()
    items = [] if assessment.criteria is None else criteria_items("design", names, assessment.criteria,
                                                                  assessment.modes.stable)
    items += [i for i in extra if not i.met]
    bad = sorted({i.condition for i in items}, key=list(names).index)
    n = len(names)
    text = (f"every condition ({n}) meets every requirement at {gain_text}" if not bad
            else f"{len(bad)} of {n} conditions miss a requirement at {gain_text}: {', '.join(bad[:8])}"
            + (" ..." if len(bad) > 8 else ""))
    summary = Item("design", None, "all", not bad,
                   Detail(value=n - len(bad), lower=n, slack=-len(bad), unit="conditions"), text)
    return Verdict((summary, *items))


def schedule_verdict(result) -> Verdict:
    """The ``schedule`` part: every verification point meets every requirement under the schedule."""
    v = result.verification
    passed = np.asarray(v.passed, bool)
    items = []
    for i in np.flatnonzero(~passed):
        s = _finite(v.worst_slack[i])
        items.append(Item("schedule", str(v.points.labels[i]), str(v.binding[i]), False,
                          Detail(slack=s, unit="normalised slack"),
                          f"scheduled gain {float(v.gains[i]):.4g} s misses {v.binding[i]}"))
    n = passed.size
    summary = Item("schedule", None, "all", bool(result.passed),
                   Detail(value=int(passed.sum()), lower=n, slack=int(passed.sum()) - n, unit="verification points"),
                   result.message)
    return Verdict((summary, *items))


def robustness_verdict(result, required_fraction=None) -> Verdict:
    """The ``robustness`` part.

    Met when every sample, corner and worst-case point meets every requirement at every condition;
    when `required_fraction` is given, met when the lower bound of the confidence interval of the
    fraction of samples meeting every requirement at every condition is at least it.
    """
    spec = result.spec
    total = spec.samples
    items = []
    for c in result.conditions if required_fraction is None else ():  # a required fraction judges the joint one
        misses = [w for w in c.worst if w.slack < 0]
        clean = c.passed_all == c.samples and c.corners_passed_all == c.corners and not misses
        if clean:
            continue
        corner = f" and {c.corners_passed_all} of {c.corners} corners" if c.corners else ""
        items.append(Item("robustness", c.name, "all", False,
                          Detail(value=_finite(c.fraction_all), lower=1.0, upper=None,
                                 slack=_finite(c.fraction_all - 1.0), unit="fraction of samples"),
                          f"{c.passed_all} of {c.samples} samples ({fraction_text(c.passed_all, c.samples)}){corner} "
                          "meet every requirement"))
        for w in misses:
            crit = next(k for k in result.criteria if k.name == w.criterion)
            d = criterion_detail(crit, w.value)
            items.append(Item("robustness", c.name, w.criterion, False, d,
                              f"worst {w.source} point: {_miss_text(crit, d, True)}"))
    joint = fraction_text(result.joint_passed, total)
    conf = f"{100 * spec.confidence:g} %"
    if required_fraction is None:
        met = not items
        text = (f"every sample, corner and worst-case point meets every requirement ({result.joint_passed} of {total} samples)"
                if met else f"{result.joint_passed} of {total} samples ({joint}) meet every requirement at every "
                "condition; required: every sample, corner and worst-case point")
        detail = Detail(value=_finite(result.joint_fraction), lower=1.0, slack=_finite(result.joint_fraction - 1.0),
                        unit="fraction of samples")
    else:
        lo = float(result.joint_lower)
        met = lo >= required_fraction
        text = (f"{result.joint_passed} of {total} samples ({joint}) meet every requirement at every condition; "
                f"lower bound of the {conf} interval {100 * lo:.3g} % "
                f"{'>=' if met else '<'} required {100 * required_fraction:g} %")
        detail = Detail(value=_finite(lo), lower=float(required_fraction), slack=_finite(lo - required_fraction),
                        unit="fraction of samples (lower confidence bound)")
    summary = Item("robustness", None, "all", met, detail, text)
    return Verdict((summary, *items))
