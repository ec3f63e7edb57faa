"""The spacetime library as a whole: relations between entries, listing, bulk builds.

``relations`` in a file say how an entry follows from another one:
``limit_of: ID, set: {Q: 0}`` (a parameter value or limit) and
``same_as: ID, map: {t: ..., r: ...}`` (the other entry's coordinates in terms
of this entry's).  :func:`check_relations` proves them with the curvature
engine and says how (exactly, or numerically at sample points).
"""
from __future__ import annotations

import difflib
import json
import logging
import time
from concurrent.futures import Executor, as_completed
from dataclasses import dataclass, field
from functools import partial
from pathlib import Path
from typing import Any, Callable, Iterable

import sympy as sp

from .errors import ConfigError, ConfigErrors, ExpressionError, Location, TexgenError
from .model import Spacetime

log = logging.getLogger(__name__)

INDEX_TEMPLATES = {"md": "index.md.j2", "tex": "index.tex.j2"}


# ------------------------------------------------------------------ relations

@dataclass(frozen=True)
class RelationResult:
    """The verdict on one declared relation."""

    id: str
    """The entry that declares the relation."""
    source: str
    index: int
    """Position in the entry's ``relations`` list."""
    kind: str
    """``limit_of`` or ``same_as``."""
    other: str
    holds: bool
    method: str
    """``exact`` (canonical difference zero), ``numeric`` (zero at random points, 50 digits), or ``fails``."""
    message: str = ""
    failures: tuple[tuple[str, str], ...] = ()
    """(component, difference in canonical form) for each component that differs."""


def _node_at(section, path: list) -> Any:
    node = section.node
    for step in path:
        value = getattr(node, "value", None)
        if isinstance(value, dict) and step in value:
            node = value[step]
        elif isinstance(value, list) and isinstance(step, int) and step < len(value):
            node = value[step]
        else:
            break
    return node


def _error(model: Spacetime, steps: list, message: str, hint: str | None = None) -> ConfigError:
    section = model.section("relations")
    node = _node_at(section, steps) if section is not None else None
    path = "relations"
    for s in steps:
        path += f"[{s}]" if isinstance(s, int) else f".{s}"
    return ConfigError(message, Location(model.source, getattr(node, "line", None), getattr(node, "column", None),
                                         path), hint)


def _other(model: Spacetime, entries: dict[str, Spacetime], i: int, kind: str, ref: Any) -> Spacetime:
    if not isinstance(ref, str) or ref not in entries:
        close = difflib.get_close_matches(str(ref), list(entries), n=1)
        raise _error(model, [i, kind], f"Expected the id of a library entry but received: '{ref}'",
                     f"did you mean '{close[0]}'?" if close else None)
    return entries[ref]


def _names(model: Spacetime) -> dict[str, sp.Symbol]:
    return {s.name: s.symbol for s in (*model.coordinates, *model.parameters)}


def _renamer(other: Spacetime, model: Spacetime) -> dict:
    """The other entry's coordinates and parameters as this entry's symbols of the same name."""
    mine = _names(model)
    return {s.symbol: mine[s.name] for s in (*other.coordinates, *other.parameters) if s.name in mine}


def _namespace(model: Spacetime, other: Spacetime):
    from .schema import namespace

    extra = {p.name: p.symbol for p in other.parameters if p.name not in _names(model)}
    return namespace(model, extra)


def _parse(model: Spacetime, steps: list, text: Any, ns) -> sp.Expr:
    from .expressions import parse_expression

    try:
        return parse_expression(text, ns).xreplace(model.definition_substitutions())
    except ExpressionError as exc:
        raise _error(model, steps, exc.message, exc.hint) from None


def _compare(cv, pairs: list[tuple[str, sp.Expr, sp.Expr]]) -> tuple[str, list[tuple[str, str]]]:
    """Method (exact/numeric/fails) and the differing components of (label, derived, expected) pairs."""
    from .expressions import expression_to_text

    method = "exact"
    bad = []
    for label, got, want in pairs:
        d = got - want
        canon = cv.canonical(d)
        if canon == 0:
            continue
        if cv.is_zero(d):  # the canonical form is not zero: only the numeric test can agree
            method = "numeric"
            continue
        bad.append((label, expression_to_text(canon)))
    return ("fails" if bad else method), bad


def _limit(expr: sp.Expr, values: dict[sp.Symbol, sp.Expr]) -> sp.Expr:
    """Substitute the values; where that is undefined (or a value is infinite), take limits one by one."""
    finite = {k: v for k, v in values.items() if v.is_finite is not False}
    out = expr.xreplace(finite) if len(finite) == len(values) else None
    if out is not None and not out.has(sp.nan, sp.zoo, sp.oo, -sp.oo):
        return out
    out = expr
    for k, v in values.items():
        out = sp.limit(out, k, v)
    return out


