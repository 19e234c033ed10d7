"""The report's views of the schedule, robustness and other documents, and of the run's verdict.

Formatting only, from the documents the run wrote (:mod:`damper.output.report.build` builds the page).
"""

from __future__ import annotations

import json
import os
import re

from .format import DASH, _status, binding_text, f, key_label, pct, requirement_label, unit_text
from ..figures.robustness import KINDS as ROBUSTNESS_FIGURES
from ..figures.schedule import KINDS as SCHEDULE_FIGURES
from ..runfiles import image_uri as _image


# --- generic documents (schedule, robustness) ------------------------------------
_SKIP = {"title", "caution", "warnings", "provenance"}
_VERDICT_KEYS = ("met", "feasible", "ok", "pass", "passed", "meets")
#: Rows of a generic table shown in the report (failing rows first, up to MAX_FAILING_ROWS).
MAX_TABLE_ROWS = 40
MAX_FAILING_ROWS = 200
#: Items not met the first section lists per part (the JSON verdict objects hold them all).
GLANCE_ROWS = 10


def _scalar(v):
    return v is None or isinstance(v, (bool, int, float, str))


def _cell(v):
    if isinstance(v, bool):
        return "\u2714 yes" if v else "\u2718 NO"
    if isinstance(v, (int, float)) or v is None:
        return f(v)
    if isinstance(v, str):
        return v
    if isinstance(v, list) and all(_scalar(x) for x in v):
        if len(v) > 12:
            return ", ".join(_cell(x) for x in v[:12]) + f", ... ({len(v)} values)"
        return ", ".join(_cell(x) for x in v)
    if isinstance(v, list) and v and all(isinstance(x, list) and all(_scalar(y) for y in x) for x in v):
        items = ["[" + ", ".join(_cell(y) for y in x) + "]" for x in v[:6]]
        return ", ".join(items) + (f", ... ({len(v)} rows)" if len(v) > 6 else "")
    if isinstance(v, dict) and all(_scalar(x) for x in v.values()):
        return "; ".join(f"{_head(k)} {_cell(x)}" for k, x in v.items())
    text = json.dumps(v, allow_nan=False)
    return text if len(text) <= 160 else text[:157] + "..."


_NUMBER = re.compile(r"^[-+\u2212]?(\d[\d.]*)(e[-+]?\d+)?( ?%)?$|^\u2013$")


def _cells(texts):
    """Table cells as (text, css class): numbers right-aligned, short cells kept on one line."""
    out = []
    for t in texts:
        t = str(t)
        cls = "num nowrap" if _NUMBER.match(t) else ("nowrap" if len(t) <= 14 else "")
        out.append((t, cls))
    return out


def _head(key):
    label, unit = key_label(key)
    return f"{label} ({unit})" if unit else label


def _verdict(row):
    for k in _VERDICT_KEYS:
        if isinstance(row.get(k), bool):
            return row[k]
    return None


def _blocks(obj, files, title="", depth=0):
    """Render blocks (settings lists, tables, figures) of a generic JSON document."""
    blocks, figures = [], []
    pairs, subs = [], []
    for key, v in obj.items():
        if key in _SKIP and depth == 0:
            continue
        if isinstance(v, str) and v.lower().endswith((".png", ".svg")):
            src = _image(files, [os.path.splitext(v)[0]])
            if src:
                figures.append({"src": src, "caption": f"{_head(key)}: {os.path.basename(v)}"})
                continue
        if _scalar(v) or (isinstance(v, list) and all(_scalar(x) for x in v)):
            pairs.append((_head(key), _cell(v)))
        elif isinstance(v, dict) and all(_scalar(x) or isinstance(x, list) for x in v.values()) and depth >= 1:
            pairs.append((_head(key), _cell(v)))
        else:
            subs.append((key, v))
    if pairs:
        blocks.append({"kind": "pairs", "title": title, "rows": pairs})
    for key, v in subs:
        label = (f"{title}: " if title else "") + _head(key)
        if isinstance(v, dict):
            b, fg = _blocks(v, files, label, depth + 1) if depth < 3 else ([{"kind": "pairs", "title": label, "rows": [(k, _cell(x)) for k, x in v.items()]}], [])
            blocks += b
            figures += fg
        elif isinstance(v, list) and v and all(isinstance(x, dict) for x in v):
            cols = []
            for row in v:
                for k in row:
                    if k not in cols and not (isinstance(row[k], str) and row[k].lower().endswith((".png", ".svg", ".csv"))):
                        cols.append(k)
            ordered = sorted(range(len(v)), key=lambda n: (_verdict(v[n]) is not False, n))
            n_fail = sum(1 for row in v if _verdict(row) is False)
            keep = max(MAX_TABLE_ROWS, min(n_fail, MAX_FAILING_ROWS))
            rows = []
            for n in ordered[:keep]:
                row = v[n]
                rows.append({"cells": _cells([_cell(row.get(k)) for k in cols]), "fail": _verdict(row) is False})
            for row in v:
                for k, x in row.items():
                    if isinstance(x, str) and x.lower().endswith((".png", ".svg")):
                        src = _image(files, [os.path.splitext(x)[0]])
                        if src:
                            figures.append({"src": src, "caption": f"{label}: {os.path.basename(x)}"})
            more = len(v) - len(rows)
            blocks.append(
                {
                    "kind": "table",
                    "title": label,
                    "heads": [_head(k) for k in cols],
                    "rows": rows,
                    "more": f"{more} more row{'s' if more != 1 else ''} not shown"
                    + (" (all of them pass)" if n_fail <= len(rows) and n_fail else "")
                    + "; every row is in the JSON file"
                    if more > 0
                    else "",
                }
            )
        else:
            blocks.append({"kind": "pairs", "title": label, "rows": [("value", _cell(v))]})
    return blocks, figures


