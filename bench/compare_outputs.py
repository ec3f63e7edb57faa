"""Byte-for-byte comparison of everything texgen writes for the shipped library.

Run by hand, before and after a change that must not change behaviour (a move of
modules, a refactoring):

    python bench/compare_outputs.py snapshot OUT_DIR     # build everything into OUT_DIR
    python bench/compare_outputs.py compare OLD_DIR NEW_DIR

``snapshot`` runs the installed ``texgen`` command (the one beside this Python) from
the repository root with an empty cache: the folder build of the library (LaTeX,
Markdown and JSON with figures, two workers), single-file builds of every entry in
all three formats and as a fragment, ``check --json``, ``demo`` without the PDF, and
the printed output of ``validate``, ``library`` and ``check``.  It records the
SHA-256 of every file written and of each command's standard output, error stream
and exit code in ``OUT_DIR/manifest.json``.  ``compare`` lists every difference and
exits 1 when there is one.
"""
from __future__ import annotations

import argparse
import hashlib
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
TEXGEN = str(Path(sys.executable).with_name("texgen"))


def _digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _run(name: str, argv: list[str], env: dict, record: dict, out: Path) -> None:
    start = time.perf_counter()
    proc = subprocess.run([TEXGEN, *argv], cwd=ROOT, env=env, capture_output=True)
    # the output folder differs between the two snapshots: printed paths are compared without it
    here = str(out).encode()
    record[f"cmd:{name}"] = {"exit": proc.returncode, "stdout": _digest(proc.stdout.replace(here, b"OUT")),
                             "stderr": _digest(proc.stderr.replace(here, b"OUT"))}
    print(f"  {name}: exit {proc.returncode}, {time.perf_counter() - start:.1f} s", flush=True)


def snapshot(out: Path) -> int:
    if out.exists():
        shutil.rmtree(out)
    out.mkdir(parents=True)
    env = dict(os.environ, XDG_CACHE_HOME=tempfile.mkdtemp(prefix="texgen-cmp-cache-"), PYTHONHASHSEED="0")
    record: dict = {}
    lib = "metrics_yaml"
    files = sorted(str(p.relative_to(ROOT)) for p in (ROOT / lib).rglob("*.yaml"))
    _run("validate", ["validate", lib], env, record, out)
    _run("library", ["library", lib], env, record, out)
    _run("check", ["check", lib, "--json", str(out / "check.json")], env, record, out)
    _run("demo", ["demo", "-o", str(out / "demo"), "--no-pdf"], env, record, out)
    _run("folder", ["build", lib, "-o", str(out / "folder"), "-f", "tex", "-f", "md", "-f", "json",
                    "--jobs", "2", "-q"], env, record, out)
    for f in files:
        stem = f.replace("/", "__")[: -len(".yaml")]
        single = out / "single"
        single.mkdir(exist_ok=True)
        _run(f"single:{stem}", ["build", f, "-o", str(single / f"{stem}.tex"), "-f", "tex", "-f", "md",
                                "-f", "json", "-q"], env, record, out)
        _run(f"fragment:{stem}", ["build", f, "-o", str(single / f"{stem}-fragment.tex"), "--fragment",
                                  "--section-level", "subsection", "--no-figures", "-q"], env, record, out)
    for path in sorted(out.rglob("*")):
        if path.is_file() and path.name != "manifest.json":
            record[f"file:{path.relative_to(out)}"] = _digest(path.read_bytes())
    (out / "manifest.json").write_text(json.dumps(record, indent=1, sort_keys=True))
    print(f"{sum(k.startswith('file:') for k in record)} files, "
          f"{sum(k.startswith('cmd:') for k in record)} commands recorded in {out / 'manifest.json'}")
    return 0


def compare(old: Path, new: Path) -> int:
    a = json.loads((old / "manifest.json").read_text())
    b = json.loads((new / "manifest.json").read_text())
    diffs = []
    for key in sorted(set(a) | set(b)):
        if key not in a:
            diffs.append(f"only in {new}: {key}")
        elif key not in b:
            diffs.append(f"only in {old}: {key}")
        elif a[key] != b[key]:
            diffs.append(f"differs: {key}: {a[key]} != {b[key]}")
    for line in diffs:
        print(line)
    print(f"{len(a)} entries against {len(b)}: {len(diffs)} differences")
    return 1 if diffs else 0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    s = sub.add_parser("snapshot")
    s.add_argument("out", type=Path)
    c = sub.add_parser("compare")
    c.add_argument("old", type=Path)
    c.add_argument("new", type=Path)
    args = ap.parse_args(argv)
    return snapshot(args.out) if args.cmd == "snapshot" else compare(args.old, args.new)


if __name__ == "__main__":
    sys.exit(main())
