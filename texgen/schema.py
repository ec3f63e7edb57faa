"""Checks that turn a loaded spacetime file into the frozen :class:`~texgen.model.Spacetime`.

Every problem found is collected with its file, line, column and key path, and
raised once as :class:`~texgen.errors.ConfigErrors` (as a user fixing a file wants
to see all of them at once). The format itself is documented in docs/format.md.
"""
from __future__ import annotations

import difflib
import random
import re
from typing import Any, Callable

import mpmath
import sympy as sp

from .errors import ConfigError, ConfigErrors, ExpressionError, Location
from .expressions import (CONSTANTS, MATH_FUNCTIONS, Namespace, expression_to_text, parse_expression,
                          parse_relation)
from .loader import Document, Node
from .model import (Conventions, Coordinate, Definition, FunctionDecl, Parameter, Range, Section,
                    Spacetime)
from . import sampling

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


_TERM_HINT = "each term is a coefficient times two differentials, e.g. r^2 dtheta^2 or 2 A dt dphi"


def _differential_form(expr: sp.Expr, diffs: dict[sp.Symbol, int]) -> dict[tuple[int, ...], sp.Expr]:
    """Split an expression into coefficients of products of differentials.

    Works on the expression's own structure (no global expand), so that a
    coefficient such as ``-(1 - 2*M/r)`` stays as the user grouped it.
    """
    if not expr.free_symbols & set(diffs):
        return {(): expr}
    if isinstance(expr, sp.Symbol):
        return {(diffs[expr],): sp.S.One}
    if isinstance(expr, sp.Add):
        out: dict[tuple[int, ...], sp.Expr] = {}
        for term in expr.args:
            for k, v in _differential_form(term, diffs).items():
                out[k] = out.get(k, sp.S.Zero) + v
        return out
    if isinstance(expr, sp.Mul):
        out = {(): sp.S.One}
        for factor in expr.args:
            f = _differential_form(factor, diffs)
            new: dict[tuple[int, ...], sp.Expr] = {}
            for k1, v1 in out.items():
                for k2, v2 in f.items():
                    key = tuple(sorted(k1 + k2))
                    if len(key) > 2:
                        raise ExpressionError(f"A term has more than two differentials: '{_shown_expr(expr)}'")
                    new[key] = new.get(key, sp.S.Zero) + v1 * v2
            out = new
        return out
    if isinstance(expr, sp.Pow) and expr.exp.is_Integer and 0 < expr.exp <= 2:
        base = _differential_form(expr.base, diffs)
        return _differential_form(sp.Mul(expr.base, expr.base, evaluate=False), diffs) if expr.exp == 2 else base
    if isinstance(expr, sp.Pow) and expr.exp.is_Integer and expr.exp < 0:
        raise ExpressionError(f"A differential may not stand in a denominator: '{_shown_expr(expr)}'")
    raise ExpressionError(f"A differential may only appear in products and squares, not in "
                          f"{expr.func.__name__}(...): '{_shown_expr(expr)}'")


def _shown_expr(expr: sp.Expr) -> str:
    """An expression for an error message, written the way a spacetime file writes it."""
    return expression_to_text(expr).replace("**", "^")


