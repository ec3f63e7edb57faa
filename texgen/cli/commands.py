"""Subcommands beyond ``validate``: argument definitions and their calls into the API."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

from .. import api
from ..errors import BudgetExceeded, ConfigError, TexgenError


def register(sub) -> None:
    """Add the ``build``, ``demo`` and ``check`` subcommands to the parser ``sub``."""
    p = sub.add_parser("build", help="derive curvature and write a report",
                       description="Derive everything and write a LaTeX, Markdown or JSON report. "
                                   "With several files or a folder, OUT is a folder and each entry gets "
                                   "its own report named by its id.")
    p.add_argument("files", nargs="+", metavar="FILE", help="spacetime files or folders")
    p.add_argument("-o", "--output", metavar="OUT", required=True,
                   help="report file (.tex, .md, .json) or, for several inputs, a folder")
    _report_options(p)
    p.add_argument("--budget", type=_positive(float), metavar="SECONDS",
                   help="wall seconds allowed to each derivation stage; what goes over is listed as not computed")
    p.add_argument("--max-terms", type=_positive(int), metavar="N",
                   help="largest number of terms allowed in one component")
    p.add_argument("--jobs", type=_positive(int), metavar="N", default=1,
                   help="worker processes for the Riemann, Weyl and invariant stages (default 1)")
    p.set_defaults(run=cmd_build)

    p = sub.add_parser("demo", help="build the report of the embedded demo spacetime",
                       description="Build the LaTeX, Markdown and JSON reports of the embedded demo spacetime "
                                   "(an invented 'veiled' black hole) and, if pdflatex is installed, the PDF.")
    p.add_argument("-o", "--output", metavar="DIR", default="texgen-demo", help="folder to write into")
    p.add_argument("--no-pdf", action="store_true", help="do not run pdflatex")
    p.add_argument("--force", action="store_true", help="overwrite files texgen did not write")
    p.set_defaults(run=cmd_demo)

    p = sub.add_parser("check", help="decide the claims written in spacetime files",
                       description="Decide every claim; exit 0 if all hold, 1 if any fails, 2 for bad input.")
    p.add_argument("files", nargs="+", metavar="FILE", help="spacetime files or folders")
    p.add_argument("--json", metavar="OUT", help="also write the verdicts as JSON (for CI)")
    p.add_argument("-q", "--quiet", action="store_true", help="print only failing claims and errors")
    p.set_defaults(run=cmd_check)


def _report_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("-f", "--format", choices=("tex", "md", "json"), action="append",
                   help="report format (default: from the extension of OUT; for a folder: tex); repeatable")
    p.add_argument("--fragment", action="store_true",
                   help="LaTeX without preamble, for \\input{} into a paper")
    p.add_argument("--section-level", choices=("chapter", "section", "subsection"), default="section",
                   help="heading level of the report's title (default: section)")
    p.add_argument("--template", metavar="DIR", help="folder with your own templates (run sandboxed)")
    p.add_argument("--force", action="store_true", help="overwrite files texgen did not write")
    p.add_argument("--no-figures", action="store_true", help="do not draw figures next to the report")
    p.add_argument("--no-shorthands", action="store_true",
                   help="print results in full, without short names for repeated sub-expressions")
    p.add_argument("-q", "--quiet", action="store_true", help="print only errors")
    p.add_argument("--strict", action="store_true", help="exit 1 (after writing) when a claim fails")
    p.add_argument("--no-cache", action="store_true",
                   help="for a folder: compute everything again instead of using cached results")


_LEVELS = {"chapter": 0, "section": 1, "subsection": 2}


def _positive(kind):
    def parse(text: str):
        try:
            value = kind(text)
        except ValueError:
            value = None
        if value is None or not value > 0:
            raise argparse.ArgumentTypeError(f"Expected a positive number but received: '{text}'")
        return value

    parse.__name__ = kind.__name__  # argparse names the type in its messages
    return parse


def _derive_options(args: argparse.Namespace, path) -> dict:
    """Keyword arguments for ``api.derive`` from build's budget, jobs and progress options."""
    from .progress import ProgressBar

    kw: dict = {}
    seconds, terms = getattr(args, "budget", None), getattr(args, "max_terms", None)
    if seconds is not None or terms is not None:
        kw["budget"] = api.Budget(seconds=seconds, max_terms=terms)
    if getattr(args, "jobs", 1) != 1:
        kw["jobs"] = args.jobs
    bar = ProgressBar(sys.stderr, enabled=not args.quiet, label=str(path))
    if bar.active:
        kw["progress"] = bar
    return kw


