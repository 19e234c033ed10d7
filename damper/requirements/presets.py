"""Published requirement values, in one table. Every value names its source.

Values marked ``memory=True`` are quoted from memory of the standard (the best
available here); where a reading of the standard disagrees, the standard wins.
The flight-phase categories are A (non-terminal, rapid manoeuvring or precision
tracking), B (non-terminal, gradual manoeuvres: climb, cruise, descent) and C
(terminal: take-off, approach, landing). Levels: 1 satisfactory, 2 acceptable,
3 controllable.
"""

from __future__ import annotations

from dataclasses import dataclass

INF = float("inf")

MIL_8785C = "MIL-F-8785C (1980) para 3.2.2.1; same numbers kept in MIL-STD-1797A"
MIL_8785C_CAP = "MIL-F-8785C (1980) para 3.2.2.1.1 (CAP boundaries); MIL-STD-1797A"
MIL_1797A_DELAY = "MIL-STD-1797A equivalent time delay limits (LOES method)"
MIL_9490D = "MIL-F-9490D (1975) para 3.1.3.6.1, stability margins"
MIL_8785C_PHUGOID = "MIL-F-8785C (1980) para 3.2.1.2, phugoid stability"


@dataclass(frozen=True)
class PresetValue:
    """One published band.

    Attributes
    ----------
    criterion : str
        Criterion name (see :mod:`damper.requirements.criteria`).
    lower, upper : float
        Band in the criterion's unit (``-inf``/``inf`` for one-sided).
    source : str
    memory : bool
        Quoted from memory.
    """

    criterion: str
    lower: float
    upper: float
    source: str
    memory: bool = True

    @property
    def citation(self) -> str:
        return self.source + (" (from memory)" if self.memory else "")


# Short-period damping ratio: (level, category) -> (lower, upper)
SHORT_PERIOD_DAMPING = {
    (1, "A"): (0.35, 1.30),
    (1, "C"): (0.35, 1.30),
    (1, "B"): (0.30, 2.00),
    (2, "A"): (0.25, 2.00),
    (2, "C"): (0.25, 2.00),
    (2, "B"): (0.20, 2.00),
    (3, "A"): (0.15, INF),
    (3, "B"): (0.15, INF),
    (3, "C"): (0.15, INF),
}

# Control anticipation parameter, (rad/s^2)/g: (level, category) -> band
CAP = {
    (1, "A"): (0.28, 3.6),
    (2, "A"): (0.16, 10.0),
    (1, "B"): (0.085, 3.6),
    (2, "B"): (0.038, 10.0),
    (1, "C"): (0.16, 3.6),
    (2, "C"): (0.096, 10.0),
}

# Equivalent time delay, s: level -> upper limit
EQUIVALENT_DELAY = {1: 0.10, 2: 0.20, 3: 0.25}

# Minimum short-period frequency, rad/s (lower confidence, from memory):
# (level, category, aircraft class or None) -> minimum
MIN_FREQUENCY = {
    (1, "A", None): 1.0,
    (1, "C", "I"): 0.87,
    (1, "C", "II-C"): 0.87,
    (1, "C", "IV"): 0.87,
    (1, "C", "II-L"): 0.7,
    (1, "C", "III"): 0.7,
}

# Phugoid stability (MIL-F-8785C 3.2.1.2, from memory): level -> (criterion, minimum)
# Level 1: damping ratio at least 0.04; level 2: at least 0; level 3: time to double at least 55 s.
PHUGOID = {1: ("phugoid_damping_ratio", 0.04), 2: ("phugoid_damping_ratio", 0.0), 3: ("phugoid_time_to_double", 55.0)}

# Stability margins (MIL-F-9490D): speed range -> (gain margin dB, phase margin deg)
MARGINS = {
    "operational": (6.0, 45.0),
    "limit": (4.5, 30.0),
}

STANDARDS = ("MIL-F-8785C", "MIL-STD-1797A")
CATEGORIES = ("A", "B", "C")
LEVELS = (1, 2, 3)
AIRCRAFT_CLASSES = ("I", "II-C", "II-L", "III", "IV")
SPEED_RANGES = tuple(MARGINS)


def handling_preset(level: int, category: str, aircraft_class=None) -> list:
    """Handling-qualities bands of one level and flight-phase category.

    Returns
    -------
    list of PresetValue
        Damping ratio, CAP (levels 1-2), equivalent time delay and, where known,
        the minimum short-period frequency.
    """
    out = []
    lo, hi = SHORT_PERIOD_DAMPING[(level, category)]
    out.append(PresetValue("damping_ratio", lo, hi, f"{MIL_8785C}, level {level}, category {category}"))
    if (level, category) in CAP:
        lo, hi = CAP[(level, category)]
        out.append(PresetValue("cap", lo, hi, f"{MIL_8785C_CAP}, level {level}, category {category}"))
    out.append(PresetValue("equivalent_time_delay", 0.0, EQUIVALENT_DELAY[level], f"{MIL_1797A_DELAY}, level {level}"))
    key = (level, category, aircraft_class if category == "C" else None)
    if key in MIN_FREQUENCY:
        out.append(
            PresetValue(
                "natural_frequency",
                MIN_FREQUENCY[key],
                INF,
                f"{MIL_8785C} minimum short-period frequency, level {level}, category {category}"
                + (f", class {aircraft_class}" if aircraft_class else "")
                + " (lower confidence)",
            )
        )
    return out


def margin_preset(speed_range: str = "operational") -> list:
    """Gain and phase margins of MIL-F-9490D for a speed range ('operational' or 'limit')."""
    gm, pm = MARGINS[speed_range]
    return [
        PresetValue("gain_margin", gm, INF, f"{MIL_9490D}, {speed_range} speeds"),
        PresetValue("phase_margin", pm, INF, f"{MIL_9490D}, {speed_range} speeds"),
    ]


def phugoid_preset(level: int) -> list:
    """The phugoid stability requirement of one level (MIL-F-8785C 3.2.1.2, from memory).

    Returns
    -------
    list of PresetValue
        Level 1 and 2: a minimum phugoid damping ratio (0.04, 0); level 3: a minimum time
        to double amplitude, s (55).
    """
    name, low = PHUGOID[level]
    return [PresetValue(name, low, INF, f"{MIL_8785C_PHUGOID}, level {level}")]