def build_model(doc: Document) -> Spacetime:
    """Check a loaded document and build the frozen model (raises ConfigErrors)."""
    b = _Builder(doc)
    ck = b.ck
    header = b.header()
    coords_raw = b.coordinates()
    n = len(coords_raw)
    conv = b.conventions(n)

    # First pass: placeholder symbols, so that ranges can be read before the
    # assumptions they imply are known.
    params_raw = b.parameters()
    if conv.units == "explicit":
        for nm in ("G", "c"):
            if nm in b.names:
                ck.error(doc.root.value.get("conventions"), "conventions.units",
                         f"With explicit units '{nm}' is reserved for the physical constant, but it is also declared "
                         f"as a {b.names[nm]}")
    plain = {name: sp.Symbol(name, real=True) for name, *_ in coords_raw}
    plain.update({name: sp.Symbol(name, real=True) for name, *_ in params_raw})
    ns_plain = Namespace(plain, {})

    def read_range(node: Node | None, path: str, name: str, ns: Namespace) -> Range | None:
        if node is None:
            return None
        if not isinstance(node.value, str):
            ck.error(node, path, f"Expected a range such as '0 < {name}' but received: {_shown(node.value)}")
            return None
        try:
            links = parse_relation(node.value, ns)
            return _range_from_links(links, ns.symbols[name], node.value)
        except ExpressionError as exc:
            ck.error(node, path, exc.message, exc.hint)
            return None

    # Ranges are read twice (placeholders, then real symbols); only the second
    # reading reports, or each bad range would be reported twice.
    n_errors_first_pass = len(ck.errors)
    pre_param_ranges = {}
    for name, item, words, rng, latex, value in params_raw:
        pre_param_ranges[name] = read_range(rng, f"parameters.{name}.range", name, ns_plain) if rng else None
    pre_coord_ranges = {}
    for name, item, opts in coords_raw:
        r = opts.get("range") if isinstance(opts, dict) else None
        pre_coord_ranges[name] = read_range(r, f"coordinates[{[c[0] for c in coords_raw].index(name)}].range",
                                            name, ns_plain) if r else None

    # Real symbols with their assumptions.
    symbols: dict[str, sp.Symbol] = {}
    for name, item, words, rng, latex, value in params_raw:
        all_words = tuple(dict.fromkeys(words + _sign_words(pre_param_ranges[name])))
        symbols[name] = sp.Symbol(name, **_assumption_kwargs(all_words))
    for name, item, opts in coords_raw:
        symbols[name] = sp.Symbol(name, **_assumption_kwargs(_sign_words(pre_coord_ranges[name])))
    if conv.G is not None:
        symbols.setdefault("G", conv.G)
        symbols.setdefault("c", conv.c)
    ns_bounds = Namespace({k: v for k, v in symbols.items()}, {})
    ck.errors = ck.errors[:n_errors_first_pass]

    parameters = []
    for name, item, words, rng, latex, value in params_raw:
        path = f"parameters.{name}"
        prange = read_range(rng, f"{path}.range", name, ns_bounds) if rng else None
        val = None
        if value is not None:
            val = ck.expression(value, f"{path}.value", Namespace({}, {}))
        tex = b._latex(latex, f"{path}.latex") or _latex_default(name)
        all_words = tuple(dict.fromkeys(words + _sign_words(prange)))
        parameters.append(Parameter(name, symbols[name], tex, all_words, prange, val))
    if conv.G is not None and "G" not in b.names:
        parameters.append(Parameter("G", conv.G, "G", ("positive",)))
        parameters.append(Parameter("c", conv.c, "c", ("positive",)))

    coordinates = []
    for i, (name, item, opts) in enumerate(coords_raw):
        path = f"coordinates[{i}]"
        crange = read_range(opts.get("range"), f"{path}.range", name, ns_bounds) if opts.get("range") else None
        period = None
        if "period" in opts:
            period = ck.expression(opts["period"], f"{path}.period", ns_bounds)
            if period is not None and (period.free_symbols - set(p.symbol for p in parameters) or
                                       (period.is_number and not period.is_positive)):
                ck.error(opts["period"], f"{path}.period", f"Expected a positive period but received: '{period}'")
                period = None
        tex = b._latex(opts.get("latex"), f"{path}.latex") or _latex_default(name)
        coordinates.append(Coordinate(name, symbols[name], tex, crange, period))

    coord_syms = {c.name: c.symbol for c in coordinates}
    functions = b.functions(coord_syms)
    fmap = {f.name: (f.function, f.arguments) for f in functions}

    # Definitions: parsed against every definition name, then ordered; cycles are errors.
    definitions = _definitions(b, symbols, fmap)
    def_syms = {d.symbol: d.expanded for d in definitions}
    # Definitions rejected above (cycles, bad expressions) still count as declared, so
    # that their uses are not reported a second time as unknown names.
    rejected = {name: sp.Symbol(name, real=True) for name, kind in b.names.items()
                if kind == "definition" and name not in {d.name for d in definitions}}
    ns_full = Namespace({**symbols, **rejected, **{d.name: d.symbol for d in definitions}}, fmap)

    lam = sp.S.Zero
    if "cosmological_constant" in b.root:
        lnode = b.root["cosmological_constant"]
        e = ck.expression(lnode, "cosmological_constant", ns_full)
        if e is not None:
            lam = e.xreplace(def_syms)
            if any(s in lam.free_symbols for s in coord_syms.values()) or lam.has(sp.core.function.AppliedUndef):
                ck.error(lnode, "cosmological_constant", "The cosmological constant must not depend on the coordinates")

    derive = _derive_list(b)
    display = _metric(b, coordinates, ns_full) if coordinates else None
    sections = tuple(Section(k, b.root[k].plain(), b.root[k].line, b.root[k]) for k in RESERVED_SECTIONS
                     if k in b.root)
    for s in sections:
        expected = dict if s.key in ("source", "structure", "figures") else (list, dict) if s.key == "tetrad" else list
        if not isinstance(s.data, expected):
            kind = "a mapping" if expected is dict else "a list" if expected is list else "a list or mapping"
            ck.error(s.node, s.key, f"Expected {kind} but received: {_shown(s.data)}")

    if ck.errors:
        raise ConfigErrors(_by_position(ck.errors))
    assert display is not None
    metric = display.xreplace(def_syms) if def_syms else display
    model = Spacetime(
        source=doc.source, sha256=doc.sha256, id=header["id"], title=header["title"],
        version=header["version"], description=header["description"], references=header["references"],
        coordinates=tuple(coordinates), parameters=tuple(parameters), functions=tuple(functions),
        definitions=tuple(definitions), metric=sp.ImmutableMatrix(metric), metric_display=display,
        conventions=conv, cosmological_constant=lam, notes=header["notes"], family=header["family"],
        changelog=header["changelog"], derive=derive, sections=sections,
    )
    _numerical_checks(b, model)
    if ck.errors:
        raise ConfigErrors(_by_position(ck.errors))
    return model


