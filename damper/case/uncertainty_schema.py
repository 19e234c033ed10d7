"""Case-file schema of the ``uncertainty:`` section (robustness analysis).

Imported lazily by :mod:`damper.case.schema` (after its spec classes are defined).
The validated SI values are turned into a frozen
:class:`damper.case.uncertainty.UncertaintySpec` (``Case.uncertainty``) by
:func:`damper.case.uncertainty.uncertainty_from_values`;
:func:`damper.analysis.uncertainty.uncertainty_spec` adds the command line's overrides. The
method is described in docs/robustness.md.

Every uncertain parameter has a *nominal* value (the case's value at each condition)
and a *spread*: ``relative`` (a fraction of ``|nominal|``, so 0.2 is +/-20 %) or
``absolute`` (in the parameter's own unit). A uniform parameter lies in
``nominal +/- spread``. A normal parameter has the standard deviation
``sigma * spread`` (``sigma`` is a fraction of the spread; by default
``1 / truncate``, so the spread is the truncation limit) and is truncated at
``truncate`` standard deviations.
"""

from __future__ import annotations

from ..errors import CaseError
from .schema import Choice, Integer, Items, Number, Quantity, Section

#: Uncertain parameters: name -> (unit dimension of an absolute spread, meaning).
PARAMETERS = {
    "M_alpha": ("frequency2", "M_alpha, 1/s^2 (per unit pitch inertia)"),
    "M_q": ("frequency", "M_q, 1/s"),
    "M_alpha_dot": ("frequency", "M_alpha_dot, 1/s"),
    "M_delta": ("frequency2", "M_delta, 1/s^2"),
    "Z_alpha": ("acceleration", "Z_alpha, m/s^2 per rad (per unit mass)"),
    "Z_delta": ("acceleration", "Z_delta, m/s^2 per rad"),
    "Z_q": ("speed", "Z_q, m/s per rad/s"),
    "X_u": ("frequency", "X_u, 1/s (model: longitudinal)"),
    "X_alpha": ("acceleration", "X_alpha, m/s^2 per rad (model: longitudinal)"),
    "Z_u": ("frequency", "Z_u, 1/s (model: longitudinal)"),
    "M_u": ("per_length_time", "M_u, 1/(m s) (model: longitudinal)"),
    "mass": ("mass", "mass, kg (scales every Z derivative by nominal/sampled mass)"),
    "pitch_inertia": ("inertia", "pitch inertia, kg m^2 (scales every M derivative by nominal/sampled inertia)"),
    "actuator_bandwidth": ("frequency", "servo bandwidth, rad/s (first-order: 1/time constant; second-order: natural frequency)"),
    "actuator_time_constant": ("time", "first-order servo time constant, s"),
    "sensor_time_constant": ("time", "first-order rate-gyro time constant, s"),
    "delay": ("time", "total pure delay (computation plus half a sample), s"),
    "loop_gain": ("time", "pitch-rate gain K, s (a gain tolerance of the electronics)"),
}

PARAMETER_NAMES = tuple(PARAMETERS)


class _AbsoluteSpread:
    """Placeholder for ``absolute``: its unit depends on ``name`` (see :class:`ParameterSection`)."""

    doc = (
        "Spread in the parameter's own unit (M_alpha 1/s^2, M_q 1/s, Z_alpha m/s^2, mass kg, "
        "pitch_inertia kg m^2, bandwidth rad/s, time constants, delay and loop_gain s), e.g. '2 ms'."
    )
    default = None
    quantity_in_own_unit = True  # a quantity (damper.case.written.written_quantities keeps its text)

    def check(self, value, path):  # replaced per name before use
        raise CaseError("needs a parameter name", path, value)

    def describe(self) -> str:
        return "quantity in the parameter's own unit (plain number: its SI unit)"


class ParameterSection(Section):
    """One uncertain parameter; ``absolute`` is checked in the unit of its ``name``."""

    def check(self, value, path):
        fields = self.fields
        if isinstance(value, dict) and isinstance(value.get("name"), str) and value["name"] in PARAMETERS:
            dim, meaning = PARAMETERS[value["name"]]
            fields = {
                **self.fields,
                "absolute": Quantity((dim,), f"Spread of {meaning}.", default=None, nonnegative=True),
            }
        out = Section(fields, self.doc, self.default, self.exactly_one, self.at_most_one).check(value, path)
        lines = getattr(value, "lines", {})
        if out["distribution"] == "uniform":
            for key in ("sigma", "truncate"):
                if key in value:
                    raise CaseError(
                        "applies to a normal distribution only (this one is uniform; add distribution: normal)",
                        f"{path}.{key}",
                        value[key],
                        line=lines.get(key),
                    )
        return out


