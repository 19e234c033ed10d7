"""The case-file schema: every section, key, unit and default, as data.

The validator (:func:`check`) walks a parsed YAML document against these
specs and returns plain Python values in SI. Unknown keys are errors with a
suggestion; every error names the key path and the value. docs/case-file.md
is generated from this module (``python -m damper.case.docgen``).
"""

from __future__ import annotations

from ..errors import CaseError
from ..model.elements import Delay, Washout
from .ranges import MAX_CONDITIONS, RANGES
from .spec_types import (  # noqa: F401 - the kinds are imported from here by the other schema modules
    CYCLE_RATE_KEYS,
    REQUIRED,
    Choice,
    Integer,
    Items,
    Number,
    Quantity,
    Section,
    Text,
    _kind,
)

# ---------------------------------------------------------------------------
# The schema
# ---------------------------------------------------------------------------

_POS = dict(positive=True)

AIRCRAFT = Section(
    {
        "name": Text("Free-text name of the (invented or real) configuration.", default=None),
        "mass": Quantity(("mass",), "Mass, kg.", **_POS, plausible="mass"),
        "pitch_inertia": Quantity(("inertia",), "Pitch moment of inertia Iy, kg m^2.", **_POS, plausible="inertia"),
        "wing_area": Quantity(("area",), "Reference wing area S, m^2 (needed for coefficients).", default=None, **_POS,
                              plausible="wing_area"),
        "mean_chord": Quantity(
            ("length",), "Mean aerodynamic chord c, m (needed for coefficients).", default=None, **_POS,
            plausible="mean_chord",
        ),
    },
    "The airframe's mass properties and reference geometry.",
)

ATMOSPHERE = Section(
    {
        "altitude_kind": Choice(
            ("geopotential", "geometric"),
            "How condition altitudes are meant: geopotential (pressure altitude in the "
            "standard atmosphere, what flight manuals use) or geometric.",
            default="geopotential",
        ),
    },
    "Standard atmosphere options (U.S. Standard Atmosphere 1976).",
    default={"altitude_kind": "geopotential"},
)

#: The sign conventions, stated in docs/case-file.md where the derivatives and coefficients are
#: (docs/theory.md section 1; damper/case/docgen.py).
SIGN_CONVENTION = (
    "**Signs** (docs/theory.md section 1): stability axes; the elevator is positive trailing-edge down, so a "
    "conventional airframe has M_delta < 0 (Cm_delta < 0); the damper commands -sign(M_delta) K q, so a "
    "positive gain K adds damping for either sign; the pilot command is positive nose-up."
)
_DERIV_DOC = "per unit {0} ({1}), or the {2} form ({3}), divided by the {0}"
DERIVATIVES = Section(
    {
        "Z_alpha": Quantity(("acceleration", "force"), "Z_alpha: m/s^2 per rad, or N per rad (divided by mass)."),
        "Z_q": Quantity(("speed", "force_time"), "Z_q: m/s per rad/s, or N s per rad (divided by mass).", default=0.0),
        "Z_delta": Quantity(("acceleration", "force"), "Z_delta: m/s^2 per rad, or N per rad (divided by mass).", default=0.0),
        "M_alpha": Quantity(("frequency2", "moment"), "M_alpha: 1/s^2, or N m per rad (divided by pitch inertia)."),
        "M_alpha_dot": Quantity(
            ("frequency", "moment_time"), "M_alpha_dot: 1/s, or N m s per rad (divided by pitch inertia).", default=0.0
        ),
        "M_q": Quantity(("frequency", "moment_time"), "M_q: 1/s, or N m s per rad (divided by pitch inertia)."),
        "M_delta": Quantity(("frequency2", "moment"), "M_delta: 1/s^2, or N m per rad (divided by pitch inertia); negative for a "
                            "conventional airframe (elevator trailing-edge down positive).", nonzero=True),
        "X_u": Quantity(("frequency", "force_per_speed"), "X_u: 1/s (m/s^2 per m/s), or N s/m (divided by mass). "
                        "model: longitudinal only, required there.", default=None),
        "X_alpha": Quantity(("acceleration", "force"), "X_alpha: m/s^2 per rad, or N per rad (divided by mass). "
                            "model: longitudinal only, required there.", default=None),
        "Z_u": Quantity(("frequency", "force_per_speed"), "Z_u: 1/s (m/s^2 per m/s), or N s/m (divided by mass). "
                        "model: longitudinal only, required there.", default=None),
        "M_u": Quantity(("per_length_time", "force_time"), "M_u: 1/(m s) (rad/s^2 per m/s), or N m per m/s = N s "
                        "(divided by pitch inertia). model: longitudinal only, required there.", default=None),
        "X_delta": Quantity(("acceleration", "force"), "X_delta: m/s^2 per rad, or N per rad (divided by mass). "
                            "model: longitudinal only (absent: 0).", default=None),
    },
    "Dimensional stability derivatives, stability axes, per radian.",
)

