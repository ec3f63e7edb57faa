"""Benchmark of heavy spacetimes: per-stage times, peak memory, ratio to the naive baseline.

Run by hand (not part of the test suite):

    python bench/bench_heavy.py [--cap SECONDS] [--cases NAME ...] [--skip-baseline]

Each case of bench/heavy_cases.py runs in a fresh interpreter pinned to one core:
everything ``texgen.engine.compute_all`` offers, then the matter analysis
(``texgen.physics.analysis.analyse``) and the LaTeX report (``texgen.api.report_text``).
It prints wall and CPU seconds per stage (from ``Curvature.timings`` and
``cpu_timings``), the child's maximum resident set, and the ratio of the naive
baseline (``baseline_naive.naive_all``: plain sympy, ``simplify`` per component),
run on the same metric in another fresh interpreter stopped at the cap, to the
engine's derivation time.  Writes bench/results.md and, with matplotlib,
bench/tangherlini.png (time against dimension, with the log-log fitted exponent).

Targets: Kerr-Newman-de Sitter full report < 60 s; Myers-Perry 5D < 60 s;
Tangherlini n = 10 < 30 s; the four-function ansatz < 60 s; peak memory < 2 GiB.
"""
from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))
sys.path.insert(0, str(HERE))

import heavy_cases  # noqa: E402

#: Report columns: engine stage names (Curvature.timings keys) grouped as the issue asks.
GROUPS = {
    "inverse": ("setup", "g", "lam", "metric", "determinant", "inverse", "dg"),
    "christoffel": ("christoffel_first", "christoffel"),
    "riemann": ("riemann_down", "riemann"),
    "ricci/einstein": ("ricci", "ricci_mixed", "ricci_scalar", "einstein", "einstein_mixed", "field_tensor"),
    "weyl": ("weyl",),
    "invariants": ("pair_inverse", "kretschmann", "ricci_squared", "weyl_squared", "invariant_identity"),
    "other": ("bianchi", "geodesic_equations"),
}
TARGETS = {"kerr_newman_de_sitter": 60.0, "myers_perry_5d": 60.0, "tangherlini_10d": 30.0,
           "stationary_axisymmetric": 60.0}
MEMORY_TARGET_MIB = 2048.0


def pin_one_core() -> None:
    if hasattr(os, "sched_setaffinity"):
        os.sched_setaffinity(0, {sorted(os.sched_getaffinity(0))[0]})  # children inherit it


def case_main(name: str) -> int:
    """Child: measure one case after import, print one JSON line."""
    from texgen import api
    from texgen.engine import compute_all as derive
    from texgen.physics import analysis
    from texgen.errors import TexgenError

    model = heavy_cases.load(name)
    w0, c0 = time.perf_counter(), time.process_time()
    cv = derive(model)
    derive_wall, derive_cpu = time.perf_counter() - w0, time.process_time() - c0
    stages = {}
    for group, keys in GROUPS.items():
        stages[group] = (sum(cv.timings.get(k, 0.0) for k in keys),
                         sum(cv.cpu_timings.get(k, 0.0) for k in keys))
    known = {k for keys in GROUPS.values() for k in keys}
    rest = [k for k in cv.timings if k not in known]
    stages["other"] = (stages["other"][0] + sum(cv.timings[k] for k in rest),
                       stages["other"][1] + sum(cv.cpu_timings[k] for k in rest))
    note = ""
    w1, c1 = time.perf_counter(), time.process_time()
    try:
        analysis.analyse(model, cv)
    except TexgenError as exc:
        note = "matter: " + exc.format_message()
    stages["matter"] = (time.perf_counter() - w1, time.process_time() - c1)
    w2, c2 = time.perf_counter(), time.process_time()
    tex = api.report_text(model, cv, "tex")
    stages["report"] = (time.perf_counter() - w2, time.process_time() - c2)
    out = {"name": name, "dimension": model.dimension, "derive": [derive_wall, derive_cpu],
           "total": [time.perf_counter() - w0, time.process_time() - c0], "stages": stages,
           "rss_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
           "report_chars": len(tex), "not_computed": "Not computed" in tex, "note": note,
           "unknown_stages": rest}
    print(json.dumps(out))
    return 0


def baseline_main(name: str) -> int:
    """Child: the naive baseline on the case's metric (definitions expanded)."""
    import baseline_naive

    model = heavy_cases.load(name)
    start = time.perf_counter()
    baseline_naive.naive_all(tuple(model.coordinate_symbols), model.metric.as_mutable(),
                             lambda stage, wall, cpu: print(f"STAGE {stage} {wall:.6f} {cpu:.6f}", flush=True))
    print(f"DONE {time.perf_counter() - start:.6f}", flush=True)
    return 0


def run_case(name: str) -> dict:
    cmd = [sys.executable, str(Path(__file__).resolve()), "--child-case", name]
    proc = subprocess.run(cmd, capture_output=True, text=True)
    if proc.returncode != 0:
        raise RuntimeError(f"{name}: child failed:\n{proc.stderr}")
    return json.loads(proc.stdout.strip().splitlines()[-1])


def run_baseline(name: str, cap: float) -> float | None:
    """Wall seconds of the baseline, or None when stopped at the cap."""
    cmd = [sys.executable, str(Path(__file__).resolve()), "--child-baseline", name]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
    try:
        out, _ = proc.communicate(timeout=cap)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.communicate()
        return None
    for line in out.splitlines():
        if line.startswith("DONE "):
            return float(line.split()[1])
    raise RuntimeError(f"{name}: baseline failed with exit code {proc.returncode}")


