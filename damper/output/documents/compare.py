"""``compare.json``: two design runs point by point, and the terminal table (docs/compare.md).

Every number here is read from the two runs' documents (``design.json`` entries, or the
``damper assess`` structure of a schedule point) and subtracted: ``delta = b - a``. The
terminal table, the plots' captions and the HTML comparison report all read the document
built once by :func:`compare_document`.
"""

from __future__ import annotations

import math

from ...verdict import Detail, Item, Verdict
from .jsonout import CAUTION
from .text import fmt, table

#: Compared quantities: key, unit, what it is.
QUANTITIES = (
    ("chosen_gain_s", "s", "chosen (or scheduled) gain"),
    ("feasible_low_s", "s", "lower edge of the feasible interval holding the chosen gain"),
    ("feasible_high_s", "s", "upper edge of the feasible interval holding the chosen gain"),
    ("damping_equivalent", "-", "equivalent short-period damping ratio"),
    ("damping_modal", "-", "modal short-period damping ratio"),
    ("frequency_equivalent_rad_s", "rad/s", "equivalent short-period frequency"),
    ("frequency_modal_rad_s", "rad/s", "modal short-period frequency"),
    ("gain_margin_db", "dB", "smallest upward gain margin"),
    ("gain_margin_low_db", "dB", "smallest downward gain margin"),
    ("phase_margin_deg", "deg", "smallest phase margin"),
    ("delay_margin_s", "s", "delay margin"),
    ("disk_margin", "-", "symmetric disk margin"),
    ("cap_equivalent", "(rad/s^2)/g", "CAP with the equivalent frequency"),
    ("level", "-", "handling-qualities level (4: worse than level 3)"),
    ("robustness_pass_fraction", "1", "fraction of robustness samples meeting every requirement"),
)
#: `worse` also names the robustness pass fraction when it fell.
PASS_FRACTION = "robustness_pass_fraction"


def _num(x):
    if x is None or isinstance(x, bool):
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _interval_with(intervals, k):
    """(low, high) of the feasible interval holding gain `k` (s), or (None, None)."""
    for iv in intervals or ():
        lo, hi = _num(iv[0]), _num(iv[1])
        if k is not None and lo is not None and hi is not None and lo <= k <= hi:
            return lo, hi
    return None, None


def point_record(entry, pass_fraction=None) -> dict:
    """The compared values of one point.

    Parameters
    ----------
    entry : dict
        ``{"chosen_gain_s", "feasible", "feasible_gains_s" (or None), "measures"}`` with
        ``measures`` the ``damper assess`` structure at the chosen gain.
    pass_fraction : float, optional
        Robustness pass fraction (every requirement) there.
    """
    m = entry.get("measures") or {}
    cl = m.get("closed_loop") or {}
    eq, sp = cl.get("equivalent") or {}, cl.get("short_period") or {}
    mg, hq = m.get("margins") or {}, cl.get("handling") or {}
    k = _num(entry.get("chosen_gain_s"))
    lo, hi = _interval_with(entry.get("feasible_gains_s"), k)
    level = (m.get("level") or {}).get("overall")
    values = {
        "chosen_gain_s": k, "feasible_low_s": lo, "feasible_high_s": hi,
        "damping_equivalent": _num(eq.get("damping_ratio")), "damping_modal": _num(sp.get("damping_ratio")),
        "frequency_equivalent_rad_s": _num(eq.get("natural_frequency_rad_s")),
        "frequency_modal_rad_s": _num(sp.get("natural_frequency_rad_s")),
        "gain_margin_db": _num(mg.get("gain_margin_db")), "gain_margin_low_db": _num(mg.get("gain_margin_low_db")),
        "phase_margin_deg": _num(mg.get("phase_margin_deg")), "delay_margin_s": _num(mg.get("delay_margin_s")),
        "disk_margin": _num(mg.get("disk_margin")), "cap_equivalent": _num(hq.get("cap_equivalent")),
        "level": 4.0 if isinstance(level, str) else _num(level), PASS_FRACTION: _num(pass_fraction),
    }
    crit = [c for c in m.get("criteria") or () if isinstance(c, dict)]
    return values | {
        "feasible": bool(entry.get("feasible")),
        "slack": {c["name"]: _num(c.get("slack")) for c in crit},
        "met": {c["name"]: bool(c.get("met")) for c in crit},
    }


def _slack_key(slack, met):
    """A slack as a comparable number: None counts as unbounded (+inf) when met, -inf when not."""
    if slack is not None:
        return slack
    return math.inf if met else -math.inf


