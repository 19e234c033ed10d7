"""The report's section on the damper's failures and authority, read from failures.json.

Values are only formatted (rad to deg); the headline is the failures verdict's summary item
as failures.json holds it. The view has the shape the template's ``generic`` macro shows
(headline, blocks of pairs and tables, figures, warnings).
"""

from __future__ import annotations

from .format import DASH, R2D, f
from ..figures.failures import KINDS as FAILURE_FIGURES
from .sections import _files_figures, _headline, _pairs, _table, family_captions

LIMIT_WORDS = {"load_factor": "load factor", "pitch_attitude": "pitch attitude", "angle_of_attack": "angle of attack"}


def _deg(x, digits=4):
    return DASH if x is None else f(x * R2D, digits)


def _band_text(band, unit):
    if band is None:
        return "not checked"
    if unit == "g":
        return f"{f(band[0], 3)} to {f(band[1], 3)} g"
    return f"{_deg(band[0], 3)} to {_deg(band[1], 3)} deg"


def _window_text(w):
    if w is None:
        return "empty"
    return f"{_deg(w[0])} to {'unbounded' if w[1] is None else _deg(w[1])} deg"


def _settings_block(s):
    lim, src, servo = s["limits"], s.get("sources") or {}, s["servo"]
    rate = servo.get("authority_rate_limit_rad_s")
    return _pairs("Failure study", [
        ("recognition time", f"{f(s['recognition_time_s'])} s ({src.get('recognition_time_s', DASH)})"),
        ("kinds studied", ", ".join(s["kinds"])),
        ("incremental load factor limit", _band_text(lim.get("load_factor_g"), "g")),
        ("pitch-attitude change limit", _band_text(lim.get("pitch_attitude_rad"), "rad")),
        ("angle-of-attack change limit", _band_text(lim.get("angle_of_attack_rad"), "rad")),
        ("source of the limits", src.get("limits")),
        ("handling level required with the damper off",
         f"{s['passive_level_required']} ({src.get('passive_level_required', DASH)})"),
        ("damper authority", "none" if servo["authority_rad"] is None else f"\u00b1{_deg(servo['authority_rad'])} deg"),
        ("damper command rate limit", "none" if rate is None else f"{_deg(rate)} deg/s"),
        ("failures run to", servo.get("failures_run_to")),
    ])


def _condition_table(doc, bad):
    rows, fails = [], []
    for c in doc["conditions"]:
        r = c["failures"]
        h, o, p = r.get("hardover") or {}, r.get("oscillatory") or {}, r.get("passive") or {}
        rows.append([
            c["name"], f(c["gain_s"]),
            DASH if h.get("sign") is None else f"{h['sign']:+d}",
            f(h.get("peak_load_factor_increment_g"), 3), _deg(h.get("peak_pitch_attitude_change_rad"), 3),
            _deg(h.get("peak_angle_of_attack_change_rad"), 3), _deg(h.get("peak_pitch_rate_rad_s"), 3),
            LIMIT_WORDS.get(h.get("binding_limit"), DASH),
            f(o.get("frequency_rad_s"), 3), f(o.get("peak_load_factor_increment_g"), 3),
            _deg(o.get("peak_pitch_attitude_change_rad"), 3),
            DASH if p.get("level") is None else str(p["level"]),
            _window_text(r.get("authority_window_rad")) if "authority_window_rad" in r else DASH,
            "met" if c["name"] not in bad else "NOT MET",
        ])
        fails.append(c["name"] in bad)
    heads = ["condition", "gain K (s)", "hardover sign", "hardover load factor (g)", "hardover pitch attitude (deg)",
             "hardover angle of attack (deg)", "hardover pitch rate (deg/s)", "tightest limit",
             "oscillatory frequency (rad/s)", "oscillatory load factor (g)", "oscillatory pitch attitude (deg)",
             "passive level", "authority window", "verdict"]
    return _table("Failures per condition (peaks within the recognition time; hardover at the sign with the least "
                  "slack, +1 trailing-edge down)", heads, rows, fails)


def _saturation_blocks(doc):
    rows, fails, hit, total, longest = [], [], 0, 0, 0.0
    auth = doc["settings"]["servo"]["authority_rad"]
    for c in doc["conditions"]:
        for s in c.get("saturation") or []:
            t = s["time_at_authority_limit_s"] or 0.0
            total += 1
            hit += t > 0
            longest = max(longest, t)
            rows.append([c["name"], s["input"], f(t, 3), f"{100 * t / s['duration_s']:.1f} %" if s["duration_s"] else DASH,
                         f(s["time_at_authority_rate_limit_s"], 3), _deg(s["peak_damper_demand_rad"])])
            fails.append(t > 0)
    if not total:
        return [_pairs("Damper saturation", [("in the design's responses", "no authority given: the damper's "
                                               "command is limited only by the surface travel")])]
    text = (f"the damper reaches its authority (\u00b1{_deg(auth)} deg) in {hit} of {total} responses"
            + (f"; at most {f(longest, 3)} s" if hit else ""))
    return [_pairs("Damper saturation in the design's responses", [("how often and how long", text)]),
            _table("Time at the authority limit per response", ["condition", "input", "time at the authority (s)",
                   "share of the record", "time at its rate limit (s)", "largest damper demand (deg)"], rows, fails)]


def failures_view(doc, files):
    """The failures section's view (see the module notes)."""
    verdict = doc["verdict"]
    bad = {i["condition"] for i in verdict["items"] if not i["met"] and i["condition"] is not None}
    head = next(i for i in verdict["items"] if i["condition"] is None and i["requirement"] == "all")
    top = doc["failures"]
    blocks = [_settings_block(doc["settings"]), _condition_table(doc, bad)]
    blocks += _saturation_blocks(doc)
    blocks.append(_pairs("Authority window over every condition (one hardware value)", [
        ("window", _window_text(top.get("authority_window_rad"))),
        ("what sets it", top.get("authority_window_reason")),
    ]))
    misses = [[i["condition"] or "every condition", i["requirement"].replace("_", " "), i["text"]]
              for i in verdict["items"] if not i["met"] and i is not head]
    if misses:
        blocks.append(_table("Failure requirements not met", ["condition", "requirement", "finding"], misses,
                             [True] * len(misses)))
    figures = _files_figures(files, doc.get("files") or [], family_captions(FAILURE_FIGURES))
    return {"error": None, "headline": _headline(bool(head["met"]), head["text"]), "blocks": blocks,
            "figures": figures, "warnings": []}
