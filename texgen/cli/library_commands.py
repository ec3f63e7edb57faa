"""The ``library``, ``diff`` and ``cache`` subcommands: argument definitions and their calls into the library API.

Exit codes: ``library`` 0, or 2 when ``--check`` finds any problem; ``diff`` 0 when
the physics is the same (prose may differ), 1 when it changed (as diff(1) does
for differing files), 2 for bad input; ``cache`` 0.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from .. import api
from ..errors import ConfigError


def register(sub) -> None:
    """Add ``library``, ``diff`` and ``cache`` to the subparsers ``sub``."""
    p = sub.add_parser("library", help="list the spacetime library, or check it",
                       description="List the entries of a library folder (default: the shipped library). "
                                   "With --check: validate every entry, check relations, versions, changelogs "
                                   "and recorded physics hashes; exit 2 on any problem.")
    p.add_argument("folder", nargs="?", metavar="FOLDER", help="library folder (default: the shipped library)")
    p.add_argument("--check", action="store_true", help="validate entries, relations, versions and hashes")
    p.add_argument("--record", action="store_true",
                   help="write FOLDER/VERSIONS.json with every entry's version and physics hash")
    p.add_argument("--cache-dir", metavar="DIR",
                   help="cache folder to read claim verdicts of earlier builds from (default: $XDG_CACHE_HOME/texgen)")
    p.set_defaults(run=cmd_library)

    p = sub.add_parser("diff", help="what changed between two versions of a spacetime file",
                       description="Compare two versions of a definition: changed keys, metric components and "
                                   "every derived component and invariant (difference in canonical form). "
                                   "Exit 0 if the physics is the same, 1 if it changed, 2 for bad input.")
    p.add_argument("files", nargs="+", metavar="FILE", help="OLD.yaml NEW.yaml, or one FILE with two --rev")
    p.add_argument("--rev", action="append", metavar="REV", help="git revision of FILE (give two)")
    p.add_argument("--no-cache", action="store_true", help="derive both versions afresh")
    p.add_argument("--cache-dir", metavar="DIR", help="cache folder (default: $XDG_CACHE_HOME/texgen)")
    p.set_defaults(run=cmd_diff)

    p = sub.add_parser("cache", help="show or clear the cache of derived results",
                       description="The cache of derived results: 'info' prints where it is and its size, "
                                   "'clear' removes its entries and the figure files kept for reports.")
    p.add_argument("action", choices=("info", "clear"))
    p.add_argument("--cache-dir", metavar="DIR", help="cache folder (default: $XDG_CACHE_HOME/texgen)")
    p.set_defaults(run=cmd_cache)


def _cache(args):
    if getattr(args, "no_cache", False):
        return None
    return api.ResultCache.at(args.cache_dir)


def cmd_library(args: argparse.Namespace) -> int:
    folder = Path(args.folder) if args.folder else api.library_dir()
    if not folder.is_dir():
        raise ConfigError(f"Expected a library folder but received: '{folder}'")
    if args.record:
        entries, errors = api.load_entries([folder])
        for e in errors:
            print(f"error: {e.format_message()}", file=sys.stderr)
        if errors:
            return 2
        target = folder / api.RECORD_FILE
        api.write_atomic(target, api.dump_json(api.version_record(entries.values(), root=folder)))
        print(f"wrote {target} ({len(entries)} entries)")
        return 0
    if args.check:
        result = api.check_library(folder)
        for r in result.relations:
            if r.holds:
                print(f"ok: {r.id}: {r.kind} {r.other} ({r.method})")
        for msg in result.problems:
            print(f"error: {msg}", file=sys.stderr)
        print(f"{result.entries} entries, {len(result.relations)} relations, {len(result.problems)} problem(s)")
        return 0 if result.ok else 2
    rows, errors = api.list_entries([folder], cache=_cache(args))  # verdicts of earlier builds
    head = ("ID", "VERSION", "DIM", "FAMILY", "CLAIMS", "TITLE")
    table = [(r.id, r.version, str(r.dimension), r.family or "-", r.claims, r.title) for r in rows]
    widths = [max(len(x[i]) for x in table + [head]) for i in range(5)]
    fmt = "  ".join(f"{{:<{w}}}" for w in widths) + "  {}"
    for line in [head, *table]:
        print(fmt.format(*line).rstrip())
    for e in errors:
        print(f"error: {e.format_message()}", file=sys.stderr)
    return 2 if errors else 0


def cmd_diff(args: argparse.Namespace) -> int:
    revs = args.rev or []
    if revs:
        if len(args.files) != 1 or len(revs) != 2:
            raise ConfigError("Expected one FILE with two --rev but received: "
                              f"{len(args.files)} file(s) and {len(revs)} revision(s)")
        path = args.files[0]
        old = api.load_spacetime_text(api.git_revision_text(path, revs[0]), f"{path}@{revs[0]}")
        new = api.load_spacetime_text(api.git_revision_text(path, revs[1]), f"{path}@{revs[1]}")
    else:
        if len(args.files) != 2:
            raise ConfigError(f"Expected OLD.yaml NEW.yaml but received {len(args.files)} file(s)")
        old, new = (api.load_spacetime(p) for p in args.files)
    d = api.diff_models(old, new, cache=_cache(args))
    print(f"{old.source} ({d.old_version}) -> {new.source} ({d.new_version})")
    print("physics: " + ("changed" if d.physics_changed else "unchanged")
          + f" ({d.old_hash[:12]} -> {d.new_hash[:12]})")
    if d.definition:
        print("definition: " + ", ".join(d.definition))
    if not d.comparable:
        print("components: not compared (the coordinates differ)")
    current = None
    for c in d.components:
        if c.quantity != current:
            current = c.quantity
            print(f"{current}:")
        label = f"[{c.key}]" if c.key else ""
        print(f"  {label} new - old = {c.difference}".replace("   new", "  new"))
    if d.comparable and not d.components:
        print("components: no metric or derived component differs")
    return 1 if d.physics_changed else 0


def cmd_cache(args: argparse.Namespace) -> int:
    cache = _cache(args)
    if args.action == "clear":
        figures = cache.info().figures
        entries = cache.clear()
        also = f" and {figures} figure files" if figures else ""
        print(f"removed {entries} entries{also} from {cache.root}")
        return 0
    info = cache.info()
    also = f", {info.figures} figure files" if info.figures else ""
    print(f"{info.path}: {info.entries} entries{also}, {info.bytes / 1024:.1f} KiB")
    return 0