def compare_point(a: dict, b: dict) -> dict:
    """``{delta, worse}`` of two records of one point (`worse`: largest slack loss first)."""
    delta = {key: (b[key] - a[key] if a.get(key) is not None and b.get(key) is not None else None)
             for key, _, _ in QUANTITIES}
    delta["slack"] = {}
    losses = []
    for name in a["slack"]:
        if name not in b["slack"]:
            continue
        sa = _slack_key(a["slack"][name], a["met"][name])
        sb = _slack_key(b["slack"][name], b["met"][name])
        delta["slack"][name] = sb - sa if math.isfinite(sa) and math.isfinite(sb) else None
        if sb < sa:
            losses.append((sb - sa if math.isfinite(sb - sa) else -math.inf, name))
    pa, pb = a.get(PASS_FRACTION), b.get(PASS_FRACTION)
    if pa is not None and pb is not None and pb < pa:
        losses.append((pb - pa, PASS_FRACTION))
    losses.sort(key=lambda t: t[0])
    newly = any(a["met"][n] and not b["met"][n] for n in a["met"] if n in b["met"])
    return {"delta": delta, "worse": [name for _, name in losses], "loss": losses[0][0] if losses else 0.0,
            "newly_not_met": newly}


def compare_points(a_points, b_points):
    """Rows of compare.json for two ``{name: (kind, record)}`` maps (ordered); worst first.

    Returns
    -------
    rows : list of dict
        ``{name, kind, a, b, delta, worse}``: points with something worse first (those where
        B misses a requirement A met before the rest, then the largest slack loss first), then
        the others in A's order.
    only_in_a, only_in_b : list of str
    """
    rows = []
    for name, (kind, ra) in a_points.items():
        if name in b_points:
            cmp = compare_point(ra, b_points[name][1])
            rows.append(({"name": name, "kind": kind, "a": ra, "b": b_points[name][1], "delta": cmp["delta"],
                          "worse": cmp["worse"]}, (not cmp["worse"], not cmp["newly_not_met"], cmp["loss"])))
    order = sorted(range(len(rows)), key=lambda i: rows[i][1] + (i,))
    only_a = [n for n in a_points if n not in b_points]
    only_b = [n for n in b_points if n not in a_points]
    return [rows[i][0] for i in order], only_a, only_b


def verdict_of_run(docs) -> tuple:
    """Run B's own verdict: the ``verdict`` objects of its documents, else derived from design.json.

    Parameters
    ----------
    docs : dict
        ``{file name: parsed document}`` of the run (design.json, schedule.json, robustness.json ...).

    Returns
    -------
    verdict : damper.verdict.Verdict
    source : str
        Where it came from.
    """
    items, seen, found = [], set(), []
    for name, doc in docs.items():
        v = doc.get("verdict") if isinstance(doc, dict) else None
        if not isinstance(v, dict) or not isinstance(v.get("items"), list):
            continue
        found.append(name)
        for it in v["items"]:
            item = _item(it)
            if item is not None and item not in seen:
                seen.add(item)
                items.append(item)
    if found:
        return Verdict(()) + Verdict(tuple(items)), "the verdict objects of " + ", ".join(found)
    return _derived_verdict(docs), "derived from design.json (and schedule.json): feasibility at the chosen gains"


def _item(d):
    from ...verdict import PARTS

    if not isinstance(d, dict) or d.get("part") not in PARTS:
        return None
    det = d.get("detail") if isinstance(d.get("detail"), dict) else {}
    detail = Detail(*(_num(det.get(k)) for k in ("value", "lower", "upper", "slack")), unit=str(det.get("unit") or ""))
    return Item(d["part"], d.get("condition"), str(d.get("requirement")), bool(d.get("met")), detail,
                str(d.get("text") or ""))


def _derived_verdict(docs):
    items = []
    design = docs.get("design.json") or {}
    conds = [c for c in design.get("conditions") or () if isinstance(c, dict)]
    if conds:
        bad = 0
        for c in conds:
            failing = [f.get("name") for f in c.get("failing_at_chosen_gain") or () if isinstance(f, dict)]
            if c.get("feasible") and not failing:
                continue
            bad += 1
            items.append(Item("design", c.get("name"), ", ".join(map(str, failing)) or "all", False,
                              text="no gain meets every requirement" if not c.get("feasible") else "not met at the chosen gain"))
        items.insert(0, Item("design", None, "all", bad == 0, text=f"{len(conds) - bad} of {len(conds)} conditions "
                             "meet every requirement at the chosen gain"))
    sched = docs.get("schedule.json")
    if isinstance(sched, dict) and "passed" in sched:
        items.append(Item("schedule", None, "all", bool(sched["passed"]), text=str(sched.get("message") or "")))
    return Verdict(tuple(items))