def cmd_build(args: argparse.Namespace) -> int:
    files = api.spacetime_files(args.files)
    if not files:
        raise ConfigError("No spacetime files found in " + ", ".join(args.files))
    out = Path(args.output)
    if any(Path(f).is_dir() for f in args.files):
        return _build_folder(args, out)
    many = len(files) > 1 or (out.exists() and out.is_dir())
    formats = args.format or ([None] if not many else ["tex"])
    failed = claims_failed = 0
    for path in files:
        try:
            model = api.load_spacetime(path)
            kw = _derive_options(args, path)
            try:
                cv = api.derive(model, **kw)
            finally:
                if "progress" in kw:
                    kw["progress"].close()
            writer = api.ReportWriter(model, cv)  # the formats share one drawing of the figures
            for fmt in formats:
                target = out / f"{model.id}.{fmt}" if many else out
                if not many and fmt is not None and len(formats) > 1:
                    target = out.with_suffix("." + fmt)
                opts = api.BuildOptions(fmt=fmt, standalone=not args.fragment,
                                        section_level=_LEVELS[args.section_level],
                                        template_dir=args.template, force=args.force,
                                        figures=not args.no_figures, shorthands=not args.no_shorthands)
                try:
                    written = writer.write(target, opts)
                finally:
                    if "progress" in kw:
                        kw["progress"].close()
                if not args.quiet:
                    print(f"{path}: wrote {written}")
            try:
                claims_failed += _warn_failed_claims(path, model, cv)
            except BudgetExceeded as exc:
                print(f"warning: {path}: claims not decided: {exc.message}", file=sys.stderr)
            for exc in getattr(cv, "budget_failures", ()):
                print(f"warning: {path}: not computed: {exc.message}", file=sys.stderr)
            for lost in getattr(cv, "lost_workers", ()):
                print(f"warning: {path}: {lost}", file=sys.stderr)
        except TexgenError as exc:
            if not many:
                raise
            failed += 1
            print(f"error: {exc.format_message()}", file=sys.stderr)
    return 2 if failed else 1 if claims_failed and getattr(args, "strict", False) else 0


def _build_folder(args: argparse.Namespace, out: Path) -> int:
    """A library build: every entry in parallel workers, from the cache where possible, with index pages."""
    from .progress import ProgressBar

    bar = ProgressBar(enabled=not args.quiet, label="entries")

    def progress(done, total, entry, stage):
        # Entries done out of all, and the stage of the entry at work (in-process builds).
        bar(f"{entry}: {stage}", done, total)

    opts = api.BuildOptions(standalone=not args.fragment, section_level=_LEVELS[args.section_level],
                            template_dir=args.template, force=args.force, figures=not args.no_figures,
                            shorthands=not args.no_shorthands)
    try:
        result = api.build_library(args.files, out, formats=tuple(args.format or ("tex",)), jobs=args.jobs,
                               cache=None if args.no_cache else api.ResultCache.at(None), progress=progress,
                               options=opts)
    finally:
        bar.close()
    for n in result.reruns:
        print(f"warning: a worker process died; {n} unfinished entries built again", file=sys.stderr)
    for entry in result.entries:
        if entry.get("error"):
            print(f"error: {entry['error']}", file=sys.stderr)
    if not args.quiet:
        print(f"built {len(result.entries) - result.failed} of {len(result.entries)} entries into {out} "
              f"in {result.seconds:.1f} s; index: {', '.join(str(p) for p in result.index)}")
    return 2 if result.failed else 0