def _by_position(errors: list[ConfigError]) -> list[ConfigError]:
    """Errors in file order, as a reader fixing the file goes through them."""
    def key(e: ConfigError):
        loc = e.location
        return (loc.line or 0, loc.column or 0) if loc else (0, 0)
    return sorted(errors, key=key)


def _definitions(b: _Builder, symbols: dict[str, sp.Symbol], fmap) -> list[Definition]:
    ck = b.ck
    node = b.root.get("definitions")
    if node is None:
        return []
    if not ck.expect(node, "definitions", (dict,), "a mapping of name: expression"):
        return []
    raw = []
    for name, item in node.value.items():
        path = f"definitions.{name}"
        latex = None
        expr_node = item
        if isinstance(item.value, dict):
            ck.keys(item, path, ("value", "latex"), required=("value",))
            if "value" not in item.value:
                continue
            expr_node, latex = item.value["value"], item.value.get("latex")
        if b.claim_name(name, "definition", item, path):
            raw.append((name, item, expr_node, latex))
    dsyms = {name: sp.Symbol(name, real=True) for name, *_ in raw}
    ns = Namespace({**symbols, **dsyms}, fmap)
    parsed = {}
    for name, item, expr_node, latex in raw:
        e = ck.expression(expr_node, f"definitions.{name}", ns)
        if e is not None:
            parsed[name] = (e, item, latex)
    # Order by dependency; a cycle is reported with its path.
    deps = {name: [d for d in dsyms if dsyms[d] in e.free_symbols] for name, (e, _, _) in parsed.items()}
    order: list[str] = []
    state: dict[str, int] = {}

    def visit(name: str, trail: list[str]) -> bool:
        if state.get(name) == 2:
            return True
        if state.get(name) == 1:
            cycle = trail[trail.index(name):] + [name]
            item = parsed[name][1]
            ck.error(item, f"definitions.{name}", "Circular definition: " + " -> ".join(cycle))
            return False
        state[name] = 1
        for d in deps.get(name, []):
            if d not in parsed:  # its own error is reported already
                state[name] = 2
                return False
            if not visit(d, trail + [name]):
                state[name] = 2
                return False
        state[name] = 2
        order.append(name)
        return True

    for name in parsed:
        visit(name, [])
    expanded: dict[sp.Symbol, sp.Expr] = {}
    out = []
    for name in order:
        e, item, latex = parsed[name]
        full = e.xreplace(expanded)
        expanded[dsyms[name]] = full
        tex = b._latex(latex, f"definitions.{name}.latex") or _latex_default(name)
        out.append(Definition(name, dsyms[name], tex, e, full))
    declared = [name for name, *_ in raw]
    out.sort(key=lambda d: declared.index(d.name))
    return out