def compare_document(runs, rows, only_a, only_b, verdict, verdict_source, figures=(), notes=()) -> dict:
    """The whole ``compare.json`` document.

    Parameters
    ----------
    runs : list of dict
        Per run ``{dir, input_sha256, input_file, documents: {name: sha256}}``.
    rows, only_a, only_b
        From :func:`compare_points`.
    verdict : damper.verdict.Verdict
        Run B's own verdict.
    """
    worsened = [{"condition": r["name"], "requirement": w,
                 "a": r["a"][PASS_FRACTION] if w == PASS_FRACTION else r["a"]["slack"].get(w),
                 "b": r["b"][PASS_FRACTION] if w == PASS_FRACTION else r["b"]["slack"].get(w)}
                for r in rows for w in r["worse"]]
    return {
        "title": "Comparison of two pitch-damper designs",
        "caution": CAUTION,
        "runs": list(runs),
        "quantities": [{"key": k, "unit": u, "what": w} for k, u, w in QUANTITIES],
        "conditions": rows,
        "only_in_a": list(only_a),
        "only_in_b": list(only_b),
        "notes": list(notes),
        "figures": list(figures),
        "verdict": verdict.doc() | {"source": f"run B's own verdict ({verdict_source})", "worsened": worsened},
    }


def _k(x):
    return fmt(x, ".4g")


def _d(x, spec=".3g"):
    return "0" if x == 0 else ("-" if x is None else f"{x:+{spec}}")


def _names(worse, most=2):
    if not worse:
        return "-"
    return ", ".join(worse[:most]) + (f" +{len(worse) - most}" if len(worse) > most else "")


def compare_table(doc, limit=30) -> str:
    """The terminal table of ``damper compare`` (points with something worse first)."""
    heads = ["point", "K a\ns", "K b\ns", "zeta a", "zeta b", "GM a\ndB", "GM b\ndB", "PM a\ndeg", "PM b\ndeg",
             "level\na/b", "pass\nd", "worse in B"]
    body = []
    for r in doc["conditions"][:limit]:
        a, b, d = r["a"], r["b"], r["delta"]
        lv = f"{fmt(a['level'], '.0f')}/{fmt(b['level'], '.0f')}"
        body.append([r["name"], _k(a["chosen_gain_s"]), _k(b["chosen_gain_s"]), fmt(a["damping_equivalent"], ".3f"),
                     fmt(b["damping_equivalent"], ".3f"), fmt(a["gain_margin_db"], ".1f", "none"),
                     fmt(b["gain_margin_db"], ".1f", "none"), fmt(a["phase_margin_deg"], ".1f", "none"),
                     fmt(b["phase_margin_deg"], ".1f", "none"), lv, _d(d[PASS_FRACTION]),
                     _names(r["worse"])])
    lines = [table(heads, body)]
    more = len(doc["conditions"]) - limit
    if more > 0:
        rest = sum(1 for r in doc["conditions"][limit:] if r["worse"])
        lines.append(f"... {more} more points in compare.json ({rest} of them with something worse)")
    for key, label in (("only_in_a", "only in A"), ("only_in_b", "only in B")):
        if doc[key]:
            names = doc[key]
            lines.append(f"{label} ({len(names)}): " + ", ".join(names[:12]) + (" ..." if len(names) > 12 else ""))
    return "\n".join(lines)


def verdict_lines(doc) -> list:
    """The terminal's verdict lines: B's own verdict, then what got worse than A."""
    v = doc["verdict"]
    out = [("verdict (run B): every requirement met" if v["met"] else "verdict (run B): NOT MET")
           + f" - {v['source']}"]
    for it in v["items"]:
        if not it["met"]:
            where = f"{it['condition']}: " if it["condition"] else ""
            out.append(f"  not met: {it['part']}: {where}{it['requirement']}" + (f" ({it['text']})" if it["text"] else ""))
    worse = v["worsened"]
    if worse:
        points = len({w["condition"] for w in worse})
        out.append(f"worse in B than in A ({len(worse)} item{'s' * (len(worse) != 1)} at {points} "
                   f"point{'s' * (points != 1)}):")
        for w in worse[:10]:
            out.append(f"  {w['condition']}: {w['requirement']} {fmt(w['a'], '.3g', 'none')} -> {fmt(w['b'], '.3g', 'none')}")
        if len(worse) > 10:
            out.append(f"  ... {len(worse) - 10} more in compare.json")
    else:
        out.append("nothing is worse in B than in A")
    return out
