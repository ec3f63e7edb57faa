"""Benchmark of the curvature engine against the naive baseline, measured in the same run.

Run by hand (not part of the test suite):

    python bench/bench_engine.py [--cap SECONDS] [--skip-baseline]

For Schwarzschild and Kerr-Newman (Boyer-Lindquist) it computes everything
``texgen.engine.compute_all`` offers, pinned to one core, and prints per-stage wall and CPU
seconds, the peak memory (tracemalloc peak of a second, traced run, and the process's
maximum resident set), then runs ``bench/baseline_naive.py`` in a subprocess stopped
at the cap and prints the ratios.  A baseline stopped at the cap is reported as
``> cap`` and its ratio is then a lower bound.

Targets: Kerr-Newman >= 50x faster than the baseline and under 15 s on one core;
Schwarzschild under 1 s after import.
"""
from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import time
import tracemalloc
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import_start = time.perf_counter()
from texgen.engine import algebra as _fields  # noqa: E402
from texgen.engine import compute_all as derive  # noqa: E402
from texgen.spec.model import spacetime_from_matrix  # noqa: E402

import baseline_naive  # noqa: E402

IMPORT_SECONDS = time.perf_counter() - import_start


def engine_run(name: str, backend: str = "auto"):
    coords, g, params = baseline_naive.METRICS[name]()
    st = spacetime_from_matrix(coords, g, parameters=params)
    w0, c0 = time.perf_counter(), time.process_time()
    cv = derive(st, backend=backend)
    return cv, time.perf_counter() - w0, time.process_time() - c0


def child(mode: str, name: str) -> dict[str, float]:
    """Run one engine measurement in a fresh interpreter (cold sympy caches).

    ``cold``: wall and CPU seconds of the first ``derive`` after import, and the
    child's maximum resident set; ``traced``: the tracemalloc peak of that run
    (python-flint's C allocations are not traced; the RSS covers them).
    """
    cmd = [sys.executable, str(Path(__file__).resolve()), f"--{mode}", name]
    out = subprocess.run(cmd, capture_output=True, text=True, check=True).stdout
    return {k: float(v) for k, v in (line.split() for line in out.splitlines())}


def child_main(mode: str, name: str) -> int:
    if mode == "traced":
        tracemalloc.start()
    _, wall, cpu = engine_run(name)
    if mode == "traced":
        print(f"peak_mib {tracemalloc.get_traced_memory()[1] / 2**20:.3f}")
    else:
        print(f"wall {wall:.6f}\ncpu {cpu:.6f}")
        print(f"rss_mib {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.3f}")
    return 0


def baseline(name: str, cap: float):
    """(total wall or None if capped, {stage: (wall, cpu)}, CPU seconds used) of the naive baseline."""
    cmd = [sys.executable, str(HERE / "baseline_naive.py"), name]
    stages: dict[str, tuple[float, float]] = {}
    total = None
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, text=True)
    try:
        out, _ = proc.communicate(timeout=cap)
    except subprocess.TimeoutExpired:
        proc.kill()
        out, _ = proc.communicate()
    for line in out.splitlines():
        parts = line.split()
        if parts and parts[0] == "STAGE":
            stages[parts[1]] = (float(parts[2]), float(parts[3]))
        elif parts and parts[0] == "DONE":
            total = float(parts[1])
    if total is None and proc.returncode not in (0, None, -9):
        raise RuntimeError(f"baseline failed with exit code {proc.returncode}")
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime + after.ru_stime) - (before.ru_utime + before.ru_stime)
    return total, stages, cpu


def show_stages(cv) -> None:
    print(f"    {'stage':22s} {'wall s':>9s} {'cpu s':>9s}")
    for stage, wall in sorted(cv.timings.items(), key=lambda kv: -kv[1]):
        print(f"    {stage:22s} {wall:9.4f} {cv.cpu_timings[stage]:9.4f}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cap", type=float, default=600.0, help="time cap for each baseline run (s)")
    ap.add_argument("--skip-baseline", action="store_true")
    ap.add_argument("--cold", metavar="METRIC", help=argparse.SUPPRESS)
    ap.add_argument("--traced", metavar="METRIC", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})  # one core (children inherit)
    if args.cold or args.traced:
        return child_main("cold" if args.cold else "traced", args.cold or args.traced)
    print(f"python {sys.version.split()[0]}, backends {_fields.available_backends()}, "
          f"import texgen.derive {IMPORT_SECONDS:.2f} s, one core")
    results = {}
    for name in ("schwarzschild", "kerr_newman"):
        cold = child("cold", name)
        traced = child("traced", name)
        print(f"\n{name}: first derive() after import {cold['wall']:.3f} s wall, {cold['cpu']:.3f} s cpu; "
              f"peak memory: tracemalloc {traced['peak_mib']:.1f} MiB, process RSS {cold['rss_mib']:.0f} MiB")
        results[name] = (cold["wall"], cold["cpu"])
        engine_run(name)  # warm sympy's own caches before the per-stage tables
        for backend in _fields.available_backends():
            cv, wall, cpu = engine_run(name, backend)
            print(f"{name} [{backend}, warm]: engine total {wall:.3f} s wall, {cpu:.3f} s cpu")
            show_stages(cv)
    if args.skip_baseline:
        return 0
    print(f"\nnaive baseline (simplify per component), cap {args.cap:g} s each")
    for name in ("schwarzschild", "kerr_newman"):
        total, stages, used = baseline(name, args.cap)
        wall, cpu = results[name]
        finished = ", ".join(f"{k} {v[0]:.1f}s" for k, v in stages.items()) or "none"
        if total is None:
            print(f"  {name}: baseline > {args.cap:g} s, stopped at the cap (finished stages: {finished})")
            print(f"  {name}: speed-up >= {args.cap / wall:.0f}x wall, >= {used / cpu:.0f}x cpu "
                  f"(lower bounds; baseline used {used:.0f} s cpu before the cap; engine cold {wall:.3f} s wall, "
                  f"{cpu:.3f} s cpu)")
        else:
            bcpu = sum(v[1] for v in stages.values())
            print(f"  {name}: baseline {total:.2f} s wall, {bcpu:.2f} s cpu; engine cold {wall:.3f} s wall")
            print(f"  {name}: speed-up {total / wall:.0f}x wall, {bcpu / cpu:.0f}x cpu")
    return 0


if __name__ == "__main__":
    sys.exit(main())
