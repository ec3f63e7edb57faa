"""The checking machinery of the spacetime file: located errors and the builder of each header part.

:class:`_Checker` collects every problem with its file, line, column and key path;
:class:`_Builder` reads the header, conventions, coordinates, parameters and
functions in order.  :mod:`texgen.spec.schema` drives both to build the model.
"""
from __future__ import annotations

import difflib
import re
from typing import Any, Callable

import sympy as sp

from ..errors import ConfigError, ExpressionError, Location
from .expressions import CONSTANTS, MATH_FUNCTIONS, Namespace, parse_expression
from .loader import Document, Node
from .model import Conventions, FunctionDecl, Range

FORMAT_VERSION = 1

TOP_KEYS = {
    "texgen": "format version of the file (1)",
    "id": "stable identifier",
    "title": "human-readable title",
    "version": "semantic version of this definition",
    "description": "what the spacetime is",
    "references": "published sources",
    "notes": "free notes",
    "family": "library family (schwarzschild, kerr, cosmology, ...)",
    "changelog": "one entry per version",
    "coordinates": "coordinates in order",
    "parameters": "constants with assumptions",
    "functions": "free functions of coordinates",
    "definitions": "named auxiliary expressions",
    "metric": "line element, components or matrix",
    "conventions": "signature, Riemann sign, units",
    "cosmological_constant": "Lambda in the field equations",
    "derive": "which quantities to derive",
}
RESERVED_SECTIONS = ("claims", "source", "tetrad", "structure", "impose", "relations", "figures")
"""Sections read by later stages (claims, matter, frames, horizons, library relations, figures)."""

DERIVABLE = ("inverse", "christoffel", "riemann", "ricci", "einstein", "weyl", "invariants",
             "bianchi", "geodesics", "matter", "energy_conditions", "structure")
ASSUMPTION_WORDS = ("real", "positive", "negative", "nonnegative", "nonpositive", "nonzero", "integer")
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_]*$")
_ID = re.compile(r"^[a-z0-9][a-z0-9_.\-]*$")
_SEMVER = re.compile(r"^\d+\.\d+\.\d+(?:-[0-9A-Za-z.\-]+)?$")
_GREEK = {"alpha", "beta", "gamma", "delta", "epsilon", "zeta", "eta", "theta", "iota", "kappa",
          "lambda", "mu", "nu", "xi", "omicron", "pi", "rho", "sigma", "tau", "upsilon", "phi", "chi",
          "psi", "omega"}


def _type_name(value: Any) -> str:
    return {str: "a string", int: "a number", float: "a number", bool: "a boolean", list: "a list",
            dict: "a mapping", type(None): "nothing"}.get(type(value), type(value).__name__)


def _shown(value: Any) -> str:
    if isinstance(value, (dict, list)):
        return _type_name(value)
    return repr(value) if isinstance(value, str) else str(value)


class _Checker:
    """Holds the collected errors and the positions of one document."""

    def __init__(self, doc: Document):
        self.doc = doc
        self.errors: list[ConfigError] = []

    def error(self, node: Node | None, path: str, message: str, hint: str | None = None,
              column_offset: int | None = None, at_key: bool = False) -> None:
        line = node.line if node is not None else None
        col = node.column if node is not None else None
        if at_key and path in self.doc.key_lines:
            # A problem with a declared name sits at the name, not at its value.
            line, col = self.doc.key_lines[path]
            column_offset = None
        if (col is not None and column_offset is not None and isinstance(node.value, str)
                and node.style in (None, '"', "'") and "\n" not in node.value):
            # Single-line scalars: point at the offending part of the expression.
            col += column_offset + (1 if node.style else 0)
        self.errors.append(ConfigError(message, Location(self.doc.source, line, col, path or None), hint))

    def expect(self, node: Node, path: str, kinds: tuple[type, ...], what: str) -> bool:
        if isinstance(node.value, bool) and bool not in kinds:
            self.error(node, path, f"Expected {what} but received: {_shown(node.value)}")
            return False
        if not isinstance(node.value, kinds):
            self.error(node, path, f"Expected {what} but received: {_shown(node.value)}")
            return False
        return True

    def keys(self, node: Node, path: str, allowed: dict[str, str] | tuple[str, ...] | set[str],
             required: tuple[str, ...] = ()) -> None:
        allowed_names = list(allowed)
        for key, val in node.value.items():
            if key not in allowed:
                close = difflib.get_close_matches(key, allowed_names, n=1, cutoff=0.6)
                hint = f"did you mean '{close[0]}'?" if close else "allowed: " + ", ".join(sorted(allowed_names))
                line, col = self.doc.key_lines.get(f"{path}.{key}" if path else key, (val.line, val.column))
                self.errors.append(ConfigError(f"Unknown key '{key}'",
                                               Location(self.doc.source, line, col, f"{path}.{key}" if path else key),
                                               hint))
        for key in required:
            if key not in node.value:
                self.error(node, path, f"Missing required key '{key}'")

    def expression(self, node: Node, path: str, ns: Namespace, *, juxtapose: bool = False) -> sp.Expr | None:
        if isinstance(node.value, bool) or not isinstance(node.value, (str, int, float)):
            self.error(node, path, f"Expected an expression but received: {_shown(node.value)}")
            return None
        try:
            return parse_expression(node.value, ns, juxtapose=juxtapose)
        except ExpressionError as exc:
            self.error(node, path, exc.message, exc.hint, getattr(exc, "column", None))
            return None

    def check(self, fn: Callable[[], Any]) -> Any:
        try:
            return fn()
        except ConfigError as exc:
            self.errors.append(exc)
            return None