PARAMETER = ParameterSection(
    {
        "name": Choice(PARAMETER_NAMES, "Which parameter is uncertain (the same at every condition, fully correlated)."),
        "relative": Number(
            "Spread as a fraction of the magnitude of the nominal value (0.2 = +/-20 %).", default=None, low=0.0, high=10.0
        ),
        "absolute": _AbsoluteSpread(),
        "distribution": Choice(("uniform", "normal"), "uniform on nominal +/- spread, or truncated normal.", default="uniform"),
        "sigma": Number(
            "normal: standard deviation as a fraction of the spread (default 1/truncate: the spread is the "
            "truncation limit).",
            default=None,
            low=1e-3,
            high=10.0,
        ),
        "truncate": Number("normal: truncation, in standard deviations.", default=3.0, low=0.5, high=10.0),
    },
    "One uncertain parameter.",
    exactly_one=(("relative", "absolute"),),
)


class CgShiftSection(Section):
    """The CG shift; checks that its range is ordered."""

    def check(self, value, path):
        out = super().check(value, path)
        low, high = out["range"]
        if not low <= high:
            lines = getattr(value, "lines", {})
            raise CaseError(
                f"must be [low, high] with low <= high (got low {low:g} > high {high:g})",
                f"{path}.range",
                value.get("range"),
                line=lines.get("range"),
            )
        return out


CG_SHIFT = CgShiftSection(
    {
        "range": Items(
            Number("Shift in fractions of the mean chord (aft positive).", low=-0.5, high=0.5),
            "[low, high]: centre-of-gravity shift from each condition's CG, fractions of the mean chord, "
            "aft positive (e.g. [-0.02, 0.03]); uniform. Effect: Delta Cm_alpha = CL_alpha dx/c.",
            min_items=2,
            max_items=2,
        ),
        "lift_curve_slope": Quantity(
            ("dimensionless",),
            "CL_alpha per rad for the CG effect (default: the condition's coefficients.CL_alpha, else the "
            "normal-force slope -Z_alpha m / (qbar S)).",
            default=None,
            positive=True,
            what="per rad",
        ),
    },
    "Centre-of-gravity shift: changes M_alpha only (M_q, M_alpha_dot, M_delta and Z terms neglected; "
    "see docs/robustness.md). Needs aircraft.mean_chord.",
    default=None,
)

class UncertaintySection(Section):
    """The whole section; refuses a parameter given twice (or a servo lag given both ways)."""

    def check(self, value, path):
        out = super().check(value, path)
        seen = {}
        for i, p in enumerate(out["parameters"]):
            name = p["name"]
            twin = {"actuator_bandwidth": "actuator_time_constant", "actuator_time_constant": "actuator_bandwidth"}.get(name)
            sub = f"{path}.parameters[{i}].name"
            items = value.get("parameters") if isinstance(value, dict) else None
            lines = getattr(items, "lines", [])
            line = lines[i] if i < len(lines) else None
            if name in seen:
                raise CaseError(f"is given twice (also {path}.parameters[{seen[name]}])", sub, name, line=line)
            if twin in seen:
                raise CaseError(
                    f"is the same servo lag as {path}.parameters[{seen[twin]}] ({twin}); give only one", sub, name, line=line
                )
            seen[name] = i
        return out


UNCERTAINTY = UncertaintySection(
    {
        "samples": Integer("Monte Carlo samples per condition.", default=2000, low=1, high=10_000_000),
        "seed": Integer("Random seed (same seed, same results).", default=1, low=0, high=2**63 - 1),
        "confidence": Number(
            "Confidence level of the Clopper-Pearson interval on each pass fraction.", default=0.95, low=0.5, high=0.9999
        ),
        "parameters": Items(PARAMETER, "Uncertain parameters.", default=(), min_items=0, max_items=len(PARAMETERS)),
        "cg_shift": CG_SHIFT,
        "schedule_points": Integer(
            "With a schedule: the study runs at this many verification points, those with the least "
            "slack under the scheduled gain (the tightest of each configuration first).",
            default=12, low=1, high=1000,
        ),
        "required_fraction": Number(
            "Fraction of samples that must meet every requirement at every condition, judged on the lower "
            "bound of its Clopper-Pearson interval at `confidence`. Absent: every sample, every corner and "
            "every worst-case point must meet every requirement.",
            default=None, low=0.0, high=1.0,
        ),
    },
    "Uncertainty for the robustness analysis (damper robust): uncertain derivatives, mass, "
    "inertia, hardware and gain tolerances, and a CG shift. Seeded Monte Carlo, every corner "
    "when few, a worst-case search; see docs/robustness.md.",
    default=None,
)