def part_view(headline, blocks, figures, doc) -> dict:
    """The template's view of one part's section: its headline, tables, figures and the
    document's own warnings (no error)."""
    return {"error": None, "headline": headline, "blocks": blocks, "figures": figures,
            "warnings": [str(w) for w in doc.get("warnings") or []]}


def _generic_view(doc, files, plot_prefix):
    if doc is None:
        return None
    if "_unreadable" in doc:
        return {"error": doc["_unreadable"]}
    blocks, figures = _blocks(doc, files)
    named = {fg["src"] for fg in figures}
    stems = sorted({os.path.splitext(n)[0][len("plots/"):] for n in files.names("plots")
                    if n[len("plots/"):].startswith(plot_prefix) and n.lower().endswith((".png", ".svg"))})
    for stem in stems:
        src = _image(files, ["plots/" + stem])
        if src and src not in named:
            figures.append({"src": src, "caption": stem.replace("-", " ").replace("_", " ")})
    headline = None
    for key in _VERDICT_KEYS:
        if isinstance(doc.get(key), bool):
            ok = doc[key]
            message = doc.get("message") or doc.get("summary") or ""
            headline = {"status": {"cls": "pass", "symbol": "\u2714", "text": "passed"} if ok
                        else {"cls": "fail", "symbol": "\u2718", "text": "FAILED"},
                        "message": message if isinstance(message, str) else _cell(message)}
            break
    return part_view(headline, blocks, figures, doc)


# --- dedicated views of the schedule and robustness documents --------------------
def _pairs(title, rows):
    return {"kind": "pairs", "title": title, "rows": [(a, b) for a, b in rows if b not in (None, "")]}


def _table(title, heads, rows, fails=None, limit=MAX_TABLE_ROWS):
    """A table block: failing rows first, at most `limit` rows (all failing rows up to MAX_FAILING_ROWS)."""
    fails = list(fails) if fails is not None else [False] * len(rows)
    order = sorted(range(len(rows)), key=lambda n: (not fails[n], n))
    keep = max(limit, min(sum(fails), MAX_FAILING_ROWS))
    shown = [{"cells": _cells(rows[n]), "fail": fails[n]} for n in order[:keep]]
    more = len(rows) - len(shown)
    return {
        "kind": "table",
        "title": title,
        "heads": heads,
        "rows": shown,
        "more": f"{more} more row{'s' if more != 1 else ''} not shown (all of them pass); every row is in the JSON file"
        if more > 0
        else "",
    }


def family_captions(kinds) -> dict:
    """{first word of a file name: caption} of a figure family's :class:`FigureKind` list."""
    return {k.stem.split("-")[0]: k.caption for k in kinds}


def _files_figures(files, names, captions=None):
    stems, out = [], []
    for name in names or []:
        if isinstance(name, str) and name.lower().endswith((".png", ".svg")):
            stem = os.path.splitext(name)[0]
            if stem not in stems:
                stems.append(stem)
    for stem in stems:
        src = _image(files, [stem, os.path.join("plots", stem)])
        if src:
            base = os.path.basename(stem)
            caps = captions or {}  # by the whole stem, else by its first word
            out.append({"src": src, "caption": caps.get(base, caps.get(base.split("-")[0], base.replace("-", " ")))})
    return out