def _latex_default(name: str) -> str:
    """LaTeX for a declared name: Greek words become letters, ``r_0`` becomes ``r_{0}``."""
    return sp.latex(sp.Symbol(name))


def _assumption_kwargs(words: tuple[str, ...]) -> dict[str, bool]:
    kw = {"real": True}
    for w in words:
        kw[w] = True
    return kw


def _range_from_links(links, sym: sp.Symbol, text: str) -> Range:
    lower = upper = None
    lower_strict = upper_strict = True
    for left, op, right in links:
        if left == sym:
            bound, side_upper = right, op in ("<", "<=")
        elif right == sym:
            bound, side_upper = left, op in (">", ">=")
        else:
            raise ExpressionError(f"Each comparison in a range must involve '{sym}': '{text}'")
        strict = op in ("<", ">")
        if bound.has(sym):
            raise ExpressionError(f"A bound of '{sym}' cannot depend on '{sym}': '{text}'")
        if side_upper:
            if upper is not None:
                raise ExpressionError(f"Two upper bounds for '{sym}': '{text}'")
            upper, upper_strict = bound, strict
        else:
            if lower is not None:
                raise ExpressionError(f"Two lower bounds for '{sym}': '{text}'")
            lower, lower_strict = bound, strict
    if lower is not None and upper is not None and lower.is_number and upper.is_number:
        if lower > upper or (lower == upper and (lower_strict or upper_strict)):
            raise ExpressionError(f"The range of '{sym}' is empty: '{text}'")
    return Range(lower, lower_strict, upper, upper_strict, text)


def _sign_words(rng: Range | None) -> tuple[str, ...]:
    """Assumptions implied by numeric bounds (r > 0 makes r positive)."""
    if rng is None or rng.lower is None or not rng.lower.is_Number:
        if rng is not None and rng.upper is not None and rng.upper.is_Number:
            if rng.upper < 0 or (rng.upper == 0 and rng.upper_strict):
                return ("negative",)
        return ()
    if rng.lower > 0 or (rng.lower == 0 and rng.lower_strict):
        return ("positive",)
    if rng.lower >= 0:
        return ("nonnegative",)
    return ()


