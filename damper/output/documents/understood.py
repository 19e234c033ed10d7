"""How the case was understood, for the terminal: each condition as written and in SI, and the level legend.

The echo is formatted from the ``case_summary`` conditions of ``design.json``
(:func:`damper.output.documents.design.case_summary`), so the terminal and the JSON show the
same numbers, computed once.
"""

from __future__ import annotations

#: m/s per knot and m per foot (exact by definition).
KT = 0.514444
FT = 0.3048
#: Conditions echoed one line each; a larger case gets a summary line and the first few.
MAX_ECHO = 20
FIRST_FEW = 5

_UNIT_OF = {"airspeed": "m/s", "equivalent_airspeed": "m/s", "mach": "Mach", "altitude": "m"}


def _num(x, spec):
    return "-" if x is None else format(float(x), spec)


def _written_text(key, text) -> str:
    from ...case.written import is_plain

    if is_plain(text):
        return f"{key} {text} (plain: {_UNIT_OF[key]})" if key != "mach" else f"mach {text}"
    return f"{key} '{text}'"


def condition_line(c, altitude_kind="geopotential", width=0) -> str:
    """One condition (a ``case_summary`` entry) as written and as understood, SI with kt, ft and Mach.

    Parameters
    ----------
    c : dict
        ``name``, ``airspeed_m_s``, ``equivalent_airspeed_m_s``, ``altitude_m`` (as given, m),
        ``mach``, ``dynamic_pressure_pa`` (Pa) and optionally ``as_written``.
    altitude_kind : str
    width : int
        Width the name is padded to.
    """
    tas, eas, alt = c.get("airspeed_m_s"), c.get("equivalent_airspeed_m_s"), c.get("altitude_m")
    kind = "" if altitude_kind == "geopotential" else f" {altitude_kind}"
    q = c.get("dynamic_pressure_pa")
    understood = (
        f"TAS {_num(tas, '.4g')} m/s ({_num(None if tas is None else tas / KT, '.0f')} kt), "
        f"EAS {_num(None if eas is None else eas / KT, '.0f')} kt, Mach {_num(c.get('mach'), '.3f')}, "
        f"{_num(alt, '.0f')} m ({_num(None if alt is None else alt / FT, '.0f')} ft{kind}), "
        f"q {_num(None if q is None else q / 1000.0, '.3g')} kPa"
    )
    written = c.get("as_written") or {}
    given = ", ".join(_written_text(k, v) for k, v in written.items())
    return f"  {c['name']:<{width}}  " + (f"{given} -> {understood}" if given else understood)


def _span(values, scale, spec):
    vals = [v / scale for v in values if v is not None]
    if not vals:
        return "-"
    return f"{format(min(vals), spec)}-{format(max(vals), spec)}"


def conditions_echo(summary_conditions, altitude_kind="geopotential", limit=MAX_ECHO) -> str:
    """The conditions as understood: one line each, or a summary and the first few for a large case.

    Parameters
    ----------
    summary_conditions : list of dict
        ``case_summary["conditions"]`` of design.json.
    altitude_kind : str
    limit : int
        Most conditions listed one line each.

    Returns
    -------
    str
        Empty without conditions.
    """
    conds = list(summary_conditions)
    if not conds:
        return ""
    width = min(24, max(len(str(c["name"])) for c in conds[:limit]))
    how = "as written -> as understood" if any(c.get("as_written") for c in conds) else "as understood"
    if len(conds) <= limit:
        head = f"conditions {how} (TAS: true airspeed, EAS: equivalent airspeed, q: dynamic pressure):"
        return "\n".join([head] + [condition_line(c, altitude_kind, width) for c in conds])
    tas = [c.get("airspeed_m_s") for c in conds]
    alt = [c.get("altitude_m") for c in conds]
    head = (
        f"{len(conds)} conditions as understood: TAS {_span(tas, 1.0, '.4g')} m/s ({_span(tas, KT, '.0f')} kt), "
        f"Mach {_span([c.get('mach') for c in conds], 1.0, '.3f')}, altitude {_span(alt, 1.0, '.0f')} m "
        f"({_span(alt, FT, '.0f')} ft); the first {FIRST_FEW}, {how}:"
    )
    lines = [head] + [condition_line(c, altitude_kind, width) for c in conds[:FIRST_FEW]]
    lines.append(f"  ... and {len(conds) - FIRST_FEW} more")
    return "\n".join(lines)


def echo_for(case, doc=None) -> str:
    """:func:`conditions_echo` of a case, from design.json's ``case_summary`` when `doc` is given."""
    if doc is None:
        from .design import case_summary

        summary = case_summary(case)
    else:
        summary = doc["case_summary"]
    return conditions_echo(summary["conditions"], summary.get("altitude_kind", "geopotential"))


def with_level_legend(text, case) -> str:
    """`text` (a table with a level column) followed by :func:`level_legend` when the case judges levels."""
    legend = level_legend(case)
    return f"{text}\n{legend}" if legend else text


def level_legend(case) -> str:
    """One line on where the handling level and the requirements' bands come from ('' without levels).

    The level is judged on the boundaries the named standard publishes for the preset's
    category; the bands ('fails', 'misses') are the case's own requirements, which may be
    stricter than the standard's level 1, so both can stand side by side.
    """
    preset = case.requirements_given.preset
    if preset is None:
        return ""
    own = case.requirements_given.own_keys
    extra = f" plus {', '.join(own)}" if own else ""
    return (
        f"level: the best level (1-3) whose {preset.standard} category {preset.category} boundaries (damping, "
        f"CAP, delay, frequency) are met; 'fails'/'misses' judge the case's own requirements (preset level "
        f"{preset.level}{extra}), so level 1 can stand beside a failed band."
    )


__all__ = ["FIRST_FEW", "MAX_ECHO", "condition_line", "conditions_echo", "echo_for", "level_legend", "with_level_legend"]