def _check_limit(model, other, rel, i, cv) -> RelationResult:
    values = rel.get("set")
    if not isinstance(values, dict) or not values:
        raise _error(model, [i, "set"], f"Expected a mapping of parameter: value but received: {values!r}")
    params = {p.name: p.symbol for p in other.parameters}
    ns = _namespace(model, other)
    sub = {}
    for name, text in values.items():
        if name not in params:
            raise _error(model, [i, "set", name],
                         f"Expected a parameter of '{other.id}' ({', '.join(params) or 'none'}) but received: '{name}'")
        sub[params[name]] = _parse(model, [i, "set", name], text, ns)
    mine = [c.name for c in model.coordinates]
    theirs = [c.name for c in other.coordinates]
    if sorted(mine) != sorted(theirs):
        raise _error(model, [i, "limit_of"], f"Expected '{other.id}' to have the coordinates "
                     f"{', '.join(mine)} but received: {', '.join(theirs)}", "use same_as with a map")
    ren = _renamer(other, model)
    pos = [theirs.index(nm) for nm in mine]
    n = model.dimension
    pairs = []
    for a in range(n):
        for b in range(a, n):
            got = _limit(other.metric[pos[a], pos[b]], sub).xreplace(ren)
            pairs.append((f"g[{mine[a]},{mine[b]}]", got, model.metric[a, b]))
    lam = _limit(sp.sympify(other.cosmological_constant), sub).xreplace(ren)
    pairs.append(("cosmological_constant", lam, sp.sympify(model.cosmological_constant)))
    method, bad = _compare(cv, pairs)
    shown = ", ".join(f"{k} = {v}" for k, v in values.items())
    msg = "" if not bad else (f"'{other.id}' with {shown} is not this metric: {bad[0][0]} differs by {bad[0][1]}"
                              + (f" (and {len(bad) - 1} more)" if len(bad) > 1 else ""))
    return RelationResult(model.id, model.source, i, "limit_of", other.id, not bad, method, msg, tuple(bad))


def _check_map(model, other, rel, i, cv, curvature: Callable[[Spacetime], Any]) -> RelationResult:
    mapping = rel.get("map")
    theirs = [c.name for c in other.coordinates]
    if not isinstance(mapping, dict):
        raise _error(model, [i, "map"], f"Expected a mapping of coordinate: expression but received: {mapping!r}")
    for name in mapping:
        if name not in theirs:
            raise _error(model, [i, "map", name],
                         f"Expected a coordinate of '{other.id}' ({', '.join(theirs)}) but received: '{name}'")
    missing = [nm for nm in theirs if nm not in mapping]
    if missing:
        raise _error(model, [i, "map"], f"Expected an expression for every coordinate of '{other.id}' but "
                     f"received none for: {', '.join(missing)}")
    ns = _namespace(model, other)
    images = [_parse(model, [i, "map", nm], mapping[nm], ns) for nm in theirs]
    ren = _renamer(other, model)
    ren_params = {k: v for k, v in ren.items() if k not in other.coordinate_symbols}
    to_images = {c.symbol: images[k] for k, c in enumerate(other.coordinates)}

    def pull(expr):
        return sp.sympify(expr).xreplace(ren_params).xreplace(to_images)

    x = model.coordinate_symbols
    m, n = other.dimension, model.dimension
    jac = sp.Matrix(m, n, lambda c, a: sp.diff(images[c], x[a]))
    g = sp.Matrix(m, m, lambda c, d: pull(other.metric[c, d]))
    pulled = jac.T * g * jac
    mine = [c.name for c in model.coordinates]
    pairs = [(f"g[{mine[a]},{mine[b]}]", pulled[a, b], model.metric[a, b]) for a in range(n) for b in range(a, n)]
    method, bad = _compare(cv, pairs)
    if not bad:
        ocv = curvature(other)
        inv = [("ricci_scalar", pull(ocv.ricci_scalar), cv.ricci_scalar),
               ("kretschmann", pull(ocv.kretschmann), cv.kretschmann)]
        m2, bad = _compare(cv, inv)
        method = m2 if m2 != "exact" else method
    msg = "" if not bad else (f"'{other.id}' pulled back through the map is not this spacetime: {bad[0][0]} "
                              f"differs by {bad[0][1]}" + (f" (and {len(bad) - 1} more)" if len(bad) > 1 else ""))
    return RelationResult(model.id, model.source, i, "same_as", other.id, not bad, method, msg, tuple(bad))


