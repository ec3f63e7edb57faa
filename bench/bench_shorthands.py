"""Benchmark of the report's shorthands: omitted results and display lines without and with them.

Run by hand (not part of the test suite):

    python bench/bench_shorthands.py [--skip-slow] [FILE ...]

For Kerr-Newman with its definitions removed (Sigma and Delta written out, a temporary
copy) and for every entry of the library as it is, builds the report context twice
from one derivation, with ``shorthands=False`` (the baseline) and ``shorthands=True``,
and prints per entry: results omitted as too long, display lines of all results, the
number of shorthands introduced, the ratio of lines and the seconds each context took.
``--skip-slow`` leaves out the warp drive entries (about two minutes each).
"""
from __future__ import annotations

import argparse
import re
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from texgen import api  # noqa: E402
from texgen.output.context import build_context  # noqa: E402
from texgen.output.printer import ReportOptions  # noqa: E402

KERR_NEWMAN = ROOT / "metrics_yaml" / "kerr" / "kerr_newman.yaml"
SLOW = ("warp",)


def kerr_newman_without_definitions() -> str:
    """The Kerr-Newman file with Sigma and Delta written out where they are used."""
    text = KERR_NEWMAN.read_text()
    text = re.sub(r"definitions:\n(  .*\n)+", "", text)
    text = text.replace("Sigma", "(r^2 + a^2*cos(theta)^2)").replace("Delta", "(r^2 - 2*M*r + a^2 + Q^2)")
    return text.replace("id: kerr-newman", "id: kerr-newman-no-definitions")


def displayed(ctx: dict) -> list[dict]:
    """Every result equation of a context (not the definitions or the shorthands themselves)."""
    out = []
    for key, value in ctx.items():
        if key in ("definitions", "shorthands", "line_element"):
            continue
        items = value if isinstance(value, list) else [value]
        out += [e for e in items if isinstance(e, dict) and "lines" in e and "omitted" in e]
    return out


def measure(st) -> dict:
    cv = api.derive(st)
    row = {}
    shown = {}
    for on in (False, True):
        start = time.perf_counter()
        ctx = build_context(st, cv, ReportOptions(shorthands=on))
        seconds = time.perf_counter() - start
        eqs = displayed(ctx)
        row[on] = {"omitted": sum(1 for e in eqs if e["omitted"]), "lines": sum(len(e["lines"]) for e in eqs),
                   "names": len(ctx["shorthands"]), "name_lines": sum(len(s["lines"]) for s in ctx["shorthands"]),
                   "seconds": seconds, "results": len(eqs)}
        shown[on] = eqs
    # lines of the results both runs typeset: the like-for-like comparison
    both = [(a, b) for a, b in zip(shown[False], shown[True]) if not a["omitted"] and not b["omitted"]]
    for on in (False, True):
        row[on]["common"] = sum(len(pair[on]["lines"]) for pair in both)
    return row


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("files", nargs="*", help="spacetime files (default: the whole library)")
    ap.add_argument("--skip-slow", action="store_true", help="leave out the warp drive entries")
    args = ap.parse_args(argv)
    cases = []
    if not args.files:
        cases.append(("kerr_newman (no definitions)",
                      api.load_spacetime_text(kerr_newman_without_definitions(), "/tmp/kerr_newman_nodef.yaml")))
    files = [Path(f) for f in args.files] or api.spacetime_files([api.library_dir()])
    for f in files:
        if args.skip_slow and any(part in SLOW for part in f.parts):
            continue
        cases.append((f.stem, api.load_spacetime(f)))
    head = (f"{'entry':32} {'results':>7} {'omitted':>9} {'lines':>11} {'in both':>11} {'ratio':>6} {'names':>5} "
            f"{'name lines':>10} {'s off':>6} {'s on':>6}")
    print(head)
    print("-" * len(head))
    total = {False: [0, 0, 0.0, 0], True: [0, 0, 0.0, 0]}
    for name, st in cases:
        row = measure(st)
        off, on = row[False], row[True]
        for k in (False, True):
            total[k][0] += row[k]["omitted"]
            total[k][1] += row[k]["lines"] + row[k]["name_lines"]
            total[k][2] += row[k]["seconds"]
            total[k][3] += row[k]["common"]
        ratio = on["common"] / off["common"] if off["common"] else 1.0
        print(f"{name[:32]:32} {off['results']:7d} {off['omitted']:4d}>{on['omitted']:<4d} "
              f"{off['lines']:5d}>{on['lines']:<5d} {off['common']:5d}>{on['common']:<5d} {ratio:6.2f} {on['names']:5d} {on['name_lines']:10d} "
              f"{off['seconds']:6.1f} {on['seconds']:6.1f}", flush=True)
    print("-" * len(head))
    print(f"{'total':32} {'':7} {total[False][0]:4d}>{total[True][0]:<4d} "
          f"{total[False][1]:5d}>{total[True][1]:<5d} {total[False][3]:5d}>{total[True][3]:<5d} "
          f"{total[True][3] / max(total[False][3], 1):6.2f} "
          f"{'':5} {'':10} {total[False][2]:6.1f} {total[True][2]:6.1f}")
    print("lines: display lines of all results (the total adds the shorthand list's own lines); in both: lines "
          "of the results typeset with and without shorthands, ratio on/off of these; omitted: results left to the "
          "JSON report")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