def fit_exponent(dims: list[int], times: list[float]) -> tuple[float, float]:
    """(p, c) of the least-squares line log t = p log n + c."""
    xs = [math.log(d) for d in dims]
    ys = [math.log(t) for t in times]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    p = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
    return p, my - p * mx


def table(rows: list[dict], baselines: dict, cap: float | None) -> str:
    cols = list(GROUPS) + ["matter", "report"]
    head = ["case", "n"] + [f"{c} s" for c in cols] + ["total wall s", "total cpu s", "peak RSS MiB",
                                                        "baseline s", "baseline / engine", "target"]
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for r in rows:
        st = r["stages"]
        cells = [r["name"], str(r["dimension"])]
        cells += [f"{st[c][0]:.3f} ({st[c][1]:.3f})" for c in cols]
        cells += [f"{r['total'][0]:.2f}", f"{r['total'][1]:.2f}", f"{r['rss_mib']:.0f}"]
        if r["name"] not in baselines:
            cells += ["not run", "-"]
        elif baselines[r["name"]] is None:
            cells += [f"> {cap:g}", f">= {cap / r['derive'][0]:.0f}x"]
        else:
            cells += [f"{baselines[r['name']]:.2f}", f"{baselines[r['name']] / r['derive'][0]:.0f}x"]
        tgt = TARGETS.get(r["name"])
        ok_mem = r["rss_mib"] < MEMORY_TARGET_MIB
        if tgt is None:
            cells.append("mem ok" if ok_mem else "MEMORY OVER 2 GiB")
        else:
            ok = r["total"][0] < tgt
            cells.append(f"< {tgt:g} s: {'met' if ok else 'MISSED'}; mem {'ok' if ok_mem else 'OVER'}")
        lines.append("| " + " | ".join(cells) + " |")
    return "\n".join(lines) + "\n"


def plot(dims, times, p, c, path: Path) -> bool:
    try:
        import matplotlib
    except ImportError:
        return False
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(5, 3.5))
    ax.loglog(dims, times, "o", label="measured (derive CPU time, one core)")
    ax.loglog(dims, [math.exp(c) * d ** p for d in dims], "-", label=f"fit: t ~ n^{p:.2f}")
    ax.set_xlabel("dimension n")
    ax.set_ylabel("CPU time of derive (s)")
    ax.set_xticks(dims, [str(d) for d in dims])
    ax.set_title("Schwarzschild-Tangherlini family")
    ax.legend()
    fig.tight_layout()
    fig.savefig(path, dpi=120)
    plt.close(fig)
    return True


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cap", type=float, default=120.0, help="time cap of each baseline run (s, default 120)")
    ap.add_argument("--cases", nargs="+", choices=list(heavy_cases.CASES), help="only these cases")
    ap.add_argument("--skip-baseline", action="store_true")
    ap.add_argument("--child-case", help=argparse.SUPPRESS)
    ap.add_argument("--child-baseline", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    pin_one_core()
    if args.child_case:
        return case_main(args.child_case)
    if args.child_baseline:
        return baseline_main(args.child_baseline)
    names = args.cases or list(heavy_cases.CASES)
    print(f"python {sys.version.split()[0]}, one core, baseline cap {args.cap:g} s")
    rows, baselines = [], {}
    for name in names:
        r = run_case(name)
        rows.append(r)
        st = r["stages"]
        print(f"\n{name} (n = {r['dimension']}): total {r['total'][0]:.2f} s wall, {r['total'][1]:.2f} s cpu, "
              f"peak RSS {r['rss_mib']:.0f} MiB{'; ' + r['note'] if r['note'] else ''}", flush=True)
        for stage, (wall, cpu) in st.items():
            print(f"    {stage:16s} {wall:9.3f} s wall {cpu:9.3f} s cpu")
        if not args.skip_baseline:
            baselines[name] = b = run_baseline(name, args.cap)
            if b is None:
                print(f"    baseline > {args.cap:g} s (stopped); ratio >= {args.cap / r['derive'][0]:.0f}x", flush=True)
            else:
                print(f"    baseline {b:.2f} s; ratio {b / r['derive'][0]:.0f}x", flush=True)
    md = ["# Heavy spacetimes benchmark", "",
          f"Measured by `python bench/bench_heavy.py --cap {args.cap:g}` on one core "
          f"(python {sys.version.split()[0]}). Stage cells: wall s (cpu s). Ratio: naive baseline wall "
          "time over the engine's derive wall time (a lower bound when the baseline hit the cap).", "",
          table(rows, baselines, args.cap)]
    tang = [(r["dimension"], r["derive"][0], r["derive"][1]) for r in rows if r["name"].startswith("tangherlini_")]
    if len(tang) >= 2:
        dims, walls, cpus = (list(x) for x in zip(*tang))
        p, c = fit_exponent(dims, cpus)
        pw, _ = fit_exponent(dims, walls)
        # CPU time is the fitted one: wall time on a shared machine includes waiting for the core
        line = (f"Tangherlini family: derive CPU time grows like n^{p:.2f} (wall time: n^{pw:.2f}); "
                f"log-log least squares, n = {dims[0]}..{dims[-1]}.")
        print("\n" + line)
        md += [line, ""]
        if plot(dims, cpus, p, c, HERE / "tangherlini.png"):
            md += ["![Tangherlini timing](tangherlini.png)", ""]
            print(f"wrote {HERE / 'tangherlini.png'}")
    (HERE / "results.md").write_text("\n".join(md))
    print(f"wrote {HERE / 'results.md'}\n")
    print(table(rows, baselines, args.cap))
    return 0


if __name__ == "__main__":
    sys.exit(main())
