"""Benchmark of the bulk library build: cold cache against warm cache, measured in the same run.

Run by hand (not part of the test suite):

    python bench/bench_library.py [--jobs 2] [--folder metrics_yaml] [--formats tex,md] [--no-figures]

Copies texgen, its templates and the library to a scratch folder (the working
tree may change meanwhile), builds every entry into a scratch folder with ``--jobs`` worker
processes and an empty cache in a scratch folder (cold), then again with the
cache the first run filled (warm), as ``texgen build FOLDER`` does (figures drawn,
and kept in the cache, unless ``--no-figures``), and prints both wall times, the per-entry
figures of the cold run and the ratio.  Target: warm at least 20x faster than cold.
"""
from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
# The working tree is shared and edited while this runs: build from a snapshot of the
# package, templates and library, so that both runs use the same code (the cache key
# holds a digest of texgen's sources, and an edit in between would turn hits into misses).
SNAPSHOT = Path(tempfile.mkdtemp(prefix="texgen-bench-src-"))
for part in ("texgen", "templates", "metrics_yaml"):
    shutil.copytree(ROOT / part, SNAPSHOT / part, ignore=shutil.ignore_patterns("__pycache__"))
sys.path.insert(0, str(SNAPSHOT))

from texgen.api import BuildOptions  # noqa: E402
from texgen.library.cache import ResultCache  # noqa: E402
from texgen.library.build import build_library  # noqa: E402

TARGET = 20.0


def run(folder: Path, out: Path, cache: ResultCache, jobs: int, formats: tuple[str, ...], figures: bool):
    start = time.perf_counter()
    result = build_library([folder], out, formats=formats, jobs=jobs, cache=cache,
                           options=BuildOptions(figures=figures))
    return result, time.perf_counter() - start


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--folder", default=str(SNAPSHOT / "metrics_yaml"))
    ap.add_argument("--formats", default="tex,md,json")
    ap.add_argument("--no-figures", action="store_true", help="reports only, as build --no-figures")
    args = ap.parse_args(argv)
    formats = tuple(args.formats.split(","))
    with tempfile.TemporaryDirectory(prefix="texgen-bench-") as tmp:
        cache = ResultCache(Path(tmp) / "cache")
        figures = not args.no_figures
        cold, t_cold = run(Path(args.folder), Path(tmp) / "cold", cache, args.jobs, formats, figures)
        warm, t_warm = run(Path(args.folder), Path(tmp) / "warm", cache, args.jobs, formats, figures)
        drawn = sum(len(e.get("figures") or []) for e in warm.entries)
        info = cache.info()
    print(f"library: {args.folder}: {len(cold.entries)} entries, formats {','.join(formats)}, jobs {args.jobs}, "
          f"figures {'off' if args.no_figures else 'on'}")
    print(f"{'entry':<46}{'cold s':>9}  status")
    for e in sorted(cold.entries, key=lambda e: -e["seconds"]):
        print(f"{e['id']:<46}{e['seconds']:>9.2f}  {'failed: ' + e['error'][:60] if e['error'] else e['claims']}")
    hits = sum(1 for e in warm.entries if e["cached"])
    misses = [e["id"] for e in warm.entries if not e["cached"]]
    if misses:
        print("warm misses (recomputed): " + ", ".join(misses))
    print(f"cold cache: {t_cold:8.2f} s  ({cold.failed} failed)")
    print(f"warm cache: {t_warm:8.2f} s  ({hits}/{len(warm.entries)} entries from the cache, {warm.failed} failed)")
    print(f"cache: {info.entries} entries, {info.figures} figure files, {info.bytes / 1024:.0f} KiB; "
          f"figure files in the warm build: {drawn}")
    ratio = t_cold / t_warm if t_warm > 0 else float("inf")
    print(f"ratio cold/warm: {ratio:.1f}x (target >= {TARGET:.0f}x: {'met' if ratio >= TARGET else 'NOT met'})")
    shutil.rmtree(SNAPSHOT, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