def _derive_list(b: _Builder) -> tuple[str, ...]:
    node = b.root.get("derive")
    if node is None:
        return ()
    if not b.ck.expect(node, "derive", (list,), "a list of quantity names"):
        return ()
    out = []
    for i, item in enumerate(node.value):
        if item.value in DERIVABLE:
            out.append(item.value)
        else:
            close = difflib.get_close_matches(str(item.value), DERIVABLE, n=1)
            b.ck.error(item, f"derive[{i}]", f"Expected one of: {', '.join(DERIVABLE)} but received: "
                       f"{_shown(item.value)}", f"did you mean '{close[0]}'?" if close else None)
    return tuple(out)


def _component_key(key: str, names: list[str]) -> tuple[list[int] | None, str | None]:
    parts = [p for p in re.split(r"[\s,]+", key.strip().strip("[]()")) if p]
    if len(parts) != 2:
        return None, f"Expected a pair of coordinates such as 't,phi' but received: '{key}'"
    out = []
    for p in parts:
        if p in names:
            out.append(names.index(p))
        elif p.isdigit() and int(p) < len(names):
            out.append(int(p))
        else:
            close = difflib.get_close_matches(p, names, n=1)
            hint = f" (did you mean '{close[0]}'?)" if close else ""
            return None, f"'{p}' is not a coordinate of this spacetime{hint}"
    return out, None


