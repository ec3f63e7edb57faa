"""The claims stage in the report and the JSON results: each claim's verdict and the source check.

:func:`section` builds the plain data of the report's "Checks" section
(``templates/sections/claims.*.j2``); :func:`results` the JSON blocks ``claims``
and ``source_check``; :func:`claim_json` and :func:`source_json` serve
``texgen check --json`` too.
"""
from __future__ import annotations

from typing import Any

import sympy as sp

from ...errors import DerivationError
from ...physics.claims import Claim, ClaimResult, SourceResult, check_source, decide_claims
from ...spec.expressions import expression_to_text
from ...spec.model import Spacetime
from ..latex import escape_text
from ..printer import equation


def _claim_symbol(printer, claim: Claim) -> str:
    tex = {"ricci_scalar": "R", "kretschmann": r"R_{abcd}R^{abcd}", "ricci_squared": r"R_{ab}R^{ab}",
           "weyl_squared": r"C_{abcd}C^{abcd}", "determinant": r"\det g", "energy_density": r"\rho",
           "horizons": r"r_{\mathrm{h}}"}
    if claim.kind in ("scalar",) or claim.name in ("energy_density", "horizons"):
        return tex[claim.name]
    if claim.name == "pressure":
        return "p_{" + printer.coord_latex[claim.indices[0]] + "}"
    kernel, pos = {"christoffel": (r"\Gamma", "udd"), "christoffel_first": (r"\Gamma", "ddd"),
                   "riemann": ("R", "uddd"), "riemann_down": ("R", "dddd"), "ricci": ("R", "dd"),
                   "einstein": ("G", "dd"), "einstein_mixed": ("G", "ud"), "weyl": ("C", "dddd"),
                   "metric_inverse": ("g", "uu")}[claim.name]
    return printer.symbol(kernel, pos, claim.indices)


_PROPERTY_TEXT = {"vacuum": "vacuum ($R_{ab} = 0$)", "flat": "flat ($R_{abcd} = 0$)",
                  "conformally_flat": "conformally flat ($C_{abcd} = 0$)",
                  "einstein_space": "an Einstein space ($R_{ab} = R g_{ab}/n$)"}


_STATUS_TEXT = {"proved": "proved", "agrees_numerically": "agrees numerically", "fails": "fails",
                "undecided": "undecided"}


def _claim_data(printer, r: ClaimResult, shorten=lambda e: e) -> dict:
    c = r.claim
    item = {"label": c.label, "label_tex": escape_text(c.label), "status": r.status,
            "status_text": _STATUS_TEXT[r.status], "holds": r.holds, "method": r.method,
            "method_tex": escape_text(r.method), "message": r.message, "message_tex": escape_text(r.message),
            "note": c.note.rstrip(". "), "note_tex": escape_text(c.note.rstrip(". ")),
            "reference": c.reference.rstrip(". "), "reference_tex": escape_text(c.reference.rstrip(". ")),
            "kind": c.kind}
    if c.kind == "property":
        item["statement"] = ("the spacetime is " if c.expected else "the spacetime is not ") + _PROPERTY_TEXT[c.name]
    elif c.kind == "energy_condition":
        item["statement"] = f"the {c.name} energy condition " + ("holds" if c.expected == "holds" else "is violated")
    elif c.kind == "horizons":
        item["statement"] = "horizons at $" + ", ".join(printer.tex(x) for x in c.expected) + "$"
    else:
        lhs = _claim_symbol(printer, c)
        item["claimed"] = equation(printer, lhs, c.expected)
        item["statement"] = ""
        if r.status == "fails" and isinstance(r.derived, sp.Expr):
            item["derived"] = equation(printer, lhs, shorten(r.derived))
            if r.difference is not None:
                item["difference"] = equation(printer, r"\text{claimed} - \text{derived}", shorten(r.difference))
    item["statement_md"] = item["statement"]
    if r.witness is not None:
        item["witness"] = {"point": ", ".join(f"{k} = {v}" for k, v in r.witness.point),
                           "claimed": r.witness.claimed, "derived": r.witness.derived}
    return item


