"""Formatting for the design report: numbers, units, bands, labels of requirements and keys.

Only formatting: every value comes from the run's documents (:mod:`damper.output.report.build`).
"""

from __future__ import annotations

import math

from ...quantities import unit_suffix
from ...requirements.registry import label as _registry_label

R2D = 180.0 / math.pi
KT = 0.514444  # m/s per knot (exact: 1852/3600)
FT = 0.3048  # m per foot (exact)

# ---------------------------------------------------------------------------------
# number formatting (display only)
# ---------------------------------------------------------------------------------
DASH = "\u2013"


def f(x, digits=4, none=DASH):
    """`x` with `digits` significant digits; None/NaN/inf become `none`."""
    if x is None or isinstance(x, bool):
        return none if x is None else ("yes" if x else "no")
    try:
        v = float(x)
    except (TypeError, ValueError):
        return str(x)
    if not math.isfinite(v):
        return none
    if v == 0:
        return "0"
    a = abs(v)
    if 1e-4 <= a < 1e6:
        text = f"{v:.{digits}g}"
    else:
        text = f"{v:.{max(digits - 1, 1)}e}"
    return text


def fixed(x, decimals, none=DASH):
    if x is None:
        return none
    v = float(x)
    return f"{v:.{decimals}f}" if math.isfinite(v) else none


def scaled(x, factor, digits=4, none=DASH):
    return none if x is None else f(float(x) * factor, digits, none)


def pct(x, none=DASH):
    """A normalised slack as a signed per cent."""
    if x is None:
        return none
    v = 100.0 * float(x)
    return f"{v:+.1f} %" if math.isfinite(v) else none


def complex_text(pair, digits=4):
    if not pair or pair[0] is None:
        return DASH
    re_, im = pair[0], pair[1] or 0.0
    if abs(im) < 1e-12:
        return f(re_, digits)
    sign = "+" if im >= 0 else "-"
    return f"{f(re_, digits)} {sign} {f(abs(im), digits)}j"


def roots_text(roots, digits=4):
    seen, out = set(), []
    for r in roots or []:
        if r[0] is None:
            continue
        key = (round(r[0], 9), round(abs(r[1] or 0.0), 9))
        if key in seen and abs(r[1] or 0.0) > 0:
            continue
        seen.add(key)
        if abs(r[1] or 0.0) > 1e-12:
            out.append(f"{f(r[0], digits)} \u00b1 {f(abs(r[1]), digits)}j")
        else:
            out.append(f(r[0], digits))
    return ", ".join(out) or DASH


def band_text(lower, upper, unit=""):
    u = f" {unit_text(unit)}" if unit_text(unit) else ""
    if lower is not None and upper is not None:
        return f"{f(lower)} to {f(upper)}{u}"
    if lower is not None:
        return f"\u2265 {f(lower)}{u}"
    if upper is not None:
        return f"\u2264 {f(upper)}{u}"
    return "any"


def unit_text(unit):
    """A unit for display: ``(rad/s^2)/g`` -> ``(rad/s²)/g``; no unit for dimensionless."""
    if unit in (None, "", "-"):
        return ""
    return str(unit).replace("^2", "\u00b2").replace("^3", "\u00b3").replace("**2", "\u00b2")


# ---------------------------------------------------------------------------------
# labels
# ---------------------------------------------------------------------------------
BINDING_SHORT = {
    "sweep range": "end of the gain sweep",
}

#: Units a generic table's keys may carry; the key suffix of each comes from the one rule the
#: JSON documents are written by (:func:`damper.quantities.unit_suffix`).
KEY_UNITS = (
    "rad/s^2", "rad/s", "deg/s", "m/s^2", "m/s", "kg m^2", "kg/m^3", "1/s^2", "1/s", "pct",
    "dB", "deg", "rad", "kPa", "Pa", "kg", "Hz", "m^2", "ft", "kt", "m", "s", "g",
)

#: ``(suffix, unit as shown)``, longest suffix first (``_rad_s`` before ``_s``).
UNIT_SUFFIXES = tuple(
    sorted(
        (("_" + unit_suffix(u), "%" if u == "pct" else unit_text(u)) for u in KEY_UNITS),
        key=lambda pair: -len(pair[0]),
    )
)


def key_label(key):
    """``(label, unit)`` of a JSON key: ``"gain_margin_db"`` -> ``("gain margin", "dB")``."""
    k = str(key)
    unit = ""
    for suffix, u in UNIT_SUFFIXES:
        if k.lower().endswith(suffix) and len(k) > len(suffix):
            k, unit = k[: -len(suffix)], u
            break
    return k.replace("_", " "), unit


def requirement_label(name):
    """A criterion's registered label; other names in plain words (the one rule, the figures' too)."""
    return _registry_label(name)


def binding_text(binding):
    from ...analysis.search import BARE_MEETS

    if binding == BARE_MEETS:
        return "none: K = 0 already meets every requirement"
    if binding in BINDING_SHORT:
        return BINDING_SHORT[binding]
    return requirement_label(binding)


# ---------------------------------------------------------------------------------

def _status(ok):
    """A verdict that does not rely on colour: symbol, word and a class."""
    if ok is None:
        return {"cls": "na", "symbol": "\u2013", "text": "not judged"}
    return {"cls": "pass", "symbol": "\u2714", "text": "met"} if ok else {"cls": "fail", "symbol": "\u2718", "text": "MISSED"}