def _metric(b: _Builder, coordinates: list[Coordinate], ns: Namespace) -> sp.ImmutableMatrix | None:
    ck = b.ck
    node = b.root.get("metric")
    n = len(coordinates)
    if node is None:
        return None
    if not ck.expect(node, "metric", (dict,), "a mapping with one of: line_element, components, matrix"):
        return None
    ck.keys(node, "metric", ("line_element", "components", "matrix"))
    forms = [k for k in ("line_element", "components", "matrix") if k in node.value]
    if len(forms) != 1:
        ck.error(node, "metric", "Expected exactly one of: line_element, components, matrix but received: "
                 + (", ".join(forms) if forms else "none"))
        return None
    form = forms[0]
    sub = node.value[form]
    g = [[sp.S.Zero] * n for _ in range(n)]
    names = [c.name for c in coordinates]
    if form == "line_element":
        diffs = {}
        for i, c in enumerate(coordinates):
            dname = "d" + c.name
            if dname in ns.symbols or dname in ns.functions:
                ck.error(sub, "metric.line_element", f"The differential '{dname}' clashes with the declared "
                         f"{b.names.get(dname, 'name')} '{dname}'", "rename it or give metric.components instead")
                return None
            diffs[dname] = sp.Symbol(dname)
        ns_le = Namespace({**ns.symbols, **diffs}, ns.functions)
        expr = ck.expression(sub, "metric.line_element", ns_le, juxtapose=True)
        if expr is None:
            return None
        index = {diffs["d" + c.name]: i for i, c in enumerate(coordinates)}
        try:
            form_ = _differential_form(expr, index)
        except ExpressionError as exc:
            ck.error(sub, "metric.line_element", exc.message, _TERM_HINT)
            return None
        bad = [k for k, v in form_.items() if len(k) != 2 and v != 0]
        if bad:
            k = bad[0]
            term = form_[k] * sp.Mul(*[sp.Symbol("d" + names[i]) for i in k])
            ck.error(sub, "metric.line_element",
                     f"Every term must be a product of two differentials; this one has {len(k)}: "
                     f"'{_shown_expr(term)}'", _TERM_HINT)
            return None
        for key, v in form_.items():
            if len(key) != 2 or v == 0:  # what is left of terms that cancelled
                continue
            i, j = key
            if i == j:
                g[i][i] = v
            else:
                g[i][j] = g[j][i] = v / 2
    elif form == "components":
        if not ck.expect(sub, "metric.components", (dict,), "a mapping 'a,b': expression"):
            return None
        seen: dict[tuple[int, int], tuple[str, sp.Expr]] = {}
        errors_before = len(ck.errors)
        for key, item in sub.value.items():
            path = f"metric.components[{key}]"
            idx, err = _component_key(key, names)
            if err:
                line, col = b.doc.key_lines.get(f"metric.components.{key}", (item.line, item.column))
                ck.errors.append(ConfigError(err, Location(b.doc.source, line, col, path)))
                continue
            e = ck.expression(item, path, ns)
            if e is None:
                continue
            i, j = sorted(idx)
            if (i, j) in seen:
                other, prev = seen[(i, j)]
                if sp.simplify(prev - e) != 0:
                    ck.error(item, path, f"The metric is not symmetric: [{other}] = {prev} but [{key}] = {e}",
                             "give each pair of coordinates once")
                continue
            seen[(i, j)] = (key, e)
            g[i][j] = g[j][i] = e
        for i in range(n if len(ck.errors) == errors_before else 0):
            if (i, i) not in seen and not any(k[0] == i or k[1] == i for k in seen):
                ck.error(sub, "metric.components", f"No component involves coordinate '{names[i]}'",
                         "the metric would be degenerate")
    else:
        if not ck.expect(sub, "metric.matrix", (list,), f"a list of {n} rows"):
            return None
        rows = sub.value
        if len(rows) != n or any(not isinstance(r.value, list) or len(r.value) != n for r in rows):
            shape = f"{len(rows)} rows of lengths " + ", ".join(
                str(len(r.value)) if isinstance(r.value, list) else "?" for r in rows)
            ck.error(sub, "metric.matrix", f"Expected a {n}x{n} matrix (one row and column per coordinate) "
                     f"but received: {shape}")
            return None
        for i, row in enumerate(rows):
            for j, item in enumerate(row.value):
                e = ck.expression(item, f"metric.matrix[{i}][{j}]", ns)
                if e is not None:
                    g[i][j] = e
        for i in range(n):
            for j in range(i + 1, n):
                if sp.simplify(g[i][j] - g[j][i]) != 0:
                    ck.error(rows[j].value[i], f"metric.matrix[{j}][{i}]",
                             f"The metric is not symmetric: [{i}][{j}] = {g[i][j]} but [{j}][{i}] = {g[j][i]}")
    return sp.ImmutableMatrix(g)


