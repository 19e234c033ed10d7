"""Case-file keys of the ``turbulence:`` section (continuous Dryden vertical turbulence).

Imported by :mod:`damper.case.schema`. The model and the standard's values are
:mod:`damper.model.dryden`; the analysis :mod:`damper.analysis.turbulence`; docs/turbulence.md.
"""

from __future__ import annotations

from ..errors import CaseError
from .spec_types import Choice, Number, Quantity, Section


class TurbulenceSection(Section):
    """The section; the explicit and the standard's parameters are checked together."""

    def check(self, value, path):
        out = super().check(value, path)
        explicit = [k for k in ("gust_rms", "scale_length") if out.get(k) is not None]
        standard = [k for k in ("wind_speed_20ft", "exceedance_probability", "severity") if out.get(k) is not None]
        if len(explicit) == 1:
            raise CaseError(f"give gust_rms and scale_length together (only {explicit[0]} is given)", path)
        if explicit and standard:
            raise CaseError(f"give either gust_rms and scale_length, or the standard's {' / '.join(standard)}, "
                            "not both", path)
        if not explicit and not standard:
            raise CaseError("needs gust_rms and scale_length, or severity, or wind_speed_20ft and/or "
                            "exceedance_probability", path)
        if out.get("severity") is not None and len(standard) > 1:
            raise CaseError("severity sets wind_speed_20ft and exceedance_probability; give it alone", path)
        p = out.get("exceedance_probability")
        if p is not None:
            from ..model.dryden import EXCEEDANCE_PROBABILITIES

            if not any(abs(p - q) <= 1e-12 * q for q in EXCEEDANCE_PROBABILITIES):
                raise CaseError("must be one of " + ", ".join(f"{q:g}" for q in EXCEEDANCE_PROBABILITIES)
                                + " (the curves of the standard's figure; no interpolation between them)",
                                path + ".exceedance_probability", p)
        return out


TURBULENCE = TurbulenceSection(
    {
        "gust_rms": Quantity(("speed",), "rms vertical gust velocity sigma_w, m/s, at every condition.",
                             default=None, nonnegative=True, high=30.0),
        "scale_length": Quantity(("length",), "Dryden vertical scale length L_w, m, at every condition.",
                                 default=None, positive=True, high=5000.0),
        "severity": Choice(("light", "moderate", "severe"),
                           "The standard's intensity by severity (light: W20 15 kt and probability 1e-2; "
                           "moderate: 30 kt and 1e-3; severe: 45 kt and 1e-5; from memory of MIL-F-8785C).",
                           default=None),
        "wind_speed_20ft": Quantity(("speed",), "Mean wind 20 ft above ground W20, m/s (sets sigma_w below "
                                    "2000 ft above ground: 0.1 W20).", default=None, nonnegative=True, high=60.0),
        "exceedance_probability": Number("Probability of exceedance of the medium/high-altitude intensity "
                                         "(2e-1 ... 1e-6; above 1000 ft above ground).", default=None,
                                         low=1e-6, high=0.2),
        "ground_elevation": Quantity(("length",), "Ground elevation, m: the standard's values are read at each "
                                     "condition's altitude minus this (height above ground).", default=0.0),
    },
    "Continuous vertical turbulence (Dryden spectrum of MIL-F-8785C): rms responses bare and with the damper, "
    "and exceedance rates of the actuator's rate limit and the damper's authority, by covariance analysis "
    "(docs/turbulence.md). Either gust_rms and scale_length, or the standard's severity / wind_speed_20ft / "
    "exceedance_probability.",
    default=None,
)
