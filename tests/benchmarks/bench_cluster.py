"""Projection of a large robustness campaign per worker, from a measured time per loop.

    python tests/benchmarks/bench_cluster.py [--quick] [--conditions N] [--cluster ADDRESS]

Measures, in this process, the wall time of Monte Carlo blocks of the uncertain demo's
conditions (cycled to N conditions, airspeeds scaled 0.9-1.1 as in bench_engine.py;
benchmark data only) exactly as a worker evaluates them (``_block_task``: samples
regenerated from the seed, one batched assessment, the block's streaming reduction), the
peak memory of one block (tracemalloc) and the size of what a block sends back. From the
time per loop it projects a campaign of 1,000,000 samples x 50 conditions (5e7 loops,
plus the corners and the worst-case search, which do not grow with the samples) on 1 to
256 workers. With ``--cluster ADDRESS`` it also runs a small study on that Dask scheduler
and on one local process and prints both times (the scheduler's overhead per block).

Not collected by pytest (tests/benchmarks is excluded in pyproject.toml). See docs/cluster.md.
"""

from __future__ import annotations

import os
import pickle
import sys
import time
import tracemalloc

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

CAMPAIGN_SAMPLES = 1_000_000
CAMPAIGN_CONDITIONS = 50
WORKERS = (1, 2, 8, 32, 128, 256)


def study_case(n_conditions, samples):
    """The uncertain demo with `n_conditions` conditions (bench_engine.py's construction) and `samples`."""
    import yaml

    from damper.case import load_case_text

    with open(os.path.join(ROOT, "cases", "utility_single_uncertain.yaml")) as f:
        doc = yaml.safe_load(f)
    base = doc["conditions"]
    conds = []
    for k in range(n_conditions):
        c = dict(base[k % len(base)])
        scale = 0.9 + 0.2 * k / max(n_conditions - 1, 1)
        c["name"] = f"{c['name']}-{k + 1:02d}"
        c["airspeed"] = f"{float(str(c['airspeed']).split()[0]) * scale:.1f} kt"
        conds.append(c)
    doc["conditions"] = conds
    doc["uncertainty"]["samples"] = samples
    return load_case_text(yaml.safe_dump(doc, sort_keys=False))


def measure_blocks(n_conditions, blocks):
    """(s per loop, loops per block, peak bytes of one block, bytes sent back per block)."""
    from damper.analysis.robustness import EXTRA_KEPT, _block_task, _blocks, shown_limit
    from damper.analysis.runners import Study
    from damper.analysis.uncertainty import resolve_axes, uncertainty_spec

    case = study_case(n_conditions, 10_000)
    spec = uncertainty_spec(case)
    gains = np.full(n_conditions, 0.15)
    study = Study(case, resolve_axes(case, spec, gains), gains, spec)
    keep = spec.refine_starts + EXTRA_KEPT
    todo = list(_blocks(n_conditions, spec.samples, spec.chunk))[1 : 1 + blocks]  # the first warms up
    _block_task(study, *todo[0], 0, 0, keep)
    t = time.perf_counter()
    loops = 0
    for start, count in todo:
        summary = _block_task(study, start, count, 0, 0, keep)  # past the subsample: what most blocks are
        loops += count * n_conditions
    per_loop = (time.perf_counter() - t) / loops
    tracemalloc.start()
    _block_task(study, *todo[0], 0, 0, keep)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    shown = _block_task(study, 0, todo[0][1], 0, shown_limit(n_conditions), keep)  # a block of the subsample
    return per_loop, todo[0][1] * n_conditions, peak, len(pickle.dumps(summary)), len(pickle.dumps(shown))


def compare_cluster(address, n_conditions, samples):
    """Wall time of one small study on the Dask scheduler at `address` and in one local process."""
    from damper.analysis.robustness import robustness, uncertainty_spec

    case = study_case(n_conditions, samples)
    spec = uncertainty_spec(case)
    t = time.perf_counter()
    robustness(case, 0.15, spec, workers=1)
    local = time.perf_counter() - t
    t = time.perf_counter()
    r = robustness(case, 0.15, spec, cluster=address)
    return local, time.perf_counter() - t, r.evaluations


def main(argv):
    quick = "--quick" in argv
    n = int(argv[argv.index("--conditions") + 1]) if "--conditions" in argv else CAMPAIGN_CONDITIONS
    print(f"damper campaign projection, {time.strftime('%Y-%m-%d')}, {os.cpu_count()} cores, numpy {np.__version__}")
    per_loop, block_loops, peak, sent, sent_shown = measure_blocks(n, 2 if quick else 8)
    print(f"Monte Carlo blocks of {block_loops} loops at {n} conditions, one worker: {per_loop * 1e6:.0f} us per loop; "
          f"peak memory of one block {peak / 2**20:.0f} MiB; a block sends back {sent / 1024:.0f} kB "
          f"({sent_shown / 1024:.0f} kB while it is in the plots' subsample)")
    loops = CAMPAIGN_SAMPLES * CAMPAIGN_CONDITIONS
    hours = loops * per_loop / 3600.0
    print(f"projected campaign {CAMPAIGN_SAMPLES:,} samples x {CAMPAIGN_CONDITIONS} conditions = {loops:.1e} loops "
          f"(Monte Carlo only; corners and worst-case search add a fixed few thousand loops per condition):")
    from damper.analysis.uncertainty import UncertaintySpec

    blocks = -(-CAMPAIGN_SAMPLES // max(1, UncertaintySpec().chunk // CAMPAIGN_CONDITIONS))
    for w in WORKERS:  # one single-thread worker per core; the driver's merging is negligible
        print(f"  {w:>4} worker{'s' if w > 1 else ' '}: {hours / w:8.2f} h of wall time"
              f" ({loops * per_loop / w / 60:8.1f} min), {blocks / w:9.0f} blocks each")
    if "--cluster" in argv:
        local, remote, evals = compare_cluster(argv[argv.index("--cluster") + 1], 20, 2000 if quick else 10_000)
        print(f"study of {evals} loops: one local process {local:.1f} s, the cluster {remote:.1f} s "
              f"(ratio {local / remote:.2f})")
    print(f"SUMMARY us_per_loop={per_loop * 1e6:.1f} campaign_1M_x50_h_per_worker={hours:.2f} "
          f"block_peak_mib={peak / 2**20:.1f}")


if __name__ == "__main__":
    main(sys.argv[1:])
