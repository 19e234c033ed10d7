"""damper: design and verification of pitch-rate dampers.

Preliminary engineering analysis only; see README.md for the cautions.

The Python API's entry points are importable from here (docs/api.md). From the repository root:

>>> import damper
>>> case = damper.load_case("cases/utility_single_aft_cg.yaml")
>>> design = damper.search(case)                      # the gain (s) at every condition
>>> [c.name for c in design.conditions][:2]
['SL-climb-fwd', 'SL-climb-aft']
>>> all(c.intervals[0][0] <= c.chosen_gain <= c.intervals[-1][1] for c in design.conditions if c.feasible)
True
>>> result = damper.assess(case, 0.15)                # one gain (s) at every condition
>>> result.damping_ratio("equivalent").shape == (len(case.conditions),)
True
>>> import control
>>> closed = damper.to_control(damper.build_loop(case, 0.15), index=(0,))
>>> isinstance(closed, control.StateSpace)
True
"""

__version__ = "0.1.0"

#: The Python API's entry points (docs/api.md), imported on first use so that ``import damper``
#: (and the command line's start-up) does not load numpy, scipy or python-control.
API = {
    "load_case": "damper.case.load",
    "search": "damper.analysis.search",
    "assess": "damper.analysis.assess",
    "build_loop": "damper.analysis.assess",
    "design_schedule": "damper.analysis.schedule",
    "robustness": "damper.analysis.robustness",
    "uncertainty_spec": "damper.analysis.uncertainty",
    "respond_case": "damper.analysis.response",
    "turbulence_for_spec": "damper.analysis.turbulence",
    "to_control": "damper.model.loop",
    "run_pipeline": "damper.analysis.pipeline",
    "PipelineOptions": "damper.analysis.pipeline",
}

__all__ = ["__version__", *API]


def __getattr__(name):
    """``damper.<entry point>``: import its module on first use (PEP 562)."""
    module = API.get(name)
    if module is None:
        raise AttributeError(f"module 'damper' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(API))
