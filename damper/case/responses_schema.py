"""Case-file keys of the ``responses:`` section (time responses with actuator limits).

Imported by :mod:`damper.case.schema` (after its spec classes are defined); import
``damper.case`` rather than this module directly. The simulation is
:mod:`damper.analysis.response`; the keys are documented in docs/responses.md.
"""

from __future__ import annotations

from ..errors import CaseError
from .schema import Choice, Items, Quantity, Section, Text

#: Input kinds and the keys each one takes (besides kind, name and start).
INPUT_KEYS = {
    "doublet": ("amplitude", "half_period"),
    "step": ("amplitude",),
    "pulse": ("amplitude", "duration"),
    "gust_sharp": ("gust_velocity",),
    "gust_one_minus_cosine": ("gust_velocity", "gust_length"),
}

#: Keys a kind cannot do without (the others have defaults).
INPUT_REQUIRED = {
    "doublet": (),
    "step": ("amplitude",),
    "pulse": ("amplitude", "duration"),
    "gust_sharp": ("gust_velocity",),
    "gust_one_minus_cosine": ("gust_velocity", "gust_length"),
}


class InputSection(Section):
    """One input; checks that its keys fit its kind."""

    def check(self, value, path):
        out = super().check(value, path)
        kind = out["kind"]
        allowed = INPUT_KEYS[kind]
        for key in INPUT_REQUIRED[kind]:
            if out.get(key) is None:
                raise CaseError(f"a {kind} input needs {key}", path)
        for key, v in out.items():
            if key in ("kind", "name", "start") or v is None or key in allowed:
                continue
            raise CaseError(
                f"key {key!r} does not belong to a {kind} input (it takes {', '.join(allowed)}, start, name)", path
            )
        return out


_POS = dict(positive=True)

INPUT = InputSection(
    {
        "kind": Choice(
            ("doublet", "step", "pulse", "gust_sharp", "gust_one_minus_cosine"),
            "doublet, step or pulse of pilot command at the actuator input; or a vertical gust, "
            "sharp-edged or 1-cosine.",
        ),
        "name": Text("Label for tables and file names (default: the kind).", default=None, max_length=40),
        "start": Quantity(("time",), "Time the input begins, s (default 0.5 s).", default=None, nonnegative=True),
        "amplitude": Quantity(
            ("dimensionless",),
            "Pilot command, rad of surface (e.g. '2 deg'), positive nose-up: a pull is positive "
            "whatever the sign of M_delta (it reaches the actuator as sign(M_delta) times itself; "
            "docs/theory.md s.1). A doublet is +amplitude then -amplitude. Default for a doublet: "
            "2 deg (pull first).",
            default=None,
            nonzero=True,
        ),
        "half_period": Quantity(
            ("time",), "Doublet: duration of each half, s (default: half the bare short-period period).",
            default=None, **_POS,
        ),
        "duration": Quantity(("time",), "Pulse: duration, s.", default=None, **_POS),
        "gust_velocity": Quantity(
            ("speed",), "Gust: vertical velocity, m/s, positive upward (raises the angle of attack); "
            "the peak of a 1-cosine gust.", default=None, nonzero=True,
        ),
        "gust_length": Quantity(
            ("length",), "1-cosine gust: length over which the gust rises and falls back, m.", default=None, **_POS
        ),
    },
    "One pilot input or gust.",
)

RESPONSES = Section(
    {
        "duration": Quantity(("time",), "Simulated time, s (absent: 10 s for model short_period, 60 s for "
                             "model longitudinal, long enough to see the phugoid).", default=None, positive=True,
                             high=600.0),
        "step": Quantity(
            ("time",), "Fixed integration step (RK4), s; the record has this step.",
            default=1e-3, positive=True, high=0.05,
        ),
        "output_step": Quantity(
            ("time",), "Time step of the CSV files and plots, s (measures use every step; default 0.01 s).",
            default=None, positive=True,
        ),
        "inputs": Items(INPUT, "Inputs to simulate, each at every condition.", default=None, min_items=1, max_items=20),
    },
    "Time responses to pilot inputs and gusts with the actuator's rate and travel limits "
    "(loop.actuator.rate_limit, loop.actuator.travel). Absent: one pull-first doublet of 2 deg.",
    default=None,
)
