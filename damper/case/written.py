"""How each condition's speed and altitude were written, and warnings on implausible plain numbers.

A plain number (no unit) for a speed is m/s and for an altitude is m. A user who meant
knots or feet gets a flight condition far from the intended one without an error. When
the SI meaning of a plain number is implausible (a true or equivalent airspeed above
Mach 1, an altitude above 25 km) in a case whose envelope does not reach that far, the
case draws a warning (thresholds: the usual ranges of :data:`damper.case.ranges.RANGES`).
Writing the unit (``'400 m/s'``, ``'30 km'``) states the intent and silences the warning.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .ranges import RANGES

#: The keys of a condition whose written form is kept (one speed key and the altitude).
WRITTEN_KEYS = ("airspeed", "equivalent_airspeed", "mach", "altitude")
#: Most warnings of one kind listed one per condition; beyond it, one summary line.
MAX_LISTED = 3

_KT = 0.514444  # m/s per knot (exact: 1852/3600)
_FT = 0.3048  # m per foot (exact)


@dataclass(frozen=True)
class Written:
    """One key of a condition as the case file wrote it.

    Attributes
    ----------
    key : str
        ``airspeed``, ``equivalent_airspeed``, ``mach`` or ``altitude`` (a condition's), or the
        full key path (:func:`written_quantities`).
    text : str
        The value as written (a plain number as YAML read it).
    plain : bool
        Written without a unit (a number: the key's SI unit applies).
    """

    key: str
    text: str
    plain: bool


def is_plain(value) -> bool:
    """Whether a case-file value is a number without a unit (``120``, ``'1.5e3'``)."""
    if isinstance(value, bool):
        return False
    if isinstance(value, (int, float)):
        return True
    if isinstance(value, str):
        try:
            float(value)
        except ValueError:
            return False
        return True
    return False


def as_written(raw_condition) -> tuple:
    """The speed key and the altitude of one condition (the parsed YAML mapping) as written.

    Returns
    -------
    tuple of Written
        In the order of :data:`WRITTEN_KEYS`, only the keys given.
    """
    if not isinstance(raw_condition, dict):
        return ()
    out = []
    for key in WRITTEN_KEYS:
        v = raw_condition.get(key)
        if v is None or isinstance(v, (dict, list)):
            continue
        out.append(Written(key, str(v).strip(), is_plain(v)))
    return tuple(out)


def written_quantities(doc, spec=None, path="") -> tuple:
    """Every quantity of a validated document as the case file wrote it, by key path.

    Parameters
    ----------
    doc : dict
        The parsed (and validated) YAML document.
    spec : damper.case.spec_types.Section, optional
        The schema of `doc` (default: the whole case, :data:`damper.case.schema.CASE`).
    path : str
        Key path of `doc`.

    Returns
    -------
    tuple of Written
        ``key`` is the full key path (``loop.actuator.bandwidth``, ``conditions[0].altitude``),
        ``text`` the value as written; in the document's order. A quantity's SI value is
        where the :class:`~damper.case.model.Case` keeps it.
    """
    from .spec_types import Items, Quantity, Section

    if spec is None:
        from .schema import CASE as spec
    out = []

    def walk(value, sp, where):
        if value is None:
            return
        if isinstance(sp, Section) and isinstance(value, dict):
            for key, item in value.items():
                if key in sp.fields:
                    walk(item, sp.fields[key], f"{where}.{key}" if where else str(key))
        elif isinstance(sp, Items) and isinstance(value, list):
            for i, item in enumerate(value):
                walk(item, sp.item, f"{where}[{i}]")
        elif (isinstance(sp, Quantity) or getattr(sp, "quantity_in_own_unit", False)) and not isinstance(
                value, (dict, list, bool)):
            out.append(Written(where, str(value).strip(), is_plain(value)))

    walk(doc, spec, path)
    return tuple(out)


def envelope_reach(envelope, altitude_kind) -> tuple:
    """Highest altitude (m, as given) and highest Mach number of an envelope section.

    Returns
    -------
    altitude : float
        m; 0 without an envelope.
    mach : float
        0 without an envelope.
    """
    if not envelope or not envelope.get("altitude"):
        return 0.0, 0.0
    from ..atmosphere import RHO0, geopotential_from_geometric, standard_atmosphere

    top = float(envelope["altitude"]["max"])
    mach = max(float((envelope.get("mach") or {}).get("max") or 0.0), float(envelope.get("max_mach") or 0.0))
    h = np.linspace(float(envelope["altitude"]["min"]), top, 51)
    if altitude_kind == "geometric":
        h = geopotential_from_geometric(h)
    air = standard_atmosphere(np.clip(h, -2000.0, 84852.0))
    for key in ("airspeed", "equivalent_airspeed"):
        rng = envelope.get(key)
        if rng:
            v = rng["max"] * (np.sqrt(RHO0 / air.density) if key == "equivalent_airspeed" else 1.0)
            mach = max(mach, float(np.max(v / air.speed_of_sound)))
    return top, mach


def _speed_warning(i, c, w):
    what = "an airspeed" if w.key == "airspeed" else "an equivalent airspeed"
    return (f"conditions[{i}] ({c.name}): {w.key} = {w.text} is a plain number, taken as {float(w.text):.4g} m/s "
            f"({float(w.text) / _KT:.0f} kt), which is Mach {c.mach:.2f} at this altitude: implausible for {what} "
            f"given in m/s; if knots were meant write '{w.text} kt' (write '{w.text} m/s' to keep it)")


def _altitude_warning(i, c, w):
    return (f"conditions[{i}] ({c.name}): altitude = {w.text} is a plain number, taken as {float(w.text):.6g} m "
            f"({float(w.text) / _FT:.0f} ft), above the usual {RANGES['altitude'].usual_high / 1000:g} km (and no "
            f"envelope of the case reaches it): if feet were meant write '{w.text} ft' (write '{w.text} m' to keep it)")


def _summary(kind, hits):
    names = ", ".join(c.name for _, c, _ in hits[:MAX_LISTED])
    more = f" and {len(hits) - MAX_LISTED} more" if len(hits) > MAX_LISTED else ""
    if kind == "speed":
        return (f"conditions: {len(hits)} speeds written as plain numbers (taken as m/s) are above Mach "
                f"{RANGES['mach'].usual_high:g} ({names}{more}): if knots were meant write e.g. '120 kt' "
                "(write 'm/s' to keep them)")
    return (f"conditions: {len(hits)} altitudes written as plain numbers (taken as m) are above "
            f"{RANGES['altitude'].usual_high / 1000:g} km ({names}{more}): if feet were meant write e.g. '8000 ft' "
            "(write 'm' to keep them)")


def plain_number_warnings(conditions, envelope=None, altitude_kind="geopotential") -> list:
    """Warnings on plain-number speeds and altitudes whose SI meaning is implausible.

    Parameters
    ----------
    conditions : sequence of damper.case.model.Condition
        With their ``written`` keys.
    envelope : dict or None
        The validated ``envelope`` section (SI); a case whose envelope reaches a Mach
        number or an altitude is not warned below it.
    altitude_kind : str

    Returns
    -------
    list of str
        One line per condition, or one line per kind when more than :data:`MAX_LISTED`.
    """
    top, reach = envelope_reach(envelope, altitude_kind)
    mach_limit = max(RANGES["mach"].usual_high, reach)
    altitude_limit = max(RANGES["altitude"].usual_high, top)
    hits = {"speed": [], "altitude": []}
    for i, c in enumerate(conditions):
        for w in c.written:
            if not w.plain:
                continue
            if w.key in ("airspeed", "equivalent_airspeed") and c.mach > mach_limit:
                hits["speed"].append((i, c, w))
            elif w.key == "altitude" and c.altitude_input > altitude_limit:
                hits["altitude"].append((i, c, w))
    out = []
    for kind, make in (("speed", _speed_warning), ("altitude", _altitude_warning)):
        found = hits[kind]
        if len(found) > MAX_LISTED:
            out.append(_summary(kind, found))
        else:
            out += [make(*h) for h in found]
    return out


__all__ = ["MAX_LISTED", "WRITTEN_KEYS", "Written", "as_written", "envelope_reach", "is_plain",
           "plain_number_warnings", "written_quantities"]
