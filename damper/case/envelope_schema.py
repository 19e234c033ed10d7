"""Case-file schema of the ``envelope:``, ``aerodynamics:`` and ``schedule:`` sections."""

from __future__ import annotations

from .schema import Choice, Integer, Items, Number, Quantity, Section, Text

_POS = dict(positive=True)


def _range(dims, doc, **kw):
    return Section(
        {
            "min": Quantity(dims, f"Lowest {doc}.", **kw),
            "max": Quantity(dims, f"Highest {doc}.", **kw),
        },
        f"Range of {doc}.",
        default=None,
    )


CONFIGURATION = Section(
    {
        "name": Text("Name of the mass / centre-of-gravity configuration."),
        "mass": Quantity(("mass",), "Mass, kg.", **_POS, plausible="mass"),
        "pitch_inertia": Quantity(("inertia",), "Pitch inertia, kg m^2.", **_POS, plausible="inertia"),
        "cg": Number("Centre of gravity, fraction of the mean chord aft of its leading edge (default: aerodynamics.reference_cg).",
                     default=None, low=-1.0, high=2.0),
        "flight_path_angle": Quantity(("dimensionless",), "Trim flight-path angle gamma, rad (e.g. '-3 deg'), "
                                      "positive climbing. model: longitudinal only (absent: 0).", default=None,
                                      low=-1.0, high=1.0),
    },
    "One mass / CG configuration.",
)

ENVELOPE = Section(
    {
        "altitude": _range(("length",), "altitude, m", low=-2000.0, high=80000.0),
        "airspeed": _range(("speed",), "true airspeed, m/s", **_POS, plausible="speed"),
        "equivalent_airspeed": _range(("speed",), "equivalent airspeed, m/s", **_POS, plausible="speed"),
        "mach": _range(("dimensionless",), "Mach number", **_POS, plausible="mach"),
        "max_dynamic_pressure": Quantity(("pressure",), "Largest dynamic pressure, Pa.", default=None, **_POS),
        "max_mach": Quantity(("dimensionless",), "Largest Mach number.", default=None, **_POS),
        "min_equivalent_airspeed": Quantity(("speed",), "Smallest equivalent airspeed, m/s.", default=None, **_POS),
        "max_equivalent_airspeed": Quantity(("speed",), "Largest equivalent airspeed, m/s.", default=None, **_POS),
        "configurations": Items(CONFIGURATION, "Mass / CG configurations (default: the aircraft's mass at the reference CG).",
                                default=None, max_items=50),
        "grid": Section(
            {
                "altitudes": Integer("Altitude levels of the verification grid.", default=9, low=2, high=200),
                "speeds": Integer("Speed points per altitude of the verification grid (at least 4 per breakpoint interval are used).",
                                  default=17, low=2, high=400),
            },
            "Density of the verification grid.",
            default={},
        ),
    },
    "The flight envelope: an altitude range times a speed range (true airspeed, equivalent "
    "airspeed or Mach), cut by the limits, for every configuration.",
    default=None,
    exactly_one=(("airspeed", "equivalent_airspeed", "mach"),),
)

_TABLE = Items(Quantity(("dimensionless",), "value"), "A value at every Mach breakpoint.", default=None, max_items=200)
_SPEED_TABLE = Items(Quantity(("dimensionless",), "value"),
                     "Speed-derivative coefficient (as in conditions[].coefficients) at every Mach breakpoint; "
                     "model: longitudinal only, required there.", default=None, max_items=200)

AERODYNAMICS = Section(
    {
        "reference_cg": Number("CG (fraction of mean chord) at which Cm_alpha is given.", default=0.25, low=-1.0, high=2.0),
        "mach": Items(Quantity(("dimensionless",), "Mach"), "Mach breakpoints of the tables (ascending).", min_items=1, max_items=200),
        "CL_alpha": Items(Quantity(("dimensionless",), "value"), "Lift-curve slope per rad at each Mach.", max_items=200),
        "CD": Items(Quantity(("dimensionless",), "value"), "Trim drag coefficient at each Mach.", max_items=200),
        "CL_delta": _TABLE,
        "Cm_alpha": Items(Quantity(("dimensionless",), "value"), "Cm_alpha per rad at the reference CG, at each Mach.", max_items=200),
        "Cm_alpha_dot": _TABLE,
        "Cm_q": Items(Quantity(("dimensionless",), "value"), "Cm_q per rad at each Mach.", max_items=200),
        "Cm_delta": Items(Quantity(("dimensionless",), "value"), "Cm_delta per rad at each Mach.", max_items=200),
        "CL_q": _TABLE,
        "CL_u": _SPEED_TABLE,
        "CD_u": _SPEED_TABLE,
        "Cm_u": _SPEED_TABLE,
        "CT_u": _SPEED_TABLE,
        "CD_alpha": _SPEED_TABLE,
    },
    "Non-dimensional coefficients tabulated against Mach (linear interpolation, clamped at the "
    "ends), used with the standard atmosphere at every envelope point. A CG away from "
    "reference_cg changes Cm_alpha by CL_alpha times the shift in chords (aft positive).",
    default=None,
)

SCHEDULE = Section(
    {
        "variables": Items(
            Choice(("dynamic_pressure", "equivalent_airspeed", "mach", "altitude", "airspeed"), "variable"),
            "One variable (1-D table) or two (2-D table, e.g. [altitude, mach]).",
            default=("dynamic_pressure",), min_items=1, max_items=2,
        ),
        "form": Choice(("table", "inverse_dynamic_pressure"),
                       "Breakpoint table with linear interpolation (clamped at the ends), or K = K_ref q_ref / q fitted "
                       "to the breakpoint gains.", default="table"),
        "breakpoints": Integer("Breakpoints per variable to start from (spread over the envelope).", default=5, low=2, high=100),
        "max_breakpoints": Integer("Add breakpoints where verification fails, up to this many per variable "
                                   "(0: never add); stops early when breakpoints no gain satisfies leave the "
                                   "failing fraction unchanged.", default=12, low=0, high=200),
    },
    "A gain schedule over the envelope, verified between breakpoints.",
    default=None,
)
