"""Case-file schema of the ``requirements:`` section."""

from __future__ import annotations

from ..requirements.registry import CRITERIA
from ..requirements.presets import AIRCRAFT_CLASSES, CATEGORIES, SPEED_RANGES, STANDARDS
from .schema import Choice, Integer, Number, Quantity, Section


def _band(doc, unit_spec):
    return Section(
        {"min": unit_spec(f"Lower limit ({doc})."), "max": unit_spec(f"Upper limit ({doc}).")},
        f"Band on the {doc}; give min, max or both.",
        default=None,
    )


def _number(doc):
    return Number(doc, default=None)


def _time(doc):
    return Quantity(("time",), doc, default=None, nonnegative=True)


def _rate(doc):
    return Quantity(("frequency",), doc, default=None, nonnegative=True)


_BAND_SPECS = {"number": _number, "time": _time, "rate": _rate}


def _bands():
    """The band of each registered criterion (:mod:`damper.requirements.registry`), its docs text from there."""
    return {k.name: _band(k.doc, _BAND_SPECS[k.band_kind]) for k in CRITERIA if k.band_kind}


REQUIREMENTS = Section(
    {
        "preset": Section(
            {
                "standard": Choice(STANDARDS, "Handling-qualities standard."),
                "level": Integer("Level of flying qualities to require (1, 2 or 3).", low=1, high=3),
                "category": Choice(CATEGORIES, "Flight-phase category A, B or C."),
                "aircraft_class": Choice(
                    AIRCRAFT_CLASSES, "Aircraft class (only for the category C minimum frequency).", default=None
                ),
            },
            "Short-period damping, CAP, minimum frequency and equivalent time delay from a standard; with "
            "model: longitudinal also the phugoid stability requirement of MIL-F-8785C at the same level "
            "(damping at least 0.04, 0, or time to double at least 55 s, from memory).",
            default=None,
        ),
        "margins_preset": Section(
            {
                "standard": Choice(("MIL-F-9490D",), "Flight-control-system standard."),
                "speed_range": Choice(SPEED_RANGES, "operational (6 dB / 45 deg) or limit (4.5 dB / 30 deg) speeds.",
                                      default="operational"),
            },
            "Gain and phase margins from a standard.",
            default=None,
        ),
        "damping_measure": Choice(
            ("equivalent", "modal"),
            "Which short-period damping and frequency the bands apply to: the fitted "
            "low-order equivalent system or the closed-loop eigenvalue pair. Both are always reported. Absent: "
            "equivalent for model short_period, modal (the short-period pair of the four-state closed loop) for "
            "model longitudinal.",
            default=None,
        ),
        "free_zero": Choice(("no", "yes"), "Fit 1/T_theta2 in the equivalent system instead of holding it at the bare-airframe value.", default="no"),
        **_bands(),
        "turbulence_load_factor_rms": Section(
            {"max": Number("Largest rms incremental load factor, g.", low=0.0)},
            "In the case's continuous turbulence (needs a turbulence: section), with the damper at the chosen or "
            "given gain: the rms incremental load factor at most max (docs/turbulence.md).",
            default=None,
        ),
        "rate_limit_exceedances": Section(
            {"max": Number("Largest expected number per second, 1/s.", low=0.0)},
            "In the case's continuous turbulence (needs a turbulence: section and loop.actuator.rate_limit): the "
            "expected surface-rate excursions beyond the rate limit per second, either sign (Rice), at most max.",
            default=None,
        ),
    },
    "What the damper must achieve at every condition. Without this section: damping ratio "
    "0.35-1.30 (common practice), gain margin 6 dB and phase margin 45 deg (MIL-F-9490D), stable.",
    default=None,
)