class _Builder:
    """Builds each part of the model in order, reporting into a :class:`_Checker`."""

    def __init__(self, doc: Document):
        self.doc = doc
        self.ck = _Checker(doc)
        self.root: dict[str, Node] = doc.root.value
        self.names: dict[str, str] = {}  # name -> kind, for clash detection

    # -- helpers ---------------------------------------------------------------
    def claim_name(self, name: str, kind: str, node: Node, path: str) -> bool:
        if not isinstance(name, str) or not _NAME.match(name):
            self.ck.error(node, path, f"Expected a symbol name (letters, digits, '_', starting with a letter) "
                          f"but received: {_shown(name)}", at_key=True)
            return False
        if name in MATH_FUNCTIONS or name in CONSTANTS or name == "diff":
            self.ck.error(node, path, f"'{name}' is a built-in function or constant and cannot be a {kind} name",
                          at_key=True)
            return False
        if name in self.names:
            self.ck.error(node, path, f"'{name}' is already declared as a {self.names[name]}",
                          "each name may be declared once", at_key=True)
            return False
        self.names[name] = kind
        return True

    def string(self, key: str, required: bool = False, default: str = "") -> str:
        node = self.root.get(key)
        if node is None:
            if required:
                self.ck.error(self.doc.root, "", f"Missing required key '{key}'")
            return default
        if self.ck.expect(node, key, (str,), "a string"):
            return node.value.strip()
        return default

    # -- sections --------------------------------------------------------------
    def header(self) -> dict[str, Any]:
        self.ck.keys(self.doc.root, "", set(TOP_KEYS) | set(RESERVED_SECTIONS),
                     required=("id", "coordinates", "metric"))
        fmt = self.root.get("texgen")
        if fmt is not None and fmt.value != FORMAT_VERSION:
            self.ck.error(fmt, "texgen", f"Expected format version {FORMAT_VERSION} but received: {_shown(fmt.value)}")
        out: dict[str, Any] = {}
        out["id"] = self.string("id")  # a missing id is reported by keys() above
        if out["id"] and not _ID.match(out["id"]):
            self.ck.error(self.root["id"], "id", f"Expected an id of lower-case letters, digits, '-', '_' or '.' "
                          f"but received: '{out['id']}'")
        out["title"] = self.string("title") or out["id"]
        out["version"] = self.string("version", default="0.0.0") or "0.0.0"
        vnode = self.root.get("version")
        if vnode is not None and isinstance(vnode.value, str) and not _SEMVER.match(out["version"]):
            self.ck.error(vnode, "version", f"Expected a semantic version such as '1.0.0' but received: "
                          f"'{out['version']}'")
        if vnode is not None and isinstance(vnode.value, (int, float)) and not isinstance(vnode.value, bool):
            self.ck.errors.pop()  # replace the generic type message with a specific one
            self.ck.error(vnode, "version", f"Expected a semantic version such as '1.0.0' but received: "
                          f"{vnode.value}", "quote it: version: \"1.0.0\"")
        out["description"] = self.string("description")
        out["notes"] = self.string("notes")
        out["family"] = self.string("family")
        out["references"] = self.references()
        out["changelog"] = self.changelog()
        return out

    def references(self) -> tuple[str, ...]:
        node = self.root.get("references")
        if node is None:
            return ()
        if isinstance(node.value, str):
            return (node.value.strip(),)
        if not self.ck.expect(node, "references", (list,), "a list of references"):
            return ()
        refs = []
        for i, item in enumerate(node.value):
            path = f"references[{i}]"
            if isinstance(item.value, str):
                refs.append(item.value.strip())
            elif isinstance(item.value, dict):
                self.ck.keys(item, path, ("text", "doi", "arxiv", "url"))
                parts = []
                for k in ("text", "doi", "arxiv", "url"):
                    if k in item.value:
                        v = item.value[k]
                        if self.ck.expect(v, f"{path}.{k}", (str,), "a string"):
                            parts.append(v.value.strip() if k == "text" else f"{k}:{v.value.strip()}")
                if not parts:
                    self.ck.error(item, path, "A reference needs at least 'text' or 'doi'")
                refs.append(" ".join(parts))
            else:
                self.ck.error(item, path, f"Expected a reference (text or a mapping with text/doi) "
                              f"but received: {_shown(item.value)}")
        return tuple(refs)

    def changelog(self) -> tuple[tuple[str, str], ...]:
        node = self.root.get("changelog")
        if node is None:
            return ()
        if not self.ck.expect(node, "changelog", (dict,), "a mapping of version: text"):
            return ()
        out = []
        for ver, text in node.value.items():
            path = f"changelog.{ver}"
            if not _SEMVER.match(ver):
                self.ck.error(text, path, f"Expected a semantic version such as '1.0.0' but received: '{ver}'")
            if self.ck.expect(text, path, (str,), "a string"):
                out.append((ver, text.value.strip()))
        return tuple(out)

    def conventions(self, n: int) -> Conventions:
        node = self.root.get("conventions")
        default_sig = "-" + "+" * (n - 1) if n >= 1 else ""
        if node is None:
            return Conventions(signature=default_sig)
        if not self.ck.expect(node, "conventions", (dict,), "a mapping"):
            return Conventions(signature=default_sig)
        self.ck.keys(node, "conventions", ("signature", "riemann_sign", "units"))
        v = node.value
        sig = default_sig
        if "signature" in v:
            s = v["signature"]
            if self.ck.expect(s, "conventions.signature", (str,), "a string of signs such as '-+++'"):
                text = s.value.strip().replace(" ", "").replace(",", "")
                if not re.fullmatch(r"[+-]+", text):
                    self.ck.error(s, "conventions.signature",
                                  f"Expected a string of signs such as '-+++' but received: '{s.value}'")
                elif n and len(text) != n:
                    self.ck.error(s, "conventions.signature",
                                  f"Expected {n} signs (one per coordinate) but received: '{s.value}'")
                else:
                    sig = text
        rs = 1
        if "riemann_sign" in v:
            r = v["riemann_sign"]
            if r.value in (1, -1, "+", "-", "+1", "-1") and not isinstance(r.value, bool):
                rs = -1 if r.value in (-1, "-", "-1") else 1
            else:
                self.ck.error(r, "conventions.riemann_sign", f"Expected +1 or -1 but received: {_shown(r.value)}")
        units = "geometrized"
        if "units" in v:
            u = v["units"]
            if u.value in ("geometrized", "explicit"):
                units = u.value
            else:
                self.ck.error(u, "conventions.units",
                              f"Expected one of: 'geometrized', 'explicit' but received: {_shown(u.value)}")
        G = c = None
        if units == "explicit":
            G, c = sp.Symbol("G", positive=True), sp.Symbol("c", positive=True)
        return Conventions(signature=sig, riemann_sign=rs, units=units, G=G, c=c)

    def coordinates(self) -> list[tuple[str, Node, dict[str, Node]]]:
        node = self.root.get("coordinates")
        if node is None:
            return []
        if not self.ck.expect(node, "coordinates", (list,), "a list of coordinate names"):
            return []
        if not node.value:
            self.ck.error(node, "coordinates", "Expected at least two coordinates but received none")
            return []
        out = []
        for i, item in enumerate(node.value):
            path = f"coordinates[{i}]"
            if isinstance(item.value, str) or (isinstance(item.value, (int, float)) and not isinstance(item.value, bool)):
                name, opts = item.value, {}
            elif isinstance(item.value, dict):
                self.ck.keys(item, path, ("name", "range", "period", "latex"), required=("name",))
                if "name" not in item.value:
                    continue
                name, opts = item.value["name"].value, item.value
            else:
                self.ck.error(item, path, f"Expected a symbol name but received: {_shown(item.value)}")
                continue
            if not isinstance(name, str):
                self.ck.error(item, path, f"Expected a symbol name but received: {_shown(name)}")
                continue
            if self.claim_name(name, "coordinate", item, path):
                out.append((name, item, opts))
        if len(out) == 1 and len(node.value) == 1:
            self.ck.error(node, "coordinates", "Expected at least two coordinates but received one")
        return out

    def parameters(self) -> list[tuple[str, Node, tuple[str, ...], Node | None, Node | None, Node | None]]:
        node = self.root.get("parameters")
        if node is None:
            return []
        if not self.ck.expect(node, "parameters", (dict,), "a mapping of parameter: assumptions"):
            return []
        out = []
        for name, item in node.value.items():
            path = f"parameters.{name}"
            words: tuple[str, ...] = ()
            rng = latex = value = None
            v = item.value
            if v is None:
                words = ()
            elif isinstance(v, str):
                words = tuple(v.replace(",", " ").split())
            elif isinstance(v, list):
                words = tuple(w.value for w in v if self.ck.expect(w, path, (str,), "an assumption word"))
            elif isinstance(v, dict):
                self.ck.keys(item, path, ("assume", "range", "latex", "value"))
                if "assume" in v:
                    a = v["assume"]
                    if isinstance(a.value, str):
                        words = tuple(a.value.replace(",", " ").split())
                    elif isinstance(a.value, list):
                        words = tuple(w.value for w in a.value
                                      if self.ck.expect(w, f"{path}.assume", (str,), "an assumption word"))
                    else:
                        self.ck.error(a, f"{path}.assume", f"Expected an assumption word but received: {_shown(a.value)}")
                rng, latex, value = v.get("range"), v.get("latex"), v.get("value")
            else:
                self.ck.error(item, path, f"Expected assumptions (e.g. 'positive') or a mapping but received: "
                              f"{_shown(v)}")
                continue
            bad = [w for w in words if w not in ASSUMPTION_WORDS]
            for w in bad:
                close = difflib.get_close_matches(w, ASSUMPTION_WORDS, n=1)
                self.ck.error(item, path, f"Expected one of: {', '.join(ASSUMPTION_WORDS)} but received: '{w}'",
                              f"did you mean '{close[0]}'?" if close else None)
            words = tuple(w for w in words if w in ASSUMPTION_WORDS)
            if self.claim_name(name, "parameter", item, path):
                out.append((name, item, words, rng, latex, value))
        return out

    def functions(self, coord_syms: dict[str, sp.Symbol]) -> list[FunctionDecl]:
        node = self.root.get("functions")
        if node is None:
            return []
        if not self.ck.expect(node, "functions", (dict,), "a mapping of function: [arguments]"):
            return []
        out = []
        for name, item in node.value.items():
            path = f"functions.{name}"
            v = item.value
            latex = None
            words: tuple[str, ...] = ()
            if isinstance(v, dict):
                self.ck.keys(item, path, ("of", "latex", "assume"), required=("of",))
                if "of" not in v:
                    continue
                args_node = v["of"]
                latex = v.get("latex")
                if "assume" in v and isinstance(v["assume"].value, str):
                    words = tuple(v["assume"].value.replace(",", " ").split())
                    for w in words:
                        if w not in ASSUMPTION_WORDS:
                            self.ck.error(v["assume"], f"{path}.assume",
                                          f"Expected one of: {', '.join(ASSUMPTION_WORDS)} but received: '{w}'")
                    words = tuple(w for w in words if w in ASSUMPTION_WORDS)
            else:
                args_node = item
            args_v = args_node.value
            if isinstance(args_v, str):
                arg_names = [a.strip() for a in args_v.split(",") if a.strip()]
            elif isinstance(args_v, list) and all(isinstance(a.value, str) for a in args_v):
                arg_names = [a.value for a in args_v]
            else:
                self.ck.error(args_node, path, f"Expected a list of coordinate names but received: {_shown(args_v)}")
                continue
            if not arg_names:
                self.ck.error(args_node, path, "A function must depend on at least one coordinate")
                continue
            syms = []
            for a in arg_names:
                if a not in coord_syms:
                    kind = self.names.get(a)
                    close = difflib.get_close_matches(a, list(coord_syms), n=1)
                    msg = (f"Function '{name}' depends on '{a}', which is a {kind}, not a coordinate" if kind
                           else f"Function '{name}' depends on '{a}', which is not a declared coordinate")
                    self.ck.error(args_node, path, msg, f"did you mean '{close[0]}'?" if close else None)
                else:
                    syms.append(coord_syms[a])
            if len(set(arg_names)) != len(arg_names):
                self.ck.error(args_node, path, f"Function '{name}' lists a coordinate twice")
                continue
            if len(syms) != len(arg_names):
                continue
            if not self.claim_name(name, "function", item, path):
                continue
            tex = self._latex(latex, f"{path}.latex") or _latex_default(name)
            fn = sp.Function(name, **_assumption_kwargs(words))
            out.append(FunctionDecl(name, fn, tuple(syms), tex, words))
        return out

    def _latex(self, node: Node | None, path: str) -> str | None:
        if node is None:
            return None
        if self.ck.expect(node, path, (str,), "a LaTeX string"):
            text = node.value.strip()
            depth = 0
            for ch in text:
                depth += ch == "{"
                depth -= ch == "}"
                if depth < 0:
                    break
            if depth != 0:
                self.ck.error(node, path, f"Unbalanced braces in LaTeX: '{text}'")
                return None
            if re.search(r"\\(input|include|write|openout|openin|read|catcode|def|let|immediate|csname|"
                         r"newcommand|renewcommand|usepackage|documentclass|special)\b", text):
                self.ck.error(node, path, f"LaTeX for a symbol may not use file, definition or category "
                              f"commands: '{text}'")
                return None
            return text
        return None
