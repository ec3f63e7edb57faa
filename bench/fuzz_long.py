"""Long fuzzing run of the YAML loader, validator and claim reader, by hand (not part of the suite).

    python bench/fuzz_long.py [--seconds 600] [--seed 1] [--max-rounds 8] [--json OUT]

Each input is a library file under metrics_yaml/ mutated by ``random.Random(seed)``
(byte, line and key/value mutations, see tests/fuzz/mutate.py), so every failure is
replayed from its (file, seed, rounds) triple:

    python -c "import sys; sys.path.insert(0, 'tests'); from fuzz.mutate import *; \\
               print(run_target(mutant('kerr/kerr.yaml', 123, 4)))"

A failure is any exception that is not one of texgen's own errors, or an input that
takes longer than the hang bound (stopped by an alarm). Failures are grouped by
exception class and the innermost texgen frame. The run prints inputs tried, the
outcomes (accepted / each texgen error class), the distinct failures with one replay
triple each, and the slowest inputs; the exit code is 1 if anything failed.
"""
from __future__ import annotations

import argparse
import collections
import json
import sys
import time
import traceback
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]  # a checkout: texgen and the shared harness

from fuzz.mutate import SEEDS, Hang, mutant, run_target  # noqa: E402


def _signature(exc: BaseException) -> str:
    """Exception class plus the innermost frame inside texgen (else the innermost frame)."""
    frames = traceback.extract_tb(exc.__traceback__)
    ours = [f for f in frames if "/texgen/" in f.filename.replace("\\", "/") or "/fuzz/" in f.filename]
    f = (ours or frames or [None])[-1]
    where = f"{Path(f.filename).name}:{f.lineno} in {f.name}" if f else "?"
    return f"{type(exc).__name__} at {where}"


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seconds", type=float, default=600.0, help="how long to run (default 600)")
    ap.add_argument("--seed", type=int, default=1, help="first seed (default 1); seeds run upwards")
    ap.add_argument("--max-rounds", type=int, default=8, help="mutations per input: 1..N (default 8)")
    ap.add_argument("--hang", type=float, default=10.0, help="seconds after which an input is a hang (default 10)")
    ap.add_argument("--json", metavar="OUT", help="also write the summary as JSON")
    args = ap.parse_args(argv)

    names = sorted(SEEDS)
    outcomes: collections.Counter[str] = collections.Counter()
    failures: dict[str, dict] = {}
    slowest: list[tuple[float, str, int, int]] = []
    tried = 0
    seed = args.seed
    start = time.perf_counter()
    while time.perf_counter() - start < args.seconds:
        name = names[seed % len(names)]
        rounds = 1 + (seed // len(names)) % args.max_rounds
        try:
            data = mutant(name, seed, rounds)
        except Exception as exc:  # noqa: BLE001 - a defect of the harness, not of texgen: report, go on
            outcomes["HARNESS"] += 1
            failures.setdefault(f"harness: {_signature(exc)}", {"count": 0, "replay": [name, seed, rounds],
                                "message": f"{type(exc).__name__}: {exc}"[:300]})["count"] += 1
            seed += 1
            continue
        try:
            out = run_target(data, source=f"{name}#{seed}", hang_seconds=args.hang)
            outcomes[out.result] += 1
            slowest = sorted(slowest + [(out.seconds, name, seed, rounds)], reverse=True)[:5]
        except Hang:
            outcomes["HANG"] += 1
            sig = f"hang over {args.hang:g} s"
            failures.setdefault(sig, {"count": 0, "replay": [name, seed, rounds]})["count"] += 1
        except Exception as exc:  # noqa: BLE001 - finding these is the point
            outcomes["FAILURE"] += 1
            sig = _signature(exc)
            entry = failures.setdefault(sig, {"count": 0, "replay": [name, seed, rounds],
                                              "message": f"{type(exc).__name__}: {exc}"[:300]})
            entry["count"] += 1
        tried += 1
        seed += 1
    elapsed = time.perf_counter() - start

    print(f"inputs tried: {tried} in {elapsed:.0f} s ({tried / elapsed:.1f}/s), seeds {args.seed}..{seed - 1}, "
          f"{len(names)} library files, 1..{args.max_rounds} mutations each")
    for result, count in sorted(outcomes.items(), key=lambda kv: -kv[1]):
        print(f"  {result:<14} {count:>8}  ({100 * count / tried:.1f} %)")
    print(f"distinct failures: {len(failures)}")
    for sig, entry in sorted(failures.items(), key=lambda kv: -kv[1]["count"]):
        print(f"  {entry['count']:>6} x {sig}; replay: mutant{tuple(entry['replay'])}")
        if "message" in entry:
            print(f"           {entry['message']}")
    print("slowest inputs: " + ", ".join(f"{s:.2f} s (mutant{(n, sd, r)})" for s, n, sd, r in slowest))
    if args.json:
        Path(args.json).write_text(json.dumps({
            "tried": tried, "seconds": round(elapsed, 1), "first_seed": args.seed, "last_seed": seed - 1,
            "outcomes": dict(outcomes), "failures": failures,
            "slowest": [[round(s, 3), n, sd, r] for s, n, sd, r in slowest]}, indent=2) + "\n", encoding="utf-8")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