def _plot_dir_figures(files, prefixes, captions=None):
    names = [n for n in files.names("plots") if n[len("plots/"):].startswith(prefixes) and n.lower().endswith((".png", ".svg"))]
    return _files_figures(files, names, captions)


def _headline(ok, message):
    return {
        "status": {"cls": "pass", "symbol": "\u2714", "text": "passed"} if ok else {"cls": "fail", "symbol": "\u2718", "text": "FAILED"},
        "message": message or "",
    }


def _part_headline(doc, part):
    """The headline of a section: its part's summary item of the document's verdict object."""
    from ...verdict import Verdict

    try:
        item = Verdict.from_doc(doc.get("verdict")).summary(part)
    except (ValueError, KeyError, TypeError):
        return None
    return None if item is None else _headline(item.met, item.text)


def verdict_view(docs) -> dict:
    """The report's first section: the run's verdict, the sum of the documents' verdict objects.

    Parameters
    ----------
    docs : dict
        File name to parsed JSON document (design.json and whatever optional documents exist).
    """
    from ...verdict import Verdict

    total, unreadable = Verdict(), []
    for name, doc in docs.items():
        if not isinstance(doc, dict) or "verdict" not in doc:
            continue
        try:
            total = total + Verdict.from_doc(doc["verdict"])
        except (ValueError, KeyError, TypeError):
            unreadable.append(name)
    parts = []
    for p in total.parts:
        s = total.summary(p)
        misses = [i for i in total.items if i.part == p and not i.met and i is not s]
        parts.append({
            "part": p,
            "status": _status(s.met if s is not None else not misses),
            "text": s.text if s is not None else "",
            "misses": [{"condition": i.condition or "", "requirement": "every requirement" if i.requirement == "all"
                        else requirement_label(i.requirement), "text": i.text} for i in misses[:GLANCE_ROWS]],
            "more": max(0, len(misses) - GLANCE_ROWS),
        })
    return {"met": total.met, "judged": bool(total.items), "status": _status(total.met), "parts": parts,
            "unreadable": unreadable}


def _schedule_view(doc, files):
    t = doc["table"]
    variables = t["variables"]
    gains = t["gains_s"]
    blocks = [
        _pairs(
            "The schedule",
            [
                ("scheduled on", ", ".join(f"{v['name'].replace('_', ' ')} ({v.get('unit', '')})" for v in variables)),
                ("form", str(t.get("form", "")).replace("_", " ")),
                ("law", t.get("law")),
                ("interpolation", t.get("interpolation")),
                ("gain unit", t.get("gain_unit")),
                ("sign", t.get("sign")),
                ("designed from", doc.get("source")),
                ("configurations", ", ".join(str(x) for x in doc.get("configurations") or [])),
                ("rounds of breakpoint repair", str(doc.get("rounds", ""))),
            ],
        )
    ]
    blocks += _gain_table_blocks(variables, gains)
    blocks += _breakpoint_blocks(doc)
    blocks += _verification_blocks(doc, variables)
    figures = _plot_dir_figures(files, ("schedule",), {k.stem: k.caption for k in SCHEDULE_FIGURES})
    headline = _part_headline(doc, "schedule") or (_headline(bool(doc.get("passed")), doc.get("message"))
                                                     if isinstance(doc.get("passed"), bool) else None)
    return part_view(headline, blocks, figures, doc)


def _gain_table_blocks(variables, gains) -> list:
    """The gain table (one or two schedule variables)."""
    blocks = []
    if len(variables) == 1:
        v = variables[0]
        rows = [[f(b), f(k)] for b, k in zip(v["breakpoints"], gains)]
        blocks.append(_table("Gain table", [f"{v['name'].replace('_', ' ')} ({v.get('unit', '')})", "gain K (s)"], rows, limit=500))
    elif len(variables) == 2:
        v0, v1 = variables
        heads = [f"{v0['name'].replace('_', ' ')} ({v0.get('unit', '')}) \\ {v1['name'].replace('_', ' ')} ({v1.get('unit', '')})"]
        heads += [f(b) for b in v1["breakpoints"]]
        rows = [[f(b)] + [f(k) for k in row] for b, row in zip(v0["breakpoints"], gains)]
        blocks.append(_table("Gain table, K (s)", heads, rows, limit=500))
    return blocks


