"""Build the criteria of a case from its ``requirements:`` section, and judge levels."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import CaseError
from . import presets, registry
from .criteria import INF, Criterion, evaluate

#: Criteria that a band in the case may name directly (the registry's order).
BAND_KEYS = registry.BAND_KEYS
#: Criteria of the phugoid: a longitudinal case only.
PHUGOID_KEYS = registry.LONGITUDINAL_KEYS

DEFAULT_SOURCE_DAMPING = "common practice (short-period damping 0.35-1.30)"


@dataclass(frozen=True)
class Requirements:
    """The requirements of a case.

    Attributes
    ----------
    criteria : tuple of Criterion
        Every requirement, stability first.
    damping_measure : str
        ``"equivalent"`` or ``"modal"``.
    free_zero : bool
        Fit 1/T_theta2 in the equivalent system.
    level_category : str or None
        Flight-phase category used to judge levels (from the preset), or None.
    aircraft_class : str or None
    """

    criteria: tuple
    damping_measure: str = "equivalent"
    free_zero: bool = False
    level_category: str | None = None
    aircraft_class: str | None = None

    @property
    def needs_bandwidth(self) -> bool:
        return any(c.kind.needs_bandwidth for c in self.criteria)

    @property
    def needs_disk_margin(self) -> bool:
        return any(c.kind.needs_disk_margin for c in self.criteria)


def _measure_for(name, damping_measure):
    return registry.KINDS[name].measure_for(damping_measure)


def default_damping_measure(model="short_period") -> str:
    """The short-period damping the bands apply to when the case does not say.

    ``"equivalent"`` (the fitted low-order equivalent system) for the short-period model;
    ``"modal"`` (the short-period pair of the four-state closed loop) for the longitudinal
    model, whose phugoid inside the 0.1-10 rad/s fit band leaves the short-period form's
    fit a large mismatch (docs/theory.md section 8).
    """
    return "modal" if model == "longitudinal" else "equivalent"


def build_requirements(raw, model="short_period") -> Requirements:
    """Requirements from the validated ``requirements`` section (None: the defaults).

    `model` (``"short_period"`` or ``"longitudinal"``) sets the default damping measure and
    admits the phugoid criteria (a short-period case naming one is a :class:`CaseError`).
    """
    stability = Criterion("stability", -INF, 0.0, registry.KINDS["stability"].preset_source)
    if raw is None:
        dm = default_damping_measure(model)
        return Requirements(
            (
                stability,
                Criterion("damping_ratio", 0.35, 1.30, DEFAULT_SOURCE_DAMPING, dm),
                Criterion("gain_margin", 6.0, INF, f"{presets.MIL_9490D}, operational speeds (from memory)"),
                Criterion("phase_margin", 45.0, INF, f"{presets.MIL_9490D}, operational speeds (from memory)"),
            ),
            damping_measure=dm,
        )
    for key in PHUGOID_KEYS:
        if model != "longitudinal" and raw.get(key) is not None:
            raise CaseError("a phugoid requirement needs the longitudinal model (this case's model is short_period: "
                            "add 'model: longitudinal' and the speed derivatives)", f"requirements.{key}")
    dm = raw["damping_measure"] or default_damping_measure(model)
    chosen = {}
    category = aircraft_class = None
    if raw["preset"] is not None:
        p = raw["preset"]
        category = p["category"]
        aircraft_class = p["aircraft_class"]
        for v in presets.handling_preset(p["level"], category, aircraft_class):
            chosen[v.criterion] = Criterion(v.criterion, v.lower, v.upper, f"{p['standard']}: {v.citation}", _measure_for(v.criterion, dm))
        if model == "longitudinal":
            for v in presets.phugoid_preset(p["level"]):
                chosen[v.criterion] = Criterion(v.criterion, v.lower, v.upper, v.citation)
    if raw["margins_preset"] is not None:
        for v in presets.margin_preset(raw["margins_preset"]["speed_range"]):
            chosen[v.criterion] = Criterion(v.criterion, v.lower, v.upper, v.citation)
    for key in BAND_KEYS:
        band = raw.get(key)
        if band is None:
            continue
        lo = band["min"] if band["min"] is not None else -INF
        hi = band["max"] if band["max"] is not None else INF
        if band["min"] is None and band["max"] is None:
            raise CaseError("give min, max or both", f"requirements.{key}")
        if not lo < hi:
            raise CaseError(f"min ({lo:g}) must be below max ({hi:g})", f"requirements.{key}.min", band["min"])
        chosen[key] = Criterion(key, lo, hi, "case file", _measure_for(key, dm))
    if not chosen:
        raise CaseError("no requirement given: name a preset or at least one band", "requirements")
    order = [k for k in BAND_KEYS if k in chosen]
    return Requirements(
        (stability, *(chosen[k] for k in order)),
        damping_measure=dm,
        free_zero=raw["free_zero"] == "yes",
        level_category=category,
        aircraft_class=aircraft_class,
    )


LEVEL_CRITERIA = registry.LEVEL_CRITERIA


def levels(requirements: Requirements, measures, category=None):
    """Best handling-qualities level met, per criterion and overall (batched).

    Parameters
    ----------
    requirements : Requirements
    measures : bundle accepted by :func:`damper.requirements.criteria.measure_values`
    category : str, optional
        Overrides the requirements' category; without either, returns None.

    Returns
    -------
    dict or None
        ``{"overall": int array, "<criterion>": int array}``; 4 means worse than level 3.
        Criteria without a published band at some level do not limit that level.
    """
    cat = category or requirements.level_category
    if cat is None:
        return None
    per = {}
    for name in LEVEL_CRITERIA:
        best = None
        for level in (3, 2, 1):
            vals = [v for v in presets.handling_preset(level, cat, requirements.aircraft_class) if v.criterion == name]
            if not vals:  # no published band at this level: it does not limit the level
                met = True
            else:
                v = vals[0]
                c = Criterion(name, v.lower, v.upper, v.citation, _measure_for(name, requirements.damping_measure))
                met = evaluate([c], measures).met[0]
            best = np.where(met, level, 4 if best is None else best)
        per[name] = best
    arrays = np.broadcast_arrays(*per.values(), np.asarray(measures.gains))[:-1]
    per = {k: np.array(a) for k, a in zip(per, arrays)}
    overall = np.max(np.stack(list(per.values())), 0)
    return {"overall": overall, **per}