def _numerical_checks(b: _Builder, model: Spacetime) -> None:
    """Degenerate metric and signature, tested at sample points in the declared ranges."""
    ck = b.ck
    mnode = b.root["metric"]
    g = model.metric
    for (i, j), e in zip(((i, j) for i in range(g.rows) for j in range(g.cols)), g):
        if e.has(sp.zoo, sp.nan, sp.oo):
            ck.error(mnode, f"metric[{model.coordinates[i].name},{model.coordinates[j].name}]",
                     "The metric component is undefined (division by zero after expanding definitions)")
            return
    if all(e == 0 for e in g):
        ck.error(mnode, "metric", "The metric is zero")
        return
    rng = random.Random(20260101)
    try:
        points = [sampling.sample_point(model, rng) for _ in range(4)]
    except ValueError:
        ck.error(mnode, "metric", "No point satisfies every declared range, so the metric cannot be checked",
                 "check the coordinate and parameter ranges")
        return
    want_neg = model.conventions.signature.count("-")
    tested = degenerate = 0
    mismatch = None
    for pt in points:
        fvals = sampling.function_values(g, rng)
        # Floats, not the exact rationals: an exact Rational**Rational such as
        # t**(2*p1) at a sampled point makes sympy factor huge integers.
        fpt = {k: sp.Float(v, 30) for k, v in pt.items()}
        ffv = {k: sp.Float(v, 30) for k, v in fvals.items()}
        try:
            with mpmath.workdps(30):
                num = [[complex(sp.N(e.xreplace(ffv).xreplace(fpt), 30)) for e in row] for row in g.tolist()]
                if any(abs(z.imag) > 1e-20 for row in num for z in row):
                    continue
                m = mpmath.matrix([[z.real for z in row] for row in num])
                tested += 1
                # Scale symmetrically, m_ij / (s_i s_j) with s_i the root of row i's length:
                # the number of negative eigenvalues is unchanged (Sylvester's law of
                # inertia), and components of very different sizes (1 and 10^64) no
                # longer look singular to mpmath's pivoting. A zero row is degenerate.
                s = [mpmath.sqrt(mpmath.norm(m[i, :])) for i in range(g.rows)]
                if any(x == 0 for x in s):
                    degenerate += 1
                    continue
                m = mpmath.matrix([[m[i, j] / (s[i] * s[j]) for j in range(g.cols)] for i in range(g.rows)])
                bound = mpmath.fprod(mpmath.norm(m[i, :]) for i in range(g.rows))  # Hadamard's bound on |det|
                if abs(mpmath.det(m)) < mpmath.mpf(10) ** -20 * bound:
                    degenerate += 1
                    continue
                ev = mpmath.eigsy(m, eigvals_only=True)
                neg = sum(1 for x in ev if x < 0)
        except (TypeError, ValueError, ZeroDivisionError, OverflowError):
            continue
        if neg == want_neg:
            return
        mismatch = (pt, neg)
    if tested and degenerate == tested:
        ck.error(mnode, "metric", "The metric is degenerate: its determinant vanishes at every sampled point",
                 "check for a missing or repeated component")
        return
    if mismatch is not None:
        pt, neg = mismatch
        where = ", ".join(f"{k}={float(v):.4g}" for k, v in pt.items())
        sig = model.conventions.signature
        ck.error(b.root.get("conventions", mnode), "conventions.signature",
                 f"Declared signature '{sig}' has {want_neg} negative sign(s) but the metric has {neg} negative "
                 f"eigenvalue(s) at {where}",
                 "fix the metric or declare the signature it has")


def namespace(model: Spacetime, extra: dict[str, sp.Symbol] | None = None) -> Namespace:
    """The names expressions about ``model`` may use (claims, sources, tetrads, ...)."""
    syms = {c.name: c.symbol for c in model.coordinates}
    syms.update({p.name: p.symbol for p in model.parameters})
    syms.update({d.name: d.symbol for d in model.definitions})
    if extra:
        syms.update(extra)
    funcs = {f.name: (f.function, f.arguments) for f in model.functions}
    return Namespace(syms, funcs)