def relation_results(entries: dict[str, Spacetime], ids: Iterable[str] | None = None
                     ) -> tuple[list[RelationResult], list[ConfigError]]:
    """Check the relations declared by ``ids`` (default: all entries); bad declarations are returned as errors."""
    from .derive import Curvature

    curv: dict[str, Any] = {}

    def curvature(model: Spacetime):
        if model.id not in curv:
            curv[model.id] = Curvature(model)
        return curv[model.id]

    results: list[RelationResult] = []
    errors: list[ConfigError] = []
    chosen = list(entries.values()) if ids is None else [entries[i] for i in ids]
    for model in chosen:
        section = model.section("relations")
        if section is None:
            continue
        if not isinstance(section.data, list):
            errors.append(_error(model, [], f"Expected a list of relations but received: {section.data!r}"))
            continue
        for i, rel in enumerate(section.data):
            kinds = [k for k in ("limit_of", "same_as") if isinstance(rel, dict) and k in rel]
            try:
                if len(kinds) != 1:
                    raise _error(model, [i], "Expected exactly one of: 'limit_of', 'same_as' but received: "
                                 f"{rel!r}")
                other = _other(model, entries, i, kinds[0], rel[kinds[0]])
                if kinds[0] == "limit_of":
                    results.append(_check_limit(model, other, rel, i, curvature(model)))
                else:
                    results.append(_check_map(model, other, rel, i, curvature(model), curvature))
            except ConfigError as exc:
                errors.append(exc)
            except (TexgenError, ValueError, TypeError, NotImplementedError, sp.PolynomialError) as exc:
                # a derivation or limit the engine or sympy could not carry out
                why = exc.format_message() if isinstance(exc, TexgenError) else f"{type(exc).__name__}: {exc}"
                results.append(RelationResult(model.id, model.source, i, kinds[0], str(rel[kinds[0]]), False,
                                              "fails", f"cannot be checked: {why}"))
    return results, errors


def check_relations(entries: dict[str, Spacetime], ids: Iterable[str] | None = None) -> list[RelationResult]:
    """Verdicts on the relations of ``entries`` (loaded models by id), or of those named in ``ids``.

    Raises :class:`~texgen.errors.ConfigError` (``ConfigErrors`` for several)
    for relations that cannot be read: an unknown id, a parameter or coordinate
    the other entry lacks, an unreadable expression; each names file, line and
    key path such as ``relations[0].map.t``.
    """
    results, errors = relation_results(entries, ids)
    if len(errors) == 1:
        raise errors[0]
    if errors:
        raise ConfigErrors(errors)
    return results


# ------------------------------------------------------------------ loading, listing

def load_entries(paths: Iterable[str | Path]) -> tuple[dict[str, Spacetime], list[ConfigError]]:
    """Load every spacetime file under ``paths``; problems (bad file, duplicate id) are collected."""
    from . import api

    entries: dict[str, Spacetime] = {}
    errors: list[ConfigError] = []
    for path in api.spacetime_files(list(paths)):
        try:
            model = api.load_spacetime(path)
        except ConfigError as exc:
            errors.append(exc)
            continue
        if model.id in entries:
            errors.append(ConfigError(f"Expected a unique id but '{model.id}' is also used by "
                                      f"{entries[model.id].source}", Location(str(path), path="id")))
            continue
        entries[model.id] = model
    return entries, errors


def claims_status(results: dict | None) -> str:
    """'3/3 hold', '2/3 hold, 1 fails', 'no claims' from a results dict; '' when unknown."""
    if results is None or "claims" not in results:
        return ""
    claims = results["claims"]
    src = results.get("source_check")
    items = list(claims) + ([src] if src else [])
    if not items:
        return "no claims"
    good = sum(1 for c in items if c.get("holds"))
    out = f"{good}/{len(items)} hold"
    return out if good == len(items) else out + f", {len(items) - good} fail" + ("s" if len(items) - good == 1 else "")


@dataclass(frozen=True)
class LibraryEntry:
    """One line of ``texgen library``."""

    id: str
    title: str
    version: str
    dimension: int
    family: str
    claims: str
    """Status from the cache when present, else the number of claims and 'not checked'."""
    file: str


def list_entries(paths: Iterable[str | Path], *, cache=None) -> tuple[list[LibraryEntry], list[ConfigError]]:
    """The entries under ``paths``, sorted by id, with claims status from ``cache`` where it has one."""
    from .cache import entry_key

    entries, errors = load_entries(paths)
    rows = []
    for model in sorted(entries.values(), key=lambda m: m.id):
        status = ""
        if cache is not None:
            hit = cache.get(entry_key(model, _options_key(None))) or cache.get(
                entry_key(model, _options_key(None, figures=True)))
            status = claims_status(hit["results"]) if hit else ""
        if not status:
            section = model.section("claims")
            k = len(section.data) if section and isinstance(section.data, list) else 0
            status = f"{k} claims, not checked" if k else "no claims"
        rows.append(LibraryEntry(model.id, model.title, model.version, model.dimension, model.family, status,
                                 model.source))
    return rows, errors


