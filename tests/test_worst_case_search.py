"""The worst-case search evaluates each (condition, point) once; its results are those of
evaluating every point it asks for (damper.analysis.robustness._evaluate_unique)."""

import dataclasses

import numpy as np

import damper.analysis.robustness as rob
from tests.test_robustness import _small

CASE = """
uncertainty:
  samples: 16
  parameters:
    - {name: M_alpha, relative: 0.3}
    - {name: delay, absolute: "10 ms", distribution: normal}
    - {name: actuator_bandwidth, relative: 0.3}
  cg_shift: {range: [-0.03, 0.05]}
"""


def _every_point(run, cidx, pts, chunk, cache):
    """Source: the search's points evaluated one and all, as before the cache (written here)."""
    res = rob._evaluate_flat(run, cidx, pts, chunk)
    return res["slacks"], res["values"]


def _same(a, b):
    if dataclasses.is_dataclass(a):
        return all(_same(getattr(a, f.name), getattr(b, f.name)) for f in dataclasses.fields(a))
    if isinstance(a, (list, tuple)):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    if isinstance(a, np.ndarray) or isinstance(a, float):
        return np.array_equal(a, b, equal_nan=np.asarray(a).dtype.kind in "fc")
    return True  # the case and the axes: the same objects on both sides


def test_search_with_each_point_once_equals_evaluating_every_point(monkeypatch):
    case = _small(CASE)
    evaluated, searched = [], []  # points evaluated; (asked for, evaluated) per search step
    flat = rob._evaluate_flat

    def counting(run, cidx, pts, chunk):
        evaluated.append(len(cidx))
        return flat(run, cidx, pts, chunk)

    def asking(run, cidx, pts, chunk, cache):
        before = len(evaluated)
        out = unique(run, cidx, pts, chunk, cache)
        searched.append((len(cidx), sum(evaluated[before:])))
        return out

    unique = rob._evaluate_unique
    monkeypatch.setattr(rob, "_evaluate_flat", counting)
    monkeypatch.setattr(rob, "_evaluate_unique", asking)
    once = rob.robustness(case, np.array([0.15, 0.08]), workers=1)
    monkeypatch.setattr(rob, "_evaluate_unique", _every_point)
    every = rob.robustness(case, np.array([0.15, 0.08]), workers=1)
    assert once.evaluations == every.evaluations
    for c_once, c_every in zip(once.conditions, every.conditions):
        assert _same(c_once.worst, c_every.worst)
    assert _same(once.slacks, every.slacks)
    # the search asked for some points more than once, and evaluated each once
    asked, done = (sum(x) for x in zip(*searched))
    assert 0 < done < asked


def test_each_point_once_gives_every_point_its_own_measures():
    # Points repeated within a call and across calls, at both conditions: each answer is the
    # direct evaluation of that point at that condition (Source: _evaluate_flat on every point).
    from damper.analysis.runners import Study
    from damper.analysis.uncertainty import resolve_axes, uncertainty_spec

    case = _small(CASE)
    spec = uncertainty_spec(case)
    gains = np.array([0.15, 0.08])
    run = rob._runner(Study(case, resolve_axes(case, spec, gains), gains, spec), 1, False, None)
    rng = np.random.default_rng(4)
    pts = rng.uniform(-1, 1, (5, 4))[[0, 1, 2, 0, 1, 3, 4, 2]]
    cidx = np.array([0, 0, 1, 0, 1, 1, 0, 1])
    cache = {}
    first = rob._evaluate_unique(run, cidx[:5], pts[:5], 64, cache)
    second = rob._evaluate_unique(run, cidx, pts, 64, cache)
    direct = rob._evaluate_flat(run, cidx, pts, 64)
    assert np.array_equal(first[0], direct["slacks"][:, :5], equal_nan=True)
    assert np.array_equal(second[0], direct["slacks"], equal_nan=True)
    assert np.array_equal(second[1], direct["values"], equal_nan=True)
    assert len(cache) == len({(c, p.tobytes()) for c, p in zip(cidx, pts)})
