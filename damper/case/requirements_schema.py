"""Case-file schema of the ``requirements:`` section."""

from __future__ import annotations

from ..requirements.criteria import KINDS
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
        "damping_ratio": _band("short-period damping ratio", _number),
        "natural_frequency": _band("short-period natural frequency, rad/s", _rate),
        "cap": _band(f"control anticipation parameter, {KINDS['cap'].unit}", _number),
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
        "equivalent_time_delay": _band("equivalent time delay, s", _time),
        "gain_margin": _band("gain margin, dB (applies up and down)", _number),
        "phase_margin": _band("phase margin, deg", _number),
        "delay_margin": _band("delay margin, s", _time),
        "disk_margin": _band("symmetric disk margin alpha", _number),
        "other_mode_damping": _band("damping ratio of every other closed-loop mode", _number),
        "bandwidth": _band("pitch-attitude bandwidth, rad/s", _rate),
        "phase_delay": _band("pitch-attitude phase delay, s", _time),
        "equivalent_mismatch": _band("equivalent-system fit mismatch J, dimensionless", _number),
        "phugoid_damping_ratio": _band("closed-loop phugoid damping ratio (model: longitudinal only)", _number),
        "phugoid_time_to_double": _band("closed-loop phugoid time to double amplitude, s; a stable phugoid meets "
                                        "any minimum (model: longitudinal only)", _time),
    },
    "What the damper must achieve at every condition. Without this section: damping ratio "
    "0.35-1.30 (common practice), gain margin 6 dB and phase margin 45 deg (MIL-F-9490D), stable.",
    default=None,
)
