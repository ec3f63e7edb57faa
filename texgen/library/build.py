"""Bulk builds of a library folder: every entry's reports, from the cache where possible, and index pages.

An entry's report context and JSON results (its *payload*) are plain JSON data,
computed once and kept in the :class:`~texgen.library.cache.ResultCache` with its
figure files; a warm build renders the reports from it without deriving anything.
Entries are built in worker processes (``jobs``) or on any
``concurrent.futures.Executor``, and a worker that dies costs only time.
"""
from __future__ import annotations

import json
import logging
import time
from concurrent.futures import Executor, as_completed
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path
from typing import Any, Callable

from .._version import __version__
from ..engine import derive
from ..engine.parallel import map_in_workers
from ..errors import ConfigError, RenderError, TexgenError
from ..output.context import build_context
from ..output.document import REPORT_TEMPLATES, ReportWriter
from ..output.printer import ExpressionPrinter, ReportOptions
from ..output.render import dump_json, render, write_atomic
from ..output.results import build_results
from ..output.stages import stage_results, stage_sections
from ..spec import load_spacetime, spacetime_files
from ..spec.model import Spacetime
from .cache import entry_key, options_key, wants_figures
from .entries import claims_status

log = logging.getLogger(__name__)

INDEX_TEMPLATES = {"md": "index.md.j2", "tex": "index.tex.j2"}


def _refresh(payload: dict, model: Spacetime) -> dict:
    """Fields that follow the file's bytes, not its content (hash and name), set from the model."""
    name = model.source.rsplit("/", 1)[-1]
    ctx = dict(payload["context"], sha256=model.sha256, source_name=name)
    results = dict(payload["results"])
    results["spacetime"] = dict(results["spacetime"], sha256=model.sha256, source=name)
    out = {"context": ctx, "results": results, "cached": payload.get("cached", False)}
    if "figures" in payload:
        out["figures"] = payload["figures"]
    return out


def _restore_figures(model: Spacetime, payload: dict, cache, folder: Path) -> bool:
    """Copy the cached figure files of ``payload`` into ``folder``; False if one is missing or corrupt."""
    items = payload.get("figures")
    if not isinstance(items, list):
        log.debug("cache entry for %s has no figure list; recomputing", model.id)
        return False
    found = []
    for item in items:
        name, sha = (item.get("file"), item.get("sha256")) if isinstance(item, dict) else (None, None)
        if not isinstance(name, str) or "/" in name or "\\" in name or not isinstance(sha, str):
            log.debug("cache entry for %s names a bad figure file %r; recomputing", model.id, item)
            return False
        data = cache.get_figure(sha, name.rsplit(".", 1)[-1])
        if data is None:
            log.debug("cached figure %s of %s missing or corrupt; recomputing", name, model.id)
            return False
        found.append((folder / name, data))
    for path, data in found:
        try:
            same = path.read_bytes() == data
        except OSError:
            same = False
        if not same:  # identical files are left alone (their times too)
            write_atomic(path, data, own_check=False)
    return True


def _keep_figures(section: dict | None, cache, folder: Path) -> list[dict]:
    """The figure files of a drawn figures section with their SHA-256, kept in ``cache`` when given."""
    import hashlib

    out = []
    for f in (section or {}).get("figures", []):
        for name in (f.get("file_pdf"), f.get("file_png")):
            if not name:
                continue
            data = (folder / name).read_bytes()
            ext = name.rsplit(".", 1)[-1]
            sha = cache.put_figure(data, ext) if cache is not None else hashlib.sha256(data).hexdigest()
            out.append({"file": name, "sha256": sha})
    return out


def entry_payload(model: Spacetime, *, options=None, cache=None, progress: Callable | None = None,
                  keep: list | None = None, figures_dir: str | Path | None = None) -> dict:
    """The report context and results of ``model`` as plain JSON data, from ``cache`` when it has them.

    Parameters
    ----------
    options:
        :class:`texgen.api.BuildOptions` (only ``section_level`` changes the context).
    cache:
        A :class:`texgen.library.cache.ResultCache`, or ``None`` to compute.
    progress:
        ``progress(stage, done, total)`` passed to the curvature engine.
    keep:
        If a list, the Curvature used is appended to it (nothing on a cache hit).
    figures_dir:
        Draw the figures into this folder (``ID-NAME.pdf/.png``, as next to ``ID.tex``) and put
        their section into the context; the payload's ``figures`` lists each file with its
        SHA-256.  On a cache hit the files are copied from the cache; a missing or corrupt one
        makes the hit a miss.  ``None``: no figures (and a cache entry of its own).
    """
    key = entry_key(model, options_key(options, figures=figures_dir is not None))
    if cache is not None:
        hit = cache.get(key)
        if hit is not None and (figures_dir is None or _restore_figures(model, hit, cache, Path(figures_dir))):
            return _refresh(dict(hit, cached=True), model)
    cv = derive(model, progress=progress)
    if keep is not None:
        keep.append(cv)
    ropts = ReportOptions(section_level=getattr(options, "section_level", 1),
                          shorthands=getattr(options, "shorthands", True))
    results = build_results(model, cv, stage_results(model, cv))
    sections = stage_sections(model, cv, ExpressionPrinter(model, ropts))
    drawn: dict = {}
    if figures_dir is not None:
        # the same drawing and section as a single-file build of ID.tex into figures_dir
        section, missing = ReportWriter(model, cv).figures(Path(figures_dir) / f"{model.id}.tex")
        if section:
            sections.append(section)
        drawn = {"figures": _keep_figures(section, cache, Path(figures_dir))}
    ctx = build_context(model, cv, ropts, extra_sections=sections)
    if figures_dir is not None:
        ctx["missing"].extend(missing)
    try:
        # the JSON round trip is what a cache hit returns: cold and warm builds render the same data
        payload = json.loads(json.dumps({"context": ctx, "results": results, **drawn}, ensure_ascii=False))
    except (TypeError, ValueError) as exc:
        raise TexgenError(f"{model.source}: the report data is not plain data: {exc}") from None
    if cache is not None:
        try:
            cache.put(key, payload)
        except OSError as exc:
            log.debug("cache entry for %s not written: %s", model.id, exc)
    return dict(payload, cached=False)