_COEF = ("dimensionless",)
COEFFICIENTS = Section(
    {
        "CL_alpha": Quantity(_COEF, "Lift-curve slope, per rad (or e.g. '0.09 1/deg').", what="per rad"),
        "CD": Quantity(_COEF, "Trim drag coefficient.", nonnegative=True, what="number"),
        "CL_delta": Quantity(_COEF, "Lift per elevator, per rad.", default=0.0, what="per rad"),
        "Cm_alpha": Quantity(_COEF, "Pitching moment per angle of attack, per rad.", what="per rad"),
        "Cm_alpha_dot": Quantity(_COEF, "Per rad, with alpha_dot made non-dimensional by c/(2V).", default=0.0,
                                 what="per rad"),
        "Cm_q": Quantity(_COEF, "Per rad, with q made non-dimensional by c/(2V).", what="per rad"),
        "Cm_delta": Quantity(_COEF, "Pitching moment per elevator, per rad; negative for a conventional airframe "
                             "(elevator trailing-edge down positive).", nonzero=True, what="per rad"),
        "CL_q": Quantity(_COEF, "Lift per non-dimensional pitch rate, per rad.", default=0.0, what="per rad"),
        "CL_u": Quantity(_COEF, "Speed derivative V dCL/du (dimensionless). model: longitudinal only, required there.",
                         default=None),
        "CD_u": Quantity(_COEF, "Speed derivative V dCD/du (dimensionless). model: longitudinal only, required there.",
                         default=None),
        "Cm_u": Quantity(_COEF, "Speed derivative V dCm/du (dimensionless). model: longitudinal only, required there.",
                         default=None),
        "CT_u": Quantity(_COEF, "Thrust derivative (1/(q S)) dT/d(u/V) (dimensionless; 0 for constant thrust, -CD "
                         "for constant power in level flight). model: longitudinal only, required there.", default=None),
        "CD_alpha": Quantity(_COEF, "Drag-curve slope, per rad. model: longitudinal only, required there.", default=None,
                             what="per rad"),
    },
    "Non-dimensional coefficients (stability axes); need wing_area and mean_chord.",
)

CONDITION = Section(
    {
        "name": Text("Unique name of the flight condition."),
        "airspeed": Quantity(("speed",), "True airspeed, m/s (a plain number above Mach 1 draws a warning: knots are written '250 kt').", default=REQUIRED, **_POS, plausible="speed"),
        "equivalent_airspeed": Quantity(("speed",), "Equivalent airspeed, m/s (instead of airspeed; a plain number above Mach 1 draws a warning).", default=REQUIRED,
                                        **_POS, plausible="speed"),
        "mach": Quantity(("dimensionless",), "Mach number (instead of airspeed).", default=REQUIRED, positive=True, high=5.0,
                         what="Mach number"),
        "altitude": Quantity(
            ("length",), "Altitude, m (see atmosphere.altitude_kind; a plain number above 25 km draws a warning: feet are "
            "written '30000 ft').", low=RANGES["altitude"].low,
            high=RANGES["altitude"].high
        ),
        "mass": Quantity(("mass",), "Mass at this condition, kg (default: aircraft.mass).", default=None, **_POS,
                         plausible="mass"),
        "pitch_inertia": Quantity(
            ("inertia",), "Pitch inertia at this condition, kg m^2 (default: aircraft.pitch_inertia).", default=None, **_POS,
            plausible="inertia",
        ),
        "flight_path_angle": Quantity(("dimensionless",), "Trim flight-path angle gamma, rad (e.g. '-3 deg'), "
                                      "positive climbing. model: longitudinal only (absent: 0).", default=None,
                                      low=-1.0, high=1.0, what="angle"),
        "note": Text("Free text shown in reports (e.g. the CG position).", default=None),
        "configuration": Text("Mass / CG configuration this condition belongs to (a schedule interpolates "
                              "derivatives only between conditions of the same configuration; two conditions "
                              "of one configuration at the same schedule value draw a warning).", default=None),
        "derivatives": Section(DERIVATIVES.fields, DERIVATIVES.doc, default=REQUIRED),
        "coefficients": Section(COEFFICIENTS.fields, COEFFICIENTS.doc, default=REQUIRED),
    },
    "One flight condition.",
    exactly_one=(("airspeed", "equivalent_airspeed", "mach"), ("derivatives", "coefficients")),
)

_SECOND_ORDER = {
    "natural_frequency": Quantity(("frequency",), "Natural frequency, rad/s (second-order form).", default=None, **_POS),
    "damping_ratio": Number("Damping ratio (second-order form).", default=None, low=1e-3, high=10.0),
}

ACTUATOR = Section(
    {
        "bandwidth": Quantity(("frequency",), "First-order servo bandwidth, rad/s (1/time constant).", default=None, **_POS),
        "time_constant": Quantity(("time",), "First-order servo time constant, s.", default=None, **_POS),
        **_SECOND_ORDER,
        "rate_limit": Quantity(
            ("angular_rate",), "Surface rate limit, rad/s (e.g. '60 deg/s'); used in time responses.", default=None, **_POS,
            plausible="rate_limit",
        ),
        "travel": Quantity(
            ("dimensionless",), "Surface travel, +/- rad (e.g. '10 deg'), applied to the sum of pilot and damper "
            "commands; used in time responses. The damper's own limit is loop.authority.",
            default=None, **_POS, plausible="travel", what="angle",
        ),
    },
    "Servo actuator, from damper command to surface; absent = ideal.",
    default=None,
    at_most_one=(("bandwidth", "time_constant", "natural_frequency"),),
)

