"""The self-contained HTML comparison report of ``damper compare`` (templates/compare.html.j2).

Everything shown is read from the ``compare.json`` document (built once by
:mod:`damper.output.documents.compare`); plots are embedded as data URIs (SVG where written, else PNG). Autoescape is on:
condition names and paths from the user are escaped.
"""

from __future__ import annotations

import os

from ..documents.compare import PASS_FRACTION
from ..documents.text import fmt
from ..runfiles import _data_uri

#: Most points the report's table lists (compare.json has them all).
MAX_ROWS = 400


def _delta(x, spec):
    return "-" if x is None else ("0" if x == 0 else format(x, "+" + spec))


def _cells(r):
    a, b, d = r["a"], r["b"], r["delta"]
    return [r["name"], r["kind"], fmt(a["chosen_gain_s"], ".4g"), fmt(b["chosen_gain_s"], ".4g"),
            _delta(d["chosen_gain_s"], ".3g"), fmt(a["damping_equivalent"], ".3f"), fmt(b["damping_equivalent"], ".3f"),
            _delta(d["damping_equivalent"], ".3f"), fmt(a["gain_margin_db"], ".1f", "none"),
            fmt(b["gain_margin_db"], ".1f", "none"), fmt(a["phase_margin_deg"], ".1f", "none"),
            fmt(b["phase_margin_deg"], ".1f", "none"), _delta(d["cap_equivalent"], ".3g"),
            f"{fmt(a['level'], '.0f')}/{fmt(b['level'], '.0f')}", _delta(d[PASS_FRACTION], ".3g")]


HEADS = ["point", "kind", "K A (s)", "K B (s)", "delta K", "zeta A", "zeta B", "delta zeta", "GM A (dB)", "GM B (dB)",
         "PM A (deg)", "PM B (deg)", "delta CAP", "level A/B", "delta pass", "worse in B"]


def _figure(root, fg):
    """The figure `fg` of compare.json embedded as a data URI: its SVG where written, else its PNG."""
    name = fg.get("svg") or fg["png"]
    with open(os.path.join(root, name), "rb") as fh:
        return {"src": _data_uri(name, fh.read()), "caption": fg["caption"]}


def build_compare_report(doc, root, version) -> str:
    """The HTML text of the comparison report of `doc` (compare.json) whose plots are in `root`."""
    from .build import _environment

    v = doc["verdict"]
    kinds = {r["kind"] for r in doc["conditions"]}
    mixed = len(kinds) > 1  # a kind column only when the table mixes conditions and schedule points
    worsened = [(w["condition"], w["requirement"], fmt(w["a"], ".3g", "none"), fmt(w["b"], ".3g", "none"))
                for w in v["worsened"][:MAX_ROWS]]
    context = {
        "title": doc["title"],
        "version": version,
        "caution": doc["caution"],
        "runs": doc["runs"],
        "notes": doc["notes"],
        "verdict": v,
        "worse_points": len({w["condition"] for w in v["worsened"]}),
        "worsened_rows": worsened,
        "worsened_more": max(0, len(v["worsened"]) - MAX_ROWS),
        "heads": HEADS if mixed else [h for h in HEADS if h != "kind"],
        "rows": [{"cells": _cells(r) if mixed else [c for k, c in enumerate(_cells(r)) if k != 1],
                  "worse": ", ".join(r["worse"])} for r in doc["conditions"][:MAX_ROWS]],
        "kinds": sorted(kinds),
        "total": len(doc["conditions"]),
        "only": (("Only in A", doc["only_in_a"]), ("Only in B", doc["only_in_b"])),
        "figures": [_figure(root, fg) for fg in doc["figures"]],
    }
    return _environment().get_template("compare.html.j2").render(**context)