def entry_results(model: Spacetime, *, cache=None, keep: list | None = None) -> dict:
    """The JSON results of ``model`` (what ``texgen build -f json`` writes), cached."""
    return entry_payload(model, cache=cache, keep=keep)["results"]


def render_payload(payload: dict, fmt: str, options=None) -> str:
    """A report in ``fmt`` from a payload of :func:`entry_payload` (no derivation)."""
    if fmt == "json":
        return dump_json(payload["results"])
    template = REPORT_TEMPLATES.get(fmt)
    if template is None:
        raise RenderError(f"Expected one of: 'tex', 'md', 'json' but received: '{fmt}'")
    ctx = dict(payload["context"], standalone=getattr(options, "standalone", True))
    return render(template, ctx, getattr(options, "template_dir", None))


def _edges(model: Spacetime) -> list[dict]:
    section = model.section("relations")
    out = []
    for rel in section.data if section and isinstance(section.data, list) else []:
        if not isinstance(rel, dict):
            continue
        if "limit_of" in rel:
            detail = ", ".join(f"{k} = {v}" for k, v in (rel.get("set") or {}).items())
            out.append({"from": model.id, "kind": "limit_of", "to": str(rel["limit_of"]), "detail": detail})
        elif "same_as" in rel:
            out.append({"from": model.id, "kind": "same_as", "to": str(rel["same_as"]), "detail": "coordinate map"})
    return out


def _blank_entry(path: str) -> dict[str, Any]:
    """The summary of an entry before anything is known of it but its file."""
    return {"file": str(path), "id": Path(path).stem, "title": "", "version": "", "dimension": 0, "family": "",
            "reports": {}, "claims": "", "relations": [], "error": None, "cached": False, "figures": [],
            "seconds": 0.0}


def _failed_entry(path: str, reason: str) -> dict:
    """The summary of an entry whose worker could not return one."""
    return dict(_blank_entry(path), error=f"{path}: {reason}")


def build_entry(path: str, outdir: str, formats: tuple[str, ...], cache=None, options=None,
                progress: Callable | None = None) -> dict:
    """Build the reports of one file into ``outdir``; returns a plain summary (never raises TexgenError)."""
    start = time.perf_counter()
    out = _blank_entry(path)
    try:
        model = load_spacetime(path)
        out.update(id=model.id, title=model.title, version=model.version, dimension=model.dimension,
                   family=model.family, relations=_edges(model))
        figures_dir = outdir if wants_figures(formats, options) else None
        payload = entry_payload(model, options=options, cache=cache, progress=progress, figures_dir=figures_dir)
        out["cached"] = payload["cached"]
        out["figures"] = [f["file"] for f in payload.get("figures", [])]
        out["claims"] = claims_status(payload["results"])
        for fmt in formats:
            target = Path(outdir) / f"{model.id}.{fmt}"
            write_atomic(target, render_payload(payload, fmt, options), force=getattr(options, "force", False))
            out["reports"][fmt] = target.name
    except TexgenError as exc:
        out["error"] = exc.format_message()
    except Exception as exc:  # noqa: BLE001 - one entry's failure must not stop the others
        out["error"] = f"internal error ({type(exc).__name__}: {exc})"
    out["seconds"] = time.perf_counter() - start
    return out


@dataclass(frozen=True)
class LibraryBuild:
    """What :func:`build_library` did."""

    entries: tuple[dict, ...]
    """One summary per file (id, title, version, reports, claims, error, cached, seconds)."""
    index: tuple[Path, ...]
    failed: int = 0
    seconds: float = 0.0
    edges: tuple[dict, ...] = field(default_factory=tuple)
    reruns: tuple[int, ...] = ()
    """Entries built again after a worker process died, per death (see :func:`texgen.engine.parallel.map_in_workers`)."""


