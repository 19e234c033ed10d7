"""Shared test helpers."""

import os
import sys

import numpy as np
import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
if ROOT not in sys.path:
    sys.path.insert(0, ROOT)

from damper.model.airframe import Derivatives  # noqa: E402

#: Textbook general-aviation example (Nelson, Flight Stability and Automatic Control,
#: 2nd ed., chapter 4): published dimensional derivatives, from memory, converted
#: from ft to m. u0 = 176 ft/s.
FT = 0.3048
TEXTBOOK_GA = Derivatives(
    airspeed=np.asarray(176 * FT),
    Z_alpha=np.asarray(-355.42 * FT),
    Z_q=np.asarray(0.0),
    Z_delta=np.asarray(-28.17 * FT),
    M_alpha=np.asarray(-8.80),
    M_alpha_dot=np.asarray(-0.90),
    M_q=np.asarray(-2.05),
    M_delta=np.asarray(-11.87),
)


@pytest.fixture
def rng():
    return np.random.default_rng(20261202)


def random_derivatives(rng, n, unstable_fraction=0.0):
    """Invented, physically plausible random derivatives (test data only)."""
    v = rng.uniform(30, 250, n)
    d = Derivatives(
        airspeed=v,
        Z_alpha=-rng.uniform(50, 1500, n),
        Z_q=-rng.uniform(0, 5, n),
        Z_delta=-rng.uniform(0, 60, n),
        M_alpha=-rng.uniform(0.5, 40, n) * np.where(rng.uniform(size=n) < unstable_fraction, -0.3, 1.0),
        M_alpha_dot=-rng.uniform(0, 1.5, n),
        M_q=-rng.uniform(0.3, 5, n),
        M_delta=-rng.uniform(3, 60, n),
    )
    return d


#: Speed derivatives of the textbook general-aviation example (Nelson, Flight Stability
#: and Automatic Control, 2nd ed., chapter 4, dimensional derivatives, from memory):
#: X_u = -0.045 1/s, X_w = 0.036 1/s (so X_alpha = u0 X_w), Z_u = -0.369 1/s, M_u = 0.
TEXTBOOK_GA_SPEED = dict(X_u=-0.045, X_alpha=0.036 * 176 * FT, Z_u=-0.369, M_u=0.0)


def textbook_longitudinal():
    """The textbook general-aviation example as a four-state longitudinal model."""
    from damper.model.longitudinal import with_speed_terms

    return with_speed_terms(TEXTBOOK_GA, **TEXTBOOK_GA_SPEED)


def random_longitudinal(rng, n, unstable_fraction=0.0, climb=False):
    """Invented, physically plausible random longitudinal derivatives (test data only).

    The short-period part is :func:`random_derivatives`; Z_u near -2 g / V (level flight),
    X_u a small drag term, X_alpha of either sign, M_u a small tuck or thrust effect.
    """
    from damper.model.longitudinal import with_speed_terms

    d = random_derivatives(rng, n, unstable_fraction)
    v = d.airspeed
    return with_speed_terms(
        d,
        X_u=-rng.uniform(0.005, 0.08, n),
        X_alpha=rng.uniform(-3.0, 10.0, n),
        Z_u=-2 * 9.80665 / v * rng.uniform(0.8, 1.2, n),
        M_u=rng.uniform(-0.003, 0.003, n),
        X_delta=rng.uniform(-1.0, 1.0, n),
        flight_path_angle=rng.uniform(-0.1, 0.1, n) if climb else 0.0,
    )


# ---------------------------------------------------------------------------------
# Shared end-to-end runs and the `slow` marker (DEVELOPERS.md, "How to test")
# ---------------------------------------------------------------------------------
@pytest.fixture(scope="session")
def shared_run(tmp_path_factory):
    """``shared_run(case_name, options=("--no-plots",))``: a design run of a demo case built
    once per test run (tests/shared_runs.py) and read by every test that asks for it.

    Never write into the returned ``SharedRun.path``: copy it (``run.copy_to(tmp_path / "x")``).
    At the end of the session every run handed out must be unchanged.
    """
    from .shared_runs import NO_PLOTS, shared_design, snapshot

    base = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER"):
        base = base.parent  # common to every worker of this test run
    handed = {}

    def get(case_name, options=NO_PLOTS):
        run = shared_design(base / "shared-runs", case_name, options)
        handed.setdefault(run.path, snapshot(run.path))
        return run

    yield get
    changed = [str(p) for p, snap in handed.items() if snapshot(p) != snap]
    assert not changed, f"a test wrote into a shared run (copy it instead): {changed}"


#: Tests marked `slow` besides those using `shared_run` (node-id prefixes relative to tests/):
#: end-to-end runs with figures, subprocesses that design a case, browser screenshots and the
#: large oracle comparisons. `python -m pytest -m "not slow"` is the quick inner loop.
SLOW = (
)


def pytest_collection_modifyitems(config, items):
    for item in items:
        nodeid = item.nodeid.split("tests/", 1)[-1]
        if "shared_run" in getattr(item, "fixturenames", ()) or nodeid.startswith(SLOW):
            item.add_marker(pytest.mark.slow)