def _breakpoint_blocks(doc) -> list:
    """The design at each breakpoint and the repair rounds."""
    blocks = []
    bd = doc.get("breakpoint_design") or {}
    if bd.get("gain_s") is not None:
        n = len(bd["gain_s"])
        feas = bd.get("feasible") or [None] * n
        rows = [
            [str(j + 1), f(bd["gain_s"][j]), _cell(feas[j]), pct((bd.get("worst_slack") or [None] * n)[j]),
             binding_text((bd.get("binding") or [""] * n)[j]), str((bd.get("design_points") or [""] * n)[j])]
            for j in range(n)
        ]
        blocks.append(
            _table(
                "Design at each breakpoint",
                ["breakpoint", "gain K (s)", "feasible", "worst slack", "binding requirement", "design points"],
                rows,
                [x is False for x in feas],
                limit=500,
            )
        )
    hist = doc.get("history") or []
    if hist:
        blocks.append(
            _table("Breakpoint repair rounds", ["breakpoints", "failing verification points"],
                   [[_cell(h.get("breakpoints")), _cell(h.get("failing_points"))] for h in hist], limit=100)
        )
    return blocks


def _verification_blocks(doc, variables) -> list:
    """The verification summary and its points."""
    blocks = []
    ver = doc.get("verification") or {}
    if ver:
        blocks.append(
            _pairs(
                "Verification between and beyond the breakpoints",
                [
                    ("points checked", str(ver.get("points", ""))),
                    ("points failing", str(ver.get("failing", ""))),
                    ("requirements checked", ", ".join(requirement_label(c) for c in ver.get("criteria") or [])),
                ],
            )
        )
        configs = doc.get("configurations") or []
        rows, fails = [], []
        for r in ver.get("rows") or []:
            cfg = r.get("configuration")
            cfg_name = configs[cfg] if isinstance(cfg, int) and 0 <= cfg < len(configs) else _cell(cfg)
            rows.append(
                [r.get("label", ""), r.get("kind", ""), cfg_name, f(r.get("altitude_m")), f(r.get("airspeed_m_s")),
                 ", ".join(f(x) for x in r.get("variables") or []), f(r.get("gain_s")), _cell(r.get("passed")),
                 pct(r.get("worst_slack")), binding_text(r.get("binding")) if r.get("binding") else DASH,
                 f(r.get("damping_ratio"), 3), f(r.get("smallest_gain_margin_db"), 3, "none")]
            )
            fails.append(r.get("passed") is False)
        names = " / ".join(v["name"].replace("_", " ") for v in variables)
        units = " / ".join(v.get("unit", "") for v in variables)
        blocks.append(
            _table(
                "Verification points",
                ["point", "kind", "configuration", "altitude (m)", "true airspeed (m/s)", f"{names} ({units})", "gain K (s)",
                 "verdict", "worst slack", "binding requirement", "damping ratio (\u2013)", "smallest gain margin (dB)"],
                rows,
                fails,
            )
        )
    return blocks


def _interval_text(iv):
    if not iv or iv[0] is None:
        return DASH
    return f"{100 * iv[0]:.1f} to {100 * iv[1]:.1f} %"


def _robustness_view(doc, files):
    blocks = [_method_block(doc.get("method") or {})]
    params = doc.get("parameters") or []
    if params and all(isinstance(p, dict) for p in params):
        blocks.append(_parameter_block(params))
    rows, fails, worst_blocks = [], [], []
    for c in doc.get("conditions") or []:
        worst = [w for w in c.get("worst") or [] if isinstance(w, dict)]
        row, ok = _pass_row(c, worst)
        rows.append(row)
        fails.append(not ok)
        block = _worst_block(c, worst)
        if block is not None:
            worst_blocks.append(block)
    blocks.append(
        _table(
            "Pass fraction per condition",
            ["condition", "gain K (s)", "nominal meets all", "samples meeting every requirement", "fraction",
             "interval", "tightest requirement in the worst case", "its slack", "main driver", "corners meeting all"],
            rows,
            fails,
            limit=500,
        )
    )
    blocks += worst_blocks
    headline = _part_headline(doc, "robustness")
    figures = _files_figures(files, doc.get("files") or [], family_captions(ROBUSTNESS_FIGURES))
    if not figures:
        figures = _plot_dir_figures(files, ("pass-fraction", "scatter-", "sensitivity-", "robust"))
    return part_view(headline, blocks, figures, doc)