RATE_SENSOR = Section(
    {
        "time_constant": Quantity(("time",), "First-order rate-gyro lag, s.", default=None, **_POS),
        **_SECOND_ORDER,
    },
    "Rate gyro; absent = ideal.",
    default=None,
    at_most_one=(("time_constant", "natural_frequency"),),
)

WASHOUT = Section(
    {"time_constant": Quantity(("time",), f"Washout time constant T of {Washout.formula}, s.", **_POS)},
    "Washout (high-pass) filter so the damper does not oppose steady pitch rates; absent = none.",
    default=None,
)

from .element_schema import FILTER  # noqa: E402 - loop.filters[], from the element registry

LOOP = Section(
    {
        "actuator": ACTUATOR,
        "rate_sensor": RATE_SENSOR,
        "washout": WASHOUT,
        "filters": Items(FILTER, "Further filters in the feedback path, in signal order.", default=(), min_items=0, max_items=20),
        "delay": Quantity(("time",), f"Computation / transport delay T, s: {Delay.formula}, exact in frequency "
                          "responses, a Pade approximant (pade_order) in eigenvalue work.", default=0.0,
                          nonnegative=True, high=1.0),
        "sample_rate": Quantity(
            ("frequency",), "Digital sample rate, Hz (adds half a sample of delay for the zero-order hold).", default=None, **_POS,
            cycles=True,
        ),
        "pade_order": Integer("Order of the Pade approximant of the delay in eigenvalue work.", default=2, low=1, high=8),
        "authority": Quantity(
            ("dimensionless",), "The largest surface deflection the damper alone can command (series-servo stroke), "
            "+/- rad (e.g. '3 deg'); the damper's command is limited to it in every time response and a failed "
            "damper runs to it (absent: no limit of its own; a failure runs to loop.actuator.travel).",
            default=None, **_POS, plausible="travel", what="angle",
        ),
        "authority_rate_limit": Quantity(
            ("angular_rate",), "The damper command's own rate limit, rad/s (e.g. '10 deg/s'; absent: "
            "loop.actuator.rate_limit, else none).", default=None, **_POS, plausible="rate_limit",
        ),
    },
    "The pitch-rate loop's hardware; every missing element is ideal.",
    default={},
)

ANALYSIS = Section(
    {
        "frequency_low": Quantity(("frequency",), "Lowest frequency of the phase-crossing search, rad/s (gain crossings are exact at every frequency).", default=1e-3, **_POS),
        "frequency_high": Quantity(("frequency",), "Highest frequency of the phase-crossing search, rad/s.", default=1e3, **_POS),
        "points_per_decade": Integer("Density of the coarse grid under the points placed from the loop's own poles and zeros.", default=5, low=1, high=2000),
    },
    "Numerical settings.",
    default={},
)

def _envelope_specs():
    from .envelope_schema import AERODYNAMICS, ENVELOPE, SCHEDULE

    return ENVELOPE, AERODYNAMICS, SCHEDULE


def _uncertainty_spec():
    from .uncertainty_schema import UNCERTAINTY

    return UNCERTAINTY


def _failures_spec():
    from .failures_schema import FAILURES

    return FAILURES


def _requirements_spec():
    from .requirements_schema import REQUIREMENTS

    return REQUIREMENTS


from .responses_schema import RESPONSES  # noqa: E402 (needs the spec classes above)
from .turbulence_schema import TURBULENCE  # noqa: E402

CASE = Section(
    {
        "title": Text("Title of the study, shown in every output."),
        "model": Choice(("short_period", "longitudinal"),
                        "Bare-airframe model: the two-state short period (alpha, q) or the four-state longitudinal "
                        "model (u, alpha, q, theta) with the phugoid, which needs the speed derivatives "
                        "(docs/theory.md section 8).", default="short_period"),
        "aircraft": AIRCRAFT,
        "atmosphere": ATMOSPHERE,
        "conditions": Items(CONDITION, "Flight conditions (optional when an envelope is given).", max_items=MAX_CONDITIONS,
                            default=()),
        "envelope": _envelope_specs()[0],
        "aerodynamics": _envelope_specs()[1],
        "schedule": _envelope_specs()[2],
        "loop": LOOP,
        "requirements": _requirements_spec(),
        "responses": RESPONSES,
        "turbulence": TURBULENCE,
        "analysis": ANALYSIS,
        "uncertainty": _uncertainty_spec(),
        "failures": _failures_spec(),
    },
    "A damper case.",
)


def check(data, extra_fields=None):
    """Validate a parsed case document; return SI values (dicts and lists)."""
    if not isinstance(data, dict):
        raise CaseError(f"the file must be a section of keys (title, aircraft, conditions, ...), got {_kind(data)}")
    spec = CASE
    if extra_fields:
        spec = Section({**CASE.fields, **extra_fields}, CASE.doc)
    return spec.check(data, "")
