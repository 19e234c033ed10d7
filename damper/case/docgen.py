"""Generate docs/case-file.md from the schema: ``python -m damper.case.docgen > docs/case-file.md``."""

from __future__ import annotations

import math

from . import schema

HEADER = """# Case-file reference

A case is one YAML file (loaded safely: plain data only, no tags that build objects; a key
given twice in one section is an error). Every quantity is either a **plain number in the SI
unit shown** or a **string with units** parsed by the pint units library, e.g. `"120 kt"`,
`"8000 ft"`, `"1475 slug*ft**2"`, `"-2.1e6 N*m/rad"`, `"0.09 1/deg"`. Angles are radians
when plain (`"10 deg"` is converted). Unknown keys are errors, with a suggestion for typos.

**Derivatives** take their form from their dimension: per unit mass (Z) or per unit pitch
inertia (M) when given as plain numbers or in `m/s^2`, `1/s^2`, `1/s`; with force or moment
dimensions (`N/rad`, `N*m/rad`, `N*m*s/rad`) they are divided by the condition's mass or
pitch inertia.

**Altitude** is geopotential (pressure altitude in the standard atmosphere, what flight
manuals use) unless `atmosphere.altitude_kind: geometric`.

**Cases without conditions** (an `envelope` with `aerodynamics` tables): `damper assess`,
`sweep`, `respond` and `robust --gain` evaluate the envelope's design points, the points
`damper design` first designs its schedule's nodes from (at each initial breakpoint, across
altitude, for every configuration), each named `<configuration> h=<m> m V=<m/s> m/s`.

**Signs**: surface deflections are trailing-edge down positive (a conventional airframe has
`M_delta < 0`); the pilot command (`responses.inputs[].amplitude`) is positive nose-up
whatever the sign of `M_delta` (docs/theory.md, section 1).

This page is generated from `damper/case/schema.py` (`python -m damper.case.docgen`);
`tests/test_docs.py` checks it is current.
"""


def _default(spec):
    d = spec.default
    if d is schema.REQUIRED:
        return "required"
    if d is None:
        return "absent"
    if isinstance(d, dict):
        return "see keys"
    if isinstance(d, tuple) and not d:
        return "none"
    if isinstance(d, float):
        return "0" if d == 0 else (f"{d:g}" if math.isfinite(d) else str(d))
    return f"`{d}`"


def _section_doc(spec, grouped):
    if isinstance(spec, schema.Items):
        doc = (spec.item.doc or "") + " A list; each item has the keys below."
    else:
        doc = spec.doc or ""
    if grouped:
        doc += " (one of a group: see above)"
    return doc


#: Sections whose derivatives or coefficients carry signs: the convention is stated there.
SIGNED_SECTIONS = ("conditions[].derivatives", "conditions[].coefficients", "aerodynamics")


def _render_section(section, path, lines, doc=None):
    """A section's heading, its own keys in one table, then each sub-section in turn."""
    title = f"`{path}`" if path else "top level"
    lines.append(f"\n## {title}\n")
    if doc:
        lines.append(f"{doc}\n")
    if path in SIGNED_SECTIONS:
        lines.append(f"{schema.SIGN_CONVENTION}\n")
    for group in getattr(section, "exactly_one", ()):
        lines.append(f"Give exactly one of: {', '.join('`' + g + '`' for g in group)}.\n")
    for group in getattr(section, "at_most_one", ()):
        lines.append(f"Give at most one of: {', '.join('`' + g + '`' for g in group)}.\n")
    grouped = {k for g in section.exactly_one for k in g}
    own, subs = [], []
    for key, spec in section.fields.items():
        full = f"{path}.{key}" if path else key
        if isinstance(spec, schema.Section):
            subs.append((full, spec, spec, key in grouped))
            own.append(f"| `{key}` | section | {'one of a group' if key in grouped else _default(spec)} | {spec.doc} See `{full}`. |")
        elif isinstance(spec, schema.Items) and isinstance(spec.item, schema.Section):
            subs.append((full, spec, spec.item, False))
            own.append(f"| `{key}` | list of sections | {_default(spec)} | {spec.item.doc or spec.doc} See `{full}`. |")
        else:
            default = "one of a group" if key in grouped else _default(spec)
            own.append(f"| `{key}` | {spec.describe().replace('|', '/')} | {default} | {spec.doc} |")
    if own:
        lines.append("| key | type | default | meaning |\n|---|---|---|---|")
        lines.extend(own)
    for full, spec, inner, is_grouped in subs:
        item_path = full if isinstance(spec, schema.Section) else f"{full}[]"
        _render_section(inner, item_path, lines, _section_doc(spec, is_grouped))


def render() -> str:
    lines = [HEADER]
    _render_section(schema.CASE, "", lines)
    return "\n".join(lines) + "\n"


if __name__ == "__main__":
    print(render(), end="")
