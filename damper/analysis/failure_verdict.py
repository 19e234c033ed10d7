"""The failure study's verdict (part ``failures`` of the run's verdict, :mod:`damper.verdict`).

:func:`failure_verdict` judges a :class:`damper.analysis.failure_run.FailureRun` once; failures.json,
the terminal summary and the report read the object it returns (docs/failures.md, "The verdict").
"""

from __future__ import annotations

import math

from ..verdict import Detail, Item, Verdict

R2D = 180.0 / math.pi

#: Per limit: the peak's key in a transient record, the band's key in ``settings.limits`` and the unit.
LIMIT_KEYS = {
    "load_factor": ("peak_load_factor_increment_g", "load_factor_g", "g"),
    "pitch_attitude": ("peak_pitch_attitude_change_rad", "pitch_attitude_rad", "rad"),
    "angle_of_attack": ("peak_angle_of_attack_change_rad", "angle_of_attack_rad", "rad"),
}
LIMIT_WORDS = {"load_factor": "incremental load factor", "pitch_attitude": "pitch-attitude change",
               "angle_of_attack": "angle-of-attack change"}


def _limit_items(name, kind, rec, bands) -> list:
    items = []
    for limit, ok in (rec.get("limits_met") or {}).items():
        if ok:
            continue
        key, band_key, unit = LIMIT_KEYS[limit]
        value, (lo, hi) = rec[key], bands[band_key]
        slack = None if value is None else min(hi - value, value - lo)
        shown = f"{value * R2D:.3g} deg" if unit == "rad" else f"{value:.3g} g"
        limits = f"{lo * R2D:.3g} to {hi * R2D:.3g} deg" if unit == "rad" else f"{lo:.3g} to {hi:.3g} g"
        items.append(Item("failures", name, f"{kind}_{limit}", False, Detail(value, lo, hi, slack, unit),
                          f"{kind} failure: {LIMIT_WORDS[limit]} {shown}, limits {limits}"))
    return items


def _condition_items(name, rec, bands, level_required, edges) -> list:
    items = []
    for kind in ("hardover", "oscillatory"):
        if rec.get(kind) is not None:
            items += _limit_items(name, kind, rec[kind], bands)
    p = rec.get("passive")
    if p is not None and p.get("met") is False:
        items.append(Item("failures", name, "passive_level", False,
                          Detail(p["level"], None, level_required, level_required - p["level"], "level"),
                          f"damper off: handling level {p['level']}, level {level_required} required"))
    if "authority_window_rad" in rec and rec["authority_window_rad"] is None:
        lo, hi = (num(x) for x in edges)
        items.append(Item("failures", name, "authority_window", False,
                          Detail(lo, None, hi, None if hi is None else hi - lo, "rad"), rec["authority_window_reason"]))
    return items


def failure_verdict(run) -> Verdict:
    """The run's verdict on its failures (part ``failures``): one summary item, then an item
    per condition and limit not met (hardover or oscillatory transient beyond a limit, passive
    level below the required one, empty authority window), and one when the common window is
    empty. Details: value, band (lower, upper), slack (distance of the reported peak from the
    nearer bound, positive inside) and unit; for a window, the authority the damper needs as
    the value and the largest safe one as the upper bound (rad)."""
    lim = run.spec.limits
    bands = {"load_factor_g": lim.load_factor_g, "pitch_attitude_rad": lim.pitch_attitude_rad,
             "angle_of_attack_rad": lim.angle_of_attack_rad}
    required = run.spec.passive_level_required
    items = []
    for i, (name, rec) in enumerate(zip(run.names, run.records)):
        edges = (run.window.lower_rad[i], run.window.upper_rad[i])
        items += _condition_items(name, rec, bands, required, edges)
    summary = run.summary
    lo, hi = summary["required_authority_rad"], summary["largest_safe_authority_rad"]
    common_ok = summary["authority_window_rad"] is not None
    if not common_ok:
        items.append(Item("failures", None, "authority_window", False,
                          Detail(lo, None, hi, None if hi is None else hi - lo, "rad"), summary["authority_window_reason"]))
    n, k = len(run.names), int(sum(bool(m) for m in run.met))
    window = (f"one authority for every condition: {deg_range(summary['authority_window_rad'])}" if common_ok
              else "no one authority fits every condition")
    head = Item("failures", None, "all", k == n and common_ok, Detail(k, n, None, k - n, "conditions"),
                f"{k} of {n} conditions meet every failure requirement; {window}")
    return Verdict((head, *items))


def deg_range(pair) -> str:
    lo, hi = pair
    top = "unbounded" if hi is None else f"{hi * R2D:.3g} deg"
    return f"{lo * R2D:.3g} deg to {top}"


def num(x):
    """A float, or None for NaN and infinities."""
    x = float(x)
    return x if math.isfinite(x) else None


__all__ = ["LIMIT_KEYS", "LIMIT_WORDS", "deg_range", "failure_verdict"]
