"""Continuous-turbulence results in the JSON documents and the terminal (docs/turbulence.md).

Per condition, ``bare.turbulence`` and ``closed_loop.turbulence`` hold the fields of
:data:`damper.analysis.turbulence.CONTRACT_FIELDS` (``null`` where undefined or unbounded),
with ``reasons`` naming why a field is ``null`` and ``delay_model`` saying how the delay
was modelled. Nothing is computed here.
"""

from __future__ import annotations

import math

from .jsonout import num
from .serialize import point
from .text import fmt, table


def turbulence_entry(result, index) -> dict:
    """The JSON object of one condition of a :class:`damper.analysis.turbulence.TurbulenceResult`."""
    from ...analysis.turbulence import CONTRACT_FIELDS

    record = point(result, index, CONTRACT_FIELDS)
    return record | {"reasons": result.reasons_at(index, contract_only=True), "delay_model": result.delay_model}


def add_turbulence(doc, study, checks=None):
    """Put a :class:`~damper.analysis.turbulence.TurbulenceStudy` (one member per condition) into
    the ``conditions`` of an assess-structure document (``bare`` / ``closed_loop``), with the
    turbulence requirements checked per condition (`checks`, from
    :func:`damper.analysis.turbulence_case.check_turbulence`) under ``closed_loop.turbulence.requirements``."""
    for i, cond in enumerate(doc["conditions"]):
        target = cond.get("measures", cond)  # a design.json entry keeps its measures one level down
        target["bare"]["turbulence"] = turbulence_entry(study.bare, (i,))
        target["closed_loop"]["turbulence"] = turbulence_entry(study.closed_loop, (i,))
        if checks and checks[i]:
            target["closed_loop"]["turbulence"]["requirements"] = [
                {k: (num(v) if isinstance(v, float) else v) for k, v in c.items()} for c in checks[i]]
    return doc


def _g(x, spec):
    return fmt(x, spec, "-") if x is None or math.isfinite(x) else "-"


def turbulence_table(doc) -> str:
    """Terminal table: the rms responses bare and with the damper, and the exceedance rates."""
    heads = ["condition", "sigma_w\nm/s", "L_w\nm", "q rms bare\ndeg/s", "q rms aug\ndeg/s", "nz rms bare\ng",
             "nz rms aug\ng", "surf rms\ndeg", "rate rms\ndeg/s", "rate lim.\nper s", "authority\nper s"]
    rows = []
    deg = 180.0 / math.pi
    for c in doc["conditions"]:
        b, a = c["bare"].get("turbulence"), c["closed_loop"].get("turbulence")
        if b is None or a is None:
            continue
        scaled = lambda x: None if x is None else x * deg  # noqa: E731
        rows.append([c["name"], _g(a["gust_rms_m_s"], ".3g"), _g(a["scale_length_m"], ".4g"),
                     _g(scaled(b["rms_pitch_rate_rad_s"]), ".3g"), _g(scaled(a["rms_pitch_rate_rad_s"]), ".3g"),
                     _g(b["rms_load_factor_g"], ".3g"), _g(a["rms_load_factor_g"], ".3g"),
                     _g(scaled(a["rms_surface_rad"]), ".3g"), _g(scaled(a["rms_surface_rate_rad_s"]), ".3g"),
                     _g(a["rate_limit_exceedances_per_s"], ".3g"), _g(a["authority_exceedances_per_s"], ".3g")])
    return table(heads, rows)