def _warn_failed_claims(path, model, cv) -> int:
    """Warn on stderr about claims that do not hold; the report has been written regardless."""
    if cv is None:  # no derivation was made (a stand-in API), so there is nothing to decide
        return 0
    bad = [r.claim.label for r in api.decide_claims(model, cv) if not r.holds]
    src = api.check_source(model, cv)
    if src is not None and not src.holds:
        bad.append(f"source ({src.type})")
    if bad:
        print(f"warning: {path}: {len(bad)} claim(s) do not hold: {', '.join(bad)}", file=sys.stderr)
    return len(bad)


def _check_rows(path, model, cv) -> tuple[list[tuple[str, str, str, str, str]], bool]:
    rows = []
    ok = True
    for r in api.decide_claims(model, cv):
        detail = r.message
        if r.witness is not None:
            point = ", ".join(f"{k} = {v}" for k, v in r.witness.point)
            detail = f"claimed {r.witness.claimed}, derived {r.witness.derived} at {point}"
        elif r.status == "fails" and r.difference is not None:
            detail = "claimed - derived = " + api.expression_to_text(r.difference)
        rows.append((str(path), r.claim.label, r.status, r.method, detail))
        ok = ok and r.holds
    src = api.check_source(model, cv)
    if src is not None:
        detail = ""
        if not src.holds:
            names = [c.name for c in model.coordinates]
            detail = "; ".join(f"E[{names[a]},{names[b]}] = {api.expression_to_text(v)}" for (a, b), v in src.residual)
            detail += "".join(f"; {nm}[{','.join(names[i] for i in k)}] = {api.expression_to_text(v)}"
                              for nm, k, v in src.extra)
        rows.append((str(path), f"source ({src.type})", src.status, src.method, detail.strip("; ")))
        ok = ok and src.holds
    return rows, ok


def cmd_check(args: argparse.Namespace) -> int:
    files = api.spacetime_files(args.files)
    if not files:
        raise ConfigError("No spacetime files found in " + ", ".join(args.files))
    rows: list[tuple[str, str, str, str, str]] = []
    report: list[dict] = []
    bad_input = failed = False
    for path in files:
        entry: dict = {"file": str(path)}
        try:
            model = api.load_spacetime(path)
            cv = api.derive(model)
            file_rows, ok = _check_rows(path, model, cv)
            entry.update({"id": model.id, "holds": ok})
            entry.update(api.claim_results(model, cv))
        except TexgenError as exc:
            print(f"error: {exc.format_message()}", file=sys.stderr)
            bad_input = True
            entry["error"] = exc.format_message()
            report.append(entry)
            continue
        failed = failed or not ok
        rows.extend(r for r in file_rows if not args.quiet or r[2] not in ("proved", "agrees_numerically"))
        if not file_rows and not args.quiet:
            rows.append((str(path), "-", "no claims", "", ""))
        report.append(entry)
    if rows:
        head = ("FILE", "CLAIM", "VERDICT", "HOW")
        widths = [max(len(r[i]) for r in rows + [head]) for i in range(3)]
        fmt = "  ".join(f"{{:<{w}}}" for w in widths) + "  {}"
        print(fmt.format(*head))
        for r in rows:
            print(fmt.format(*r[:4]).rstrip())
            if r[4] and r[2] not in ("proved", "agrees_numerically"):
                print(" " * (widths[0] + 2) + "  " + r[4])
    code = 2 if bad_input else 1 if failed else 0
    if args.json:
        data = {"generator": "texgen", "command": "check", "exit_code": code, "files": report}
        api.write_atomic(args.json, api.dump_json(data))
    return code


def cmd_demo(args: argparse.Namespace) -> int:
    src = api.library_dir() / api.DEMO_FILE
    model = api.load_spacetime(src)
    writer = api.ReportWriter(model, api.derive(model))
    out = Path(args.output)
    for fmt in ("tex", "md", "json"):
        target = out / f"{model.id}.{fmt}"
        writer.write(target, api.BuildOptions(fmt=fmt, force=args.force))
        print(f"wrote {target}")
    if not args.no_pdf:
        try:
            pdf = api.compile_pdf(out / f"{model.id}.tex")
            print(f"wrote {pdf}")
        except TexgenError as exc:
            print(f"note: no PDF: {exc.format_message()}", file=sys.stderr)
    return 0


def _not_ready(args: argparse.Namespace) -> int:
    raise TexgenError(f"'texgen {args.command}' is not available in this version")
