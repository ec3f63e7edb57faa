"""On-disk cache of derived results, so that a rebuild recomputes only what changed.

One entry per spacetime and report options holds the plain-data report context
and the JSON results (JSON only, never pickle).  The key joins the physics hash
(:func:`texgen.library.versions.physics_hash`), a hash of the prose and claims the
report shows, texgen's version and a digest of its Python sources, the
conventions and the report options: a
template-only change therefore recomputes nothing, and a comment or layout
change in the YAML file does not either.  Every entry carries a SHA-256 of its
payload; a corrupt, truncated or foreign entry is logged at debug level and
recomputed, never trusted.  Figure files drawn for a report are kept by content
(``figures/<sha256>.<ext>``); the entry names each file's SHA-256, and a figure
file that is missing or does not match makes the entry a miss.
"""
from __future__ import annotations

import hashlib
import json
import logging
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable

from .._version import __version__
from ..output.render import write_atomic
from ..spec.model import Spacetime
from .versions import physics_hash

log = logging.getLogger(__name__)

FORMAT = 1
"""Layout of a cache entry; a change makes old entries misses."""


def default_dir() -> Path:
    """``$XDG_CACHE_HOME/texgen``, else ``~/.cache/texgen`` (the XDG base-directory default)."""
    base = os.environ.get("XDG_CACHE_HOME")
    return (Path(base) if base else Path.home() / ".cache") / "texgen"