def index_context(entries: list[dict], edges: list[dict]) -> dict:
    """Plain data for the index templates."""
    rows = []
    for e in sorted(entries, key=lambda e: e["id"]):
        link = next((e["reports"][f] for f in ("md", "tex", "json") if f in e["reports"]), "")
        error = " ".join((e["error"] or "").split())  # one line: it sits in a table cell
        rows.append({"id": e["id"], "title": e["title"], "version": e["version"] or "-",
                     "dimension": e["dimension"] if not error else "-",
                     "family": e["family"] or "-", "claims": e["claims"] or "-", "link": link,
                     "reports": [e["reports"][f] for f in sorted(e["reports"])], "error": error})
    known = {e["id"] for e in entries if not e["error"]}
    families: dict[str, list[str]] = {}
    for e in rows:
        if not e["error"]:
            families.setdefault(e["family"], []).append(e["id"])
    return {"texgen_version": __version__, "entries": rows, "failed": sum(1 for e in rows if e["error"]),
            "edges": [dict(x, known=x["to"] in known) for x in sorted(edges, key=lambda x: (x["from"], x["to"]))],
            "families": [{"name": k, "ids": v} for k, v in sorted(families.items())]}


def build_library(paths, outdir, *, formats=("tex", "md"), jobs: int = 1, executor: Executor | None = None,
                  cache=None, progress: Callable | None = None, options=None) -> LibraryBuild:
    """Build the report of every spacetime file under ``paths`` into ``outdir``, plus index.md and index.tex.

    Parameters
    ----------
    paths:
        Spacetime files or folders (searched for .yaml/.yml).
    outdir:
        Folder for ``ID.FORMAT`` reports and the index pages.
    formats:
        Report formats among ``tex``, ``md``, ``json``.
    jobs:
        Worker processes (a ``ProcessPoolExecutor``) when more than 1 and no ``executor``.
    executor:
        Any ``concurrent.futures.Executor``; e.g. a Dask ``distributed.Client(...).get_executor()``
        (the workers must be able to import texgen and see ``outdir`` and the cache folder).
    cache:
        A :class:`texgen.library.cache.ResultCache` or ``None`` (always compute).
    progress:
        ``progress(done, total, entry, stage)``: in one process the stage is the engine's
        (``christoffel``, ``riemann``...); with workers it is ``done`` or ``failed`` per entry.
    options:
        :class:`texgen.api.BuildOptions` (section level, fragment, templates, force, figures);
        ``None`` builds the reports without figures.  With ``figures``, LaTeX and Markdown
        builds draw ``ID-NAME.pdf/.png`` next to ``ID.tex`` and keep them in the cache.
    """
    start = time.perf_counter()
    files = [str(p) for p in spacetime_files(list(paths))]
    if not files:
        raise ConfigError("No spacetime files found in " + ", ".join(map(str, paths)))
    for fmt in formats:
        if fmt not in ("tex", "md", "json"):
            raise ConfigError(f"Expected one of: 'tex', 'md', 'json' but received: '{fmt}'")
    out = Path(outdir)
    out.mkdir(parents=True, exist_ok=True)
    formats = tuple(formats)
    total = len(files)
    results: list[dict] = []
    reruns: list[int] = []
    arrived = [0]

    def _arrived(res: dict) -> dict:
        arrived[0] += 1
        if progress is not None:
            progress(arrived[0], total, res["id"], "failed" if res["error"] else "done")
        return res

    if executor is None and jobs <= 1:
        for k, f in enumerate(files):
            name = Path(f).stem

            def stage(s, d, t, _name=name, _k=k):
                if progress is not None:
                    progress(_k, total, _name, s)

            results.append(build_entry(f, str(out), formats, cache, options, stage))
            if progress is not None:
                progress(k + 1, total, results[-1]["id"], "failed" if results[-1]["error"] else "done")
    elif executor is None:
        results = map_in_workers(partial(build_entry, outdir=str(out), formats=formats, cache=cache,
                                         options=options), files, jobs,
                                 on_result=lambda f, res: _arrived(res), on_lost=_failed_entry, reruns=reruns)
    else:
        futures = {executor.submit(build_entry, f, str(out), formats, cache, options): f for f in files}
        for fut in as_completed(futures):
            try:
                res = fut.result()
            except Exception as exc:  # noqa: BLE001 - a failed task fails its entry only
                res = _failed_entry(futures[fut], f"worker failed ({type(exc).__name__}: {exc})")
            results.append(_arrived(res))
    results.sort(key=lambda e: files.index(e["file"]))
    edges = [x for e in results for x in e["relations"]]
    ctx = index_context(results, edges)
    written = []
    force = getattr(options, "force", False)
    for fmt, template in INDEX_TEMPLATES.items():
        written.append(write_atomic(out / f"index.{fmt}", render(template, ctx), force=force))
    return LibraryBuild(tuple(results), tuple(written), ctx["failed"], time.perf_counter() - start, tuple(edges),
                        tuple(reruns))
