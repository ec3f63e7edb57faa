"""Benchmark of the report stage: LaTeX build against JSON build per entry, per-stage timing, display length.

Run by hand (not part of the test suite):

    python bench/bench_report.py [--entries kerr,alcubierre,...] [--json OUT] [--skip-builds]

For every library entry (or those named), in fresh processes:

* the whole-process CPU time of ``texgen build FILE -o X.json`` (the baseline, measured in
  the same run) and of ``texgen build FILE -o X.tex`` (figures included, as the command's
  default), and their ratio; target: at most about 2 on every entry;
* the LaTeX build split by stage, timed inside one process: the derivation and the
  later stages' analysis (what the JSON build does too), the report context without its
  printing, LaTeX printing, line breaking and the choice of display forms;
* the display mathematics of the LaTeX report: number of displayed equations, of display
  lines, and their total width in the printer's width model (one unit is about a digit).

Both snapshots of the library (before and after a change) are compared by running this
script on each and reading the two ``--json`` files side by side.
"""
from __future__ import annotations

import argparse
import json
import os
import re
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TEXGEN = str(Path(sys.executable).with_name("texgen"))

DISPLAY = re.compile(r"\\begin\{(equation|multline|align|gather)(\*?)\}(.*?)\\end\{\1\2\}", re.DOTALL)


def _cpu_children() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _timed(argv: list[str], cwd: Path) -> tuple[float, float, int]:
    """(CPU seconds, wall seconds, exit code) of one texgen command in a fresh process."""
    before, start = _cpu_children(), time.perf_counter()
    proc = subprocess.run([TEXGEN, *argv], cwd=cwd, capture_output=True,
                          env=dict(os.environ, XDG_CACHE_HOME=str(cwd / "cache")))
    return _cpu_children() - before, time.perf_counter() - start, proc.returncode


def display_math(tex: str) -> dict:
    """Displayed equations of a LaTeX report: count, lines and total width (printer's width model)."""
    from texgen.output.layout import estimate_width

    equations = lines = 0
    width = 0.0
    for m in DISPLAY.finditer(tex):
        body = re.sub(r"\\label\{[^}]*\}|\\tag\{[^}]*\}|\\notag|\\nonumber", "", m.group(3))
        body = body.replace(r"\begin{split}", "").replace(r"\end{split}", "").replace("&", "")
        parts = [p.strip() for p in body.split(r"\\") if p.strip()]
        equations += 1
        lines += len(parts)
        width += sum(estimate_width(p) for p in parts)
    return {"equations": equations, "lines": lines, "width": round(width, 1)}


def stages_of_latex_build(path: str) -> dict:
    """CPU seconds of the LaTeX build's parts, measured inside this process."""
    from texgen import api
    from texgen.output import context, latex, layout, printer
    from texgen.output.stages import stage_results

    spent: dict[str, float] = {"printing": 0.0, "line breaking": 0.0, "display forms": 0.0}
    depth = {"n": 0}

    def wrap(owner, name, key):
        original = getattr(owner, name)

        def timed(*a, **k):
            if depth["n"]:
                return original(*a, **k)
            depth["n"] += 1
            t = time.process_time()
            try:
                return original(*a, **k)
            finally:
                spent[key] += time.process_time() - t
                depth["n"] -= 1
        setattr(owner, name, timed)

    wrap(layout._LineBreaker, "lines", "line breaking")
    wrap(layout._LineBreaker, "segments", "line breaking")
    wrap(latex.TexgenLatexPrinter, "doprint", "printing")
    forms = getattr(printer, "display_form", None)
    if forms is not None:
        wrap(printer, "display_form", "display forms")
    t0 = time.process_time()
    model = api.load_spacetime(path)
    cv = api.derive(model)
    stage_results(model, cv)  # what the JSON build computes as well (analysis, claims)
    for q in ("inverse", "christoffel", "riemann_down", "ricci", "einstein", "weyl", "kretschmann"):
        try:
            getattr(cv, q)
        except Exception:  # noqa: BLE001 - a quantity the entry does not have
            pass
    t1 = time.process_time()
    with tempfile.TemporaryDirectory() as tmp:
        t2 = time.process_time()
        api.build_report(model, Path(tmp) / "r.tex", curvature=cv)
        t3 = time.process_time()
    report = t3 - t2
    out = {"derivation and analysis": round(t1 - t0, 3), "report": round(report, 3)}
    for k, v in spent.items():
        out[k] = round(v, 3)
    out["context and the rest"] = round(report - sum(spent.values()), 3)
    _ = context  # imported so that the context module is loaded before timing
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--entries", help="comma-separated file stems (default: every library entry)")
    ap.add_argument("--json", type=Path, help="write the figures as JSON too")
    ap.add_argument("--skip-builds", action="store_true", help="only the in-process stage timing")
    ap.add_argument("--one", help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.one:
        print(json.dumps(stages_of_latex_build(args.one)))
        return 0
    files = sorted((ROOT / "metrics_yaml").rglob("*.yaml"))
    if args.entries:
        wanted = set(args.entries.split(","))
        files = [f for f in files if f.stem in wanted]
    rows = []
    work = Path(tempfile.mkdtemp(prefix="texgen-bench-report-"))
    for f in files:
        row: dict = {"entry": f.stem}
        if not args.skip_builds:
            cj, wj, ej = _timed(["build", str(f), "-o", str(work / f"{f.stem}.json"), "-q"], work)
            ct, wt, et = _timed(["build", str(f), "-o", str(work / f"{f.stem}.tex"), "-q"], work)
            row.update(json_cpu=round(cj, 2), tex_cpu=round(ct, 2), json_wall=round(wj, 2), tex_wall=round(wt, 2),
                       ratio=round(ct / cj, 2) if cj else None, exits=[ej, et])
            row["display"] = display_math((work / f"{f.stem}.tex").read_text(encoding="utf-8"))
        proc = subprocess.run([sys.executable, __file__, "--one", str(f)], capture_output=True, text=True)
        row["stages"] = json.loads(proc.stdout) if proc.returncode == 0 else {"error": proc.stderr[-300:]}
        rows.append(row)
        print(json.dumps(row), flush=True)
    if not args.skip_builds:
        worst = max(rows, key=lambda r: r.get("ratio") or 0)
        print(f"\nLaTeX / JSON CPU time: worst {worst['ratio']} ({worst['entry']}); "
              f"target <= 2: {'met' if worst['ratio'] <= 2.0 else 'not met'}")
        for name in ("kerr", "kerr_newman"):
            r = next((x for x in rows if x["entry"] == name), None)
            if r:
                print(f"{name}: {r['display']['equations']} displayed equations, {r['display']['lines']} lines, "
                      f"total width {r['display']['width']} units")
    if args.json:
        args.json.write_text(json.dumps(rows, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
