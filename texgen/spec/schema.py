"""Checks that turn a loaded spacetime file into the frozen :class:`~texgen.spec.model.Spacetime`.

Every problem found is collected with its file, line, column and key path, and
raised once as :class:`~texgen.errors.ConfigErrors` (as a user fixing a file wants
to see all of them at once). The format itself is documented in docs/format.md.
"""
from __future__ import annotations

import difflib

import sympy as sp

from ..errors import ConfigError, ConfigErrors, ExpressionError
from .checker import (DERIVABLE, RESERVED_SECTIONS, _assumption_kwargs, _Builder, _latex_default,
                      _range_from_links, _shown, _sign_words)
from .expressions import Namespace, parse_relation
from .loader import Document, Node
from .metric import _metric, _numerical_checks
from .model import Coordinate, Definition, Parameter, Range, Section, Spacetime


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


def namespace(model: Spacetime, extra: dict[str, sp.Symbol] | None = None) -> Namespace:
    """The names expressions about ``model`` may use (claims, sources, tetrads, ...)."""
    syms = {c.name: c.symbol for c in model.coordinates}
    syms.update({p.name: p.symbol for p in model.parameters})
    syms.update({d.name: d.symbol for d in model.definitions})
    if extra:
        syms.update(extra)
    funcs = {f.name: (f.function, f.arguments) for f in model.functions}
    return Namespace(syms, funcs)