@dataclass(frozen=True)
class LibraryCheck:
    """Everything ``texgen library --check`` found."""

    entries: int
    problems: tuple[str, ...]
    relations: tuple[RelationResult, ...]

    @property
    def ok(self) -> bool:
        return not self.problems


def check_library(folder: str | Path, *, record_path: str | Path | None = None) -> LibraryCheck:
    """Validate every entry, check relations, versions, changelogs and the stored physics hashes."""
    from .versioning import RECORD_FILE, check_versions, load_record

    entries, errors = load_entries([folder])
    problems = [e.format_message() for e in errors]
    results, rel_errors = relation_results(entries)
    problems += [e.format_message() for e in rel_errors]
    problems += [f"{r.source}: relations[{r.index}]: {r.message}" for r in results if not r.holds]
    rp = Path(record_path) if record_path is not None else Path(folder) / RECORD_FILE
    try:
        stored = load_record(rp)
        problems += [i.format_message() for i in check_versions(entries.values(), stored)]
    except ConfigError as exc:
        problems.append(exc.format_message())
    return LibraryCheck(len(entries), tuple(problems), tuple(results))


# ------------------------------------------------------------------ building with the cache

def _options_key(options, figures: bool = False) -> dict:
    key = {"section_level": getattr(options, "section_level", 1)}
    if not getattr(options, "shorthands", True):
        key["shorthands"] = False  # the context then has none: an entry of its own
    if figures:
        # the drawing library's version changes the bytes of the figure files
        key["figures"] = _matplotlib_version()
    return key


def _matplotlib_version() -> str:
    from importlib import metadata

    try:
        return metadata.version("matplotlib")
    except metadata.PackageNotFoundError:
        return "none"


def wants_figures(formats: Iterable[str], options) -> bool:
    """True when a build draws figures: a LaTeX or Markdown report and ``options.figures``
    (no options: no figures, the reports alone)."""
    return bool(getattr(options, "figures", False)) and any(f in ("tex", "md") for f in formats)


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
    from .render import write_atomic

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
        A :class:`texgen.cache.ResultCache`, or ``None`` to compute.
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
    from . import api
    from .cache import entry_key
    from .report import ExpressionPrinter, ReportOptions, build_context, build_results

    key = entry_key(model, _options_key(options, figures=figures_dir is not None))
    if cache is not None:
        hit = cache.get(key)
        if hit is not None and (figures_dir is None or _restore_figures(model, hit, cache, Path(figures_dir))):
            return _refresh(dict(hit, cached=True), model)
    cv = api.derive(model, progress=progress)
    if keep is not None:
        keep.append(cv)
    ropts = ReportOptions(section_level=getattr(options, "section_level", 1),
                          shorthands=getattr(options, "shorthands", True))
    results = build_results(model, cv, api.extra_results(model, cv))
    sections = api.extra_sections(model, cv, ExpressionPrinter(model, ropts))
    drawn: dict = {}
    if figures_dir is not None:
        # the same drawing and section as a single-file build of ID.tex into figures_dir
        section, missing = api.draw_report_figures(model, cv, Path(figures_dir) / f"{model.id}.tex")
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
    from .errors import RenderError
    from .render import dump_json, render

    if fmt == "json":
        return dump_json(payload["results"])
    template = {"tex": "report.tex.j2", "md": "report.md.j2"}.get(fmt)
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
    from . import api
    from .render import write_atomic

    start = time.perf_counter()
    out = _blank_entry(path)
    try:
        model = api.load_spacetime(path)
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
    """Entries built again after a worker process died, per death (see :func:`texgen._parallel.map_in_workers`)."""


def index_context(entries: list[dict], edges: list[dict]) -> dict:
    """Plain data for the index templates."""
    from . import __version__

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
        A :class:`texgen.cache.ResultCache` or ``None`` (always compute).
    progress:
        ``progress(done, total, entry, stage)``: in one process the stage is the engine's
        (``christoffel``, ``riemann``...); with workers it is ``done`` or ``failed`` per entry.
    options:
        :class:`texgen.api.BuildOptions` (section level, fragment, templates, force, figures);
        ``None`` builds the reports without figures.  With ``figures``, LaTeX and Markdown
        builds draw ``ID-NAME.pdf/.png`` next to ``ID.tex`` and keep them in the cache.
    """
    from . import api
    from ._parallel import map_in_workers
    from .render import render, write_atomic

    start = time.perf_counter()
    files = [str(p) for p in api.spacetime_files(list(paths))]
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