def _digest(data: Any) -> str:
    text = json.dumps(data, sort_keys=True, ensure_ascii=False, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


_CODE: list[str] = []


def code_digest() -> str:
    """SHA-256 of texgen's own Python sources: a fix to the engine invalidates results even
    before the version number moves (templates are not included: they only render)."""
    if not _CODE:
        h = hashlib.sha256()
        package = Path(__file__).resolve().parents[1]
        for p in sorted(package.rglob("*.py")):
            h.update(p.relative_to(package).as_posix().encode() + b"\0" + p.read_bytes() + b"\0")
        _CODE.append(h.hexdigest())
    return _CODE[0]


def entry_key(model: Spacetime, options: dict | None = None) -> dict:
    """What a cached entry of ``model`` depends on, as plain data."""
    conv = model.conventions
    shown = {"id": model.id, "title": model.title, "version": model.version,
             "description": model.description, "references": list(model.references),
             "notes": model.notes, "family": model.family, "changelog": [list(c) for c in model.changelog],
             "derive": list(model.derive),
             "definitions": [[d.name, d.latex, str(d.expression)] for d in model.definitions],
             "latex": [[x.name, x.latex] for x in (*model.coordinates, *model.parameters, *model.functions)],
             "metric_display": [str(e) for e in model.metric_display],
             "sections": {s.key: s.data for s in model.sections}}
    return {"physics": physics_hash(model), "shown": _digest(shown), "texgen": __version__, "code": code_digest(),
            "conventions": [conv.signature, int(conv.riemann_sign), conv.units],
            "options": options or {}}


@dataclass(frozen=True)
class CacheInfo:
    """What ``texgen cache info`` prints."""

    path: str
    entries: int
    bytes: int
    """Entries and figure files together."""
    figures: int = 0
    """Figure files kept for the reports (``figures/<sha256>.<ext>``)."""


FIGURE_DIR = "figures"
"""Sub-folder of content-addressed figure files: one file per distinct content, shared by entries."""
_EXTENSIONS = ("pdf", "png", "svg")


@dataclass(frozen=True)
class ResultCache:
    """A folder of JSON cache entries (picklable: worker processes get the same folder)."""

    root: Path

    @classmethod
    def at(cls, path: str | Path | None = None) -> "ResultCache":
        """The cache in ``path``, or in :func:`default_dir`."""
        return cls(Path(path) if path is not None else default_dir())

    def _file(self, key: dict) -> Path:
        name = _digest(key)
        return self.root / name[:2] / f"{name}.json"

    def get(self, key: dict) -> dict | None:
        """The payload stored under ``key``, or ``None`` (missing, corrupt or not ours)."""
        path = self._file(key)
        try:
            raw = path.read_bytes()
        except FileNotFoundError:
            return None
        except OSError as exc:
            log.debug("cache entry %s unreadable: %s", path, exc)
            return None
        try:
            data = json.loads(raw.decode("utf-8"))
            ok = (isinstance(data, dict) and data.get("format") == FORMAT and data.get("key") == key
                  and isinstance(data.get("payload"), dict) and data.get("checksum") == _digest(data["payload"]))
        except (UnicodeDecodeError, json.JSONDecodeError, TypeError) as exc:
            log.debug("cache entry %s is corrupt (%s); recomputing", path, exc)
            return None
        if not ok:
            log.debug("cache entry %s failed its integrity check; recomputing", path)
            return None
        return data["payload"]

    def put(self, key: dict, payload: dict) -> Path:
        """Store ``payload`` (plain JSON data) under ``key``, atomically."""
        data = {"format": FORMAT, "key": key, "checksum": _digest(payload), "payload": payload}
        # key order is kept: the JSON report is written in the order the results were built
        text = json.dumps(data, ensure_ascii=False, separators=(",", ":"))
        return write_atomic(self._file(key), text, own_check=False)

    def _figure_file(self, sha256: str, ext: str) -> Path:
        if ext not in _EXTENSIONS or len(sha256) != 64 or not all(ch in "0123456789abcdef" for ch in sha256):
            raise ValueError(f"not a figure file name: {sha256}.{ext}")
        return self.root / FIGURE_DIR / f"{sha256}.{ext}"

    def put_figure(self, data: bytes, ext: str) -> str:
        """Keep the bytes of one figure file (atomically, once per content); returns their SHA-256."""
        sha = hashlib.sha256(data).hexdigest()
        path = self._figure_file(sha, ext)
        try:
            if path.stat().st_size == len(data) and hashlib.sha256(path.read_bytes()).hexdigest() == sha:
                return sha
        except OSError:
            pass  # missing (or unreadable): write it
        write_atomic(path, data, own_check=False)
        return sha

    def get_figure(self, sha256: str, ext: str) -> bytes | None:
        """The figure file with this SHA-256, or ``None`` when it is missing or its bytes do not match."""
        try:
            path = self._figure_file(sha256, ext)
            data = path.read_bytes()
        except (OSError, ValueError) as exc:
            log.debug("cached figure %s.%s unreadable: %s", sha256, ext, exc)
            return None
        if hashlib.sha256(data).hexdigest() != sha256:
            log.debug("cached figure %s failed its integrity check; recomputing", path)
            return None
        return data

    def _files(self) -> list[Path]:
        if not self.root.is_dir():
            return []
        return sorted(p for p in self.root.glob("??/*.json") if p.is_file())

    def _figure_files(self) -> list[Path]:
        folder = self.root / FIGURE_DIR
        if not folder.is_dir():
            return []
        return sorted(p for ext in _EXTENSIONS for p in folder.glob(f"*.{ext}")
                      if p.is_file() and len(p.stem) == 64)

    def info(self) -> CacheInfo:
        files = self._files()
        figs = self._figure_files()
        return CacheInfo(str(self.root), len(files), sum(p.stat().st_size for p in files + figs), len(figs))

    def clear(self) -> int:
        """Remove every entry and figure file (and nothing else); returns how many entries were removed."""
        files = self._files()
        for p in files + self._figure_files():
            p.unlink(missing_ok=True)
            try:
                p.parent.rmdir()
            except OSError:
                pass  # other entries still share the folder
        return len(files)


def options_key(options, figures: bool = False) -> dict:
    """The report options a cache entry depends on (section level, shorthands, the figures' drawing library)."""
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