def _source_data(printer, s: SourceResult, shorten=lambda e: e) -> dict:
    names = printer.coord_latex
    item = {"type": s.type, "type_text": s.type.replace("_", " "), "status": s.status,
            "status_text": _STATUS_TEXT[s.status], "holds": s.holds, "method": s.method,
            "method_tex": escape_text(s.method),
            "residual": [equation(printer, r"\mathcal{E}_{" + names[a] + " " + names[b] + "}", shorten(v))
                         for (a, b), v in s.residual],
            "extra": [equation(printer, (r"\partial_a(\sqrt{|g|}F^{a" + names[k[0]] + "})/\\sqrt{|g|}")
                               if nm == "maxwell" else r"\text{normalisation}", v) for nm, k, v in s.extra],
            "imposed": [equation(printer, printer.tex(t), v) for t, v in s.imposed]}
    if s.witness is not None:
        item["witness"] = {"point": ", ".join(f"{k} = {v}" for k, v in s.witness.point),
                           "value": s.witness.claimed}
    return item


def report_section(spacetime: Spacetime, curvature, printer) -> dict | None:
    """Plain data for the report's "Checks" section, or ``None`` without claims or source."""
    if spacetime.section("claims") is None and spacetime.section("source") is None:
        return None
    def shorten(e):
        # The engine's display form (definitions' symbols, factors), where it applies.
        try:
            return curvature.display(e)
        except DerivationError:
            return e

    claims = [_claim_data(printer, r, shorten) for r in decide_claims(spacetime, curvature)]
    src = check_source(spacetime, curvature)
    return {"template_tex": "sections/claims.tex.j2", "template_md": "sections/claims.md.j2",
            "claims": claims, "failed": sum(1 for c in claims if not c["holds"]),
            "source": _source_data(printer, src, shorten) if src is not None else None}


def _text(x) -> Any:
    if isinstance(x, sp.Basic):
        return expression_to_text(x)
    if isinstance(x, tuple):
        return [_text(y) for y in x]
    return x


def claim_json(spacetime: Spacetime, r: ClaimResult) -> dict:
    """One claim's verdict as JSON-ready data."""
    c = r.claim
    names = [co.name for co in spacetime.coordinates]
    out = {"label": c.label, "kind": c.kind, "name": c.name, "indices": [names[i] for i in c.indices],
           "claimed": c.written, "status": r.status, "holds": r.holds, "method": r.method}
    if r.derived is not None:
        out["derived"] = _text(r.derived)
    if r.difference is not None:
        out["difference"] = _text(r.difference)
    if r.witness is not None:
        out["witness"] = {"point": dict(r.witness.point), "claimed": r.witness.claimed,
                          "derived": r.witness.derived}
    if r.message:
        out["message"] = r.message
    if c.note:
        out["note"] = c.note
    if c.location is not None and c.location.line is not None:
        out["line"] = c.location.line
    return out


def source_json(spacetime: Spacetime, s: SourceResult | None) -> dict | None:
    """The source check as JSON-ready data."""
    if s is None:
        return None
    names = [c.name for c in spacetime.coordinates]
    out = {"type": s.type, "status": s.status, "holds": s.holds, "method": s.method,
           "residual": {f"{names[a]},{names[b]}": _text(v) for (a, b), v in s.residual},
           "extra": {f"{nm}[{','.join(names[i] for i in k)}]": _text(v) for nm, k, v in s.extra},
           "imposed": [{"target": _text(t), "value": _text(v)} for t, v in s.imposed]}
    if s.witness is not None:
        out["witness"] = {"point": dict(s.witness.point), "value": s.witness.claimed}
    return out


def results(spacetime: Spacetime, curvature) -> dict:
    """JSON-ready results: ``{"claims": [...], "source_check": {...} or None}``."""
    return {"claims": [claim_json(spacetime, r) for r in decide_claims(spacetime, curvature)],
            "source_check": source_json(spacetime, check_source(spacetime, curvature))}