def _method_block(m):
    conf = m.get("confidence")
    return _pairs(
        "Method",
        [
            ("conditions studied", m.get("conditions_studied")),
            ("samples", _cell(m.get("samples"))),
            ("seed", _cell(m.get("seed"))),
            ("confidence of the intervals", f"{100 * conf:.0f} %" if isinstance(conf, (int, float)) else None),
            ("corners evaluated", f"{m.get('corners_evaluated')}" + (" (all)" if m.get("corners_complete") else "")),
            ("loops evaluated", f"{m['loops_evaluated']:,}" if isinstance(m.get("loops_evaluated"), int)
             else _cell(m.get("loops_evaluated"))),
            ("sampling", m.get("sampling")),
            ("normal distributions", m.get("normal")),
            ("corners", m.get("corners")),
            ("worst-case refinement", m.get("refinement") if isinstance(m.get("refinement"), str) else _cell(m.get("refinement"))),
            ("pass-fraction interval", m.get("interval")),
            ("sensitivity", m.get("sensitivity")),
            ("centre-of-gravity model", m.get("cg_model")),
            ("frequency domain", m.get("frequency_domain")),
        ],
    )


def _parameter_block(params):
    cols = []
    for p in params:
        for k, v in p.items():
            flat = _scalar(v) or (isinstance(v, list) and all(_scalar(x) for x in v))
            if k not in cols and flat:
                cols.append(k)
    cells = [[unit_text(p.get(k)) if k == "unit" else _cell(p.get(k)) for k in cols] for p in params]
    block = _table("Uncertain parameters", [_head(k) for k in cols], cells, limit=200)
    block["more"] = "the nominal value and bounds of every parameter at every condition are in robustness.json"
    return block


def _slack_of(w):
    """A worst case's slack as a number for ordering (``"-inf"`` lowest, non-numbers highest)."""
    return w["slack"] if isinstance(w.get("slack"), (int, float)) else (-1e300 if w.get("slack") == "-inf" else 1e300)


def _pass_row(c, worst):
    """One condition's row of the pass-fraction table, and whether it passes (every sample, no worst case missed)."""
    pa = (c.get("pass") or {}).get("all") or {}
    tightest = min(worst, key=_slack_of) if worst else None
    frac = pa.get("fraction")
    worst_missed = bool(tightest) and tightest.get("met") is False
    ok = frac is not None and frac >= 1.0 and not worst_missed
    row = [
        c.get("name", ""),
        f(c.get("gain_s")),
        _cell((c.get("nominal") or {}).get("all_met")),
        f"{pa.get('passed', DASH)} of {c.get('samples', DASH)}",
        DASH if frac is None else f"{100 * frac:.1f} %",
        _interval_text(pa.get("interval")),
        requirement_label(tightest["criterion"]) if tightest else DASH,
        (pct(tightest["slack"]) if isinstance(tightest.get("slack"), (int, float)) else str(tightest.get("slack"))) if tightest else DASH,
        (c.get("sensitivity") or {}).get("top_driver") or DASH,
        f"{(c.get('corners') or {}).get('passed_all', DASH)} of {(c.get('corners') or {}).get('evaluated', DASH)}",
    ]
    return row, ok


def _worst_block(c, worst):
    """The table of one condition's worst cases (None without any)."""
    wrows, wfails = [], []
    for w in worst:
        sl = w.get("slack")
        wrows.append(
            [
                requirement_label(w.get("criterion")),
                (f(w.get("value")) + (f" {unit_text(w.get('unit'))}" if unit_text(w.get("unit")) else "")) if w.get("value") is not None else (w.get("value_note") or DASH),
                pct(sl) if isinstance(sl, (int, float)) else str(sl),
                _cell(w.get("met")),
                "; ".join(f"{k} {f(v)}" for k, v in (w.get("parameters") or {}).items()),
            ]
        )
        wfails.append(w.get("met") is False)
    if not wrows:
        return None
    return _table(f"Worst cases found at {c.get('name', '')}", ["requirement", "worst value", "slack", "met", "parameters there"], wrows, wfails, limit=100)


def _section_view(doc, files, dedicated, prefix):
    """The dedicated view of a document, or the generic one when its structure is not the known one."""
    if doc is None or "_unreadable" in doc:
        return _generic_view(doc, files, prefix)
    try:
        return dedicated(doc, files)
    except (KeyError, TypeError, ValueError, AttributeError, IndexError):
        return _generic_view(doc, files, prefix)
