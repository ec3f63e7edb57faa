"""Claims: what the author of a spacetime file believes, decided against the derivation.

A claim is first decided exactly (the difference of claimed and derived values
cancels in the engine's normal form); when the normal form cannot settle it,
both sides are compared numerically at many seeded points inside the declared
ranges, with free functions replaced by random smooth stand-ins
(:mod:`texgen.physics.comparison`). A claim that agrees only numerically is
reported as such, never as proved.

The ``source`` section is checked the same way: the field equations with the
declared matter's own stress-energy tensor, reduced by the ``impose`` relations.
The sections are read in :mod:`texgen.physics.claim_sections`; the report and JSON
forms are built in :mod:`texgen.output.sections.checks`.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import sympy as sp

from ..errors import DerivationError
from ..spec.expressions import expression_to_text
from ..spec.model import Spacetime
from . import sources as _sources
from .analysis import analyse
from .claim_sections import (COMPONENTS, ENERGY_CONDITIONS, MATTER, PROPERTIES, QUANTITIES, SCALARS, STATUSES,
                             VERDICTS, Claim, _time_index, parse_claims, parse_impose, parse_source)
from .comparison import (NUMERIC_DIGITS, NUMERIC_POINTS, Decision, Witness, compare_numerically, decide_equal,
                         imposed_substitutions, reduce_imposed)

__all__ = ["COMPONENTS", "ENERGY_CONDITIONS", "MATTER", "NUMERIC_DIGITS", "NUMERIC_POINTS", "PROPERTIES",
           "QUANTITIES", "SCALARS", "STATUSES", "VERDICTS", "Claim", "ClaimResult", "Decision", "SourceResult",
           "Witness", "check_source", "compare_numerically", "decide_claims", "decide_equal",
           "imposed_substitutions", "parse_claims", "parse_impose", "parse_source", "reduce_imposed"]


@dataclass(frozen=True)
class ClaimResult:
    """The verdict on one claim."""

    claim: Claim
    status: str
    """One of :data:`STATUSES`."""
    method: str
    """How it was decided, in words."""
    derived: Any = None
    """The derived value (expression, tuple, bool or verdict), if any."""
    difference: sp.Expr | None = None
    witness: Witness | None = None
    message: str = ""

    @property
    def holds(self) -> bool:
        return self.status in ("proved", "agrees_numerically")


@dataclass(frozen=True)
class SourceResult:
    """The verdict of the exact-solution check against the declared source."""

    type: str
    status: str
    method: str
    residual: tuple[tuple[tuple[int, int], sp.Expr], ...] = ()
    """Non-vanishing components of s G_ab + σΛg_ab − κT_ab after the imposed relations."""
    extra: tuple[tuple[str, tuple[int, ...], sp.Expr], ...] = ()
    """Non-vanishing further equations (Maxwell, normalisation)."""
    imposed: tuple[tuple[sp.Basic, sp.Expr], ...] = ()
    """The substitutions taken from ``impose``, in order."""
    witness: Witness | None = None

    @property
    def holds(self) -> bool:
        return self.status in ("proved", "agrees_numerically")


def _component(curvature, name: str, idx: tuple[int, ...]) -> sp.Expr:
    if name == "metric_inverse":
        return curvature.inverse[idx]
    table = getattr(curvature, name)
    return table[idx] if len(idx) != 2 else table[idx[0], idx[1]]


def _property_components(spacetime: Spacetime, curvature, name: str) -> list[tuple[tuple[int, ...], sp.Expr]]:
    n = spacetime.dimension
    if name == "vacuum":
        ric = curvature.ricci
        return [((a, b), ric[a, b]) for a in range(n) for b in range(a, n)]
    if name == "einstein_space":
        ric, R, g = curvature.ricci, curvature.ricci_scalar, spacetime.metric
        return [((a, b), ric[a, b] - R * g[a, b] / n) for a in range(n) for b in range(a, n)]
    table = curvature.riemann_down if name == "flat" else curvature.weyl
    return [((a, b, c, d), table[a, b, c, d]) for a in range(n) for b in range(a + 1, n)
            for c in range(n) for d in range(c + 1, n) if (a, b) <= (c, d)]


def _decide_property(spacetime, curvature, claim: Claim) -> ClaimResult:
    comps = _property_components(spacetime, curvature, claim.name)
    names = [c.name for c in spacetime.coordinates]
    worst = "proved"
    methods = set()
    for idx, value in comps:
        dec = decide_equal(spacetime, curvature, sp.S.Zero, value)
        key = ",".join(names[i] for i in idx)
        if dec.status == "fails":
            # The property fails: that decides both a true and a false claim.
            status = "fails" if claim.expected else "proved"
            how = "exactly" if dec.witness is None else "at a sample point"
            return ClaimResult(claim, status, f"component [{key}] does not vanish ({how})", False,
                               -dec.difference, dec.witness, f"component [{key}] does not vanish")
        if dec.status != "proved":
            worst = "agrees_numerically" if worst == "proved" and dec.status == "agrees_numerically" else dec.status
        methods.add(dec.method)
    if claim.expected:
        method = "exact: every component vanishes" if worst == "proved" else "; ".join(sorted(methods))
        return ClaimResult(claim, worst, method, True)
    status = "fails" if worst in ("proved", "agrees_numerically") else worst
    return ClaimResult(claim, status, "every component vanishes" + ("" if worst == "proved" else " numerically"),
                       True, message="the property holds, but the claim says it does not")


def _analysis(spacetime, curvature):
    return analyse(spacetime, curvature)


def _decide_one(spacetime: Spacetime, curvature, claim: Claim, seed: int) -> ClaimResult:
    if claim.kind == "property":
        return _decide_property(spacetime, curvature, claim)
    if claim.kind in ("matter", "horizons", "energy_condition"):
        an = _analysis(spacetime, curvature)
        if an is None:
            return ClaimResult(claim, "undecided", "the matter analysis is not available in this installation")
        if claim.kind == "energy_condition":
            verdict = an.energy_conditions[claim.name]
            st = verdict.status
            if st == "undecided":
                return ClaimResult(claim, "undecided", "the analysis could not decide it", st)
            derived = "violated" if st == "violated" else "holds"
            if derived != claim.expected:
                return ClaimResult(claim, "fails", f"the analysis finds: {st.replace('_', ' ')}", st,
                                   message=f"claimed {claim.expected}, found {st.replace('_', ' ')}")
            status = "agrees_numerically" if st == "holds_at_samples" else "proved"
            return ClaimResult(claim, status, "analysis: " + st.replace("_", " "), st)
        if claim.kind == "horizons":
            return _decide_horizons(spacetime, curvature, claim, tuple(an.horizons), seed)
        if claim.name == "energy_density":
            derived = an.energy_density
        else:
            i = _frame_direction(spacetime, an, claim.indices[0])
            if i is None:
                return ClaimResult(claim, "undecided", "the analysis gives no principal pressure along "
                                   + spacetime.coordinates[claim.indices[0]].name)
            derived = an.pressures[i]
        return _from_decision(claim, derived, decide_equal(spacetime, curvature, claim.expected, derived, seed))
    if claim.kind == "scalar":
        derived = getattr(curvature, claim.name)
    else:
        derived = _component(curvature, claim.name, claim.indices)
    return _from_decision(claim, derived, decide_equal(spacetime, curvature, claim.expected, derived, seed))


def _frame_direction(spacetime: Spacetime, an, coord: int) -> int | None:
    """Which principal pressure lies along coordinate ``coord``: the frame leg pointing along it."""
    n = len(an.pressures)
    if n == 0:
        return None
    frame = getattr(an, "frame", None)
    tidx = _time_index(spacetime)
    if frame is not None and frame.rows == n + 1:
        for i in range(1, n + 1):
            spatial = [a for a in range(frame.cols) if a != tidx and frame[i, a] != 0]
            if spatial == [coord]:
                return i - 1
        return None
    order = [a for a in range(spacetime.dimension) if a != tidx]
    return order.index(coord) if coord in order and order.index(coord) < n else None


def _from_decision(claim: Claim, derived, dec: Decision) -> ClaimResult:
    msg = ""
    if dec.status == "fails":
        msg = "claimed and derived values differ"
    return ClaimResult(claim, dec.status, dec.method, derived, None if dec.status == "proved" else dec.difference,
                       dec.witness, msg)


def _decide_horizons(spacetime, curvature, claim: Claim, derived: tuple, seed: int) -> ClaimResult:
    claimed = list(claim.expected)
    left = list(derived)
    worst = "proved"
    for c in claimed:
        match = None
        for d in left:
            dec = decide_equal(spacetime, curvature, c, d, seed)
            if dec.status in ("proved", "agrees_numerically"):
                match = (d, dec)
                break
        if match is None:
            return ClaimResult(claim, "fails", "compared as sets", derived,
                               message=f"claimed horizon {expression_to_text(c)} is not among the derived ones")
        left.remove(match[0])
        if match[1].status != "proved":
            worst = match[1].status
    if left:
        return ClaimResult(claim, "fails", "compared as sets", derived,
                           message="derived horizons missing from the claim: "
                           + ", ".join(expression_to_text(d) for d in left))
    method = "exact: the same set" if worst == "proved" else \
        f"the same set, numerically at {NUMERIC_POINTS} points; not proved symbolically"
    return ClaimResult(claim, worst, method, derived)


_CACHE: dict[int, tuple[Any, Any, dict]] = {}
"""Decisions by curvature object: a build writes several formats from one derivation."""


def _cached(kind: str, spacetime: Spacetime, curvature, compute):
    key = id(curvature)
    entry = _CACHE.get(key)
    if entry is None or entry[0] is not curvature or entry[1] is not spacetime:
        if len(_CACHE) > 16:
            _CACHE.clear()
        entry = (curvature, spacetime, {})
        _CACHE[key] = entry
    store = entry[2]
    if kind not in store:
        store[kind] = compute()
    return store[kind]


def decide_claims(spacetime: Spacetime, curvature) -> tuple[ClaimResult, ...]:
    """Decide every claim of ``spacetime`` against ``curvature``.

    Parameters
    ----------
    spacetime:
        The frozen model whose ``claims`` section is read.
    curvature:
        A :class:`texgen.engine.Curvature` of it.

    Raises :class:`~texgen.errors.ConfigError` for malformed claims.
    """
    return _cached("claims", spacetime, curvature, lambda: _decide_all(spacetime, curvature))


def _decide_all(spacetime: Spacetime, curvature) -> tuple[ClaimResult, ...]:
    out = []
    for i, claim in enumerate(parse_claims(spacetime)):
        try:
            out.append(_decide_one(spacetime, curvature, claim, seed=i))
        except DerivationError as exc:
            out.append(ClaimResult(claim, "undecided", f"not derived: {exc.message}"))
    return tuple(out)


def _sample_fails(spacetime, expr: sp.Expr) -> Witness | None:
    good, w = compare_numerically(spacetime, expr, sp.S.Zero)
    return w


def check_source(spacetime: Spacetime, curvature) -> SourceResult | None:
    """The exact-solution check of the declared ``source``, or ``None`` without one.

    Decides ``s G_ab + σΛg_ab − κ T_ab = 0`` (and Maxwell's equations or the
    normalisation of the velocity) after the ``impose`` relations are substituted.
    """
    return _cached("source", spacetime, curvature, lambda: _check_source(spacetime, curvature))


def _check_source(spacetime: Spacetime, curvature) -> SourceResult | None:
    source = parse_source(spacetime)
    if source is None:
        return None
    st = spacetime
    xs = st.coordinate_symbols
    g = sp.Matrix(st.metric)
    ginv = sp.Matrix(curvature.inverse)
    sigma = st.conventions.metric_sign
    T = _sources.stress_energy(source, g, ginv, xs, sigma)
    E = curvature.field_tensor
    kappa = st.conventions.coupling
    n = st.dimension
    residual = {(a, b): curvature.canonical(E[a, b] - kappa * T[a, b]) for a in range(n) for b in range(a, n)}
    extra = {(x.name, x.key): curvature.canonical(x.expr)
             for x in _sources.extra_equations(source, g, ginv, curvature.determinant, xs, sigma)}
    imposed, problem = imposed_substitutions(st)
    if imposed:
        residual = {k: curvature.canonical(reduce_imposed(v, imposed)) for k, v in residual.items()}
        extra = {k: curvature.canonical(reduce_imposed(v, imposed)) for k, v in extra.items()}
    nonzero = {k: v for k, v in residual.items() if v != 0}
    extra_nz = {k: v for k, v in extra.items() if v != 0}
    if not nonzero and not extra_nz:
        return SourceResult(source.type, "proved", "exact: every component cancels", imposed=tuple(imposed))
    if problem:
        return SourceResult(source.type, "undecided", problem, tuple(sorted(nonzero.items())),
                            tuple((nm, key, v) for (nm, key), v in sorted(extra_nz.items())), tuple(imposed))
    # A form that did not cancel may still vanish (opaque atoms): look for a point where it does not.
    for k, v in list(nonzero.items()) + [((nm,) + key, v) for (nm, key), v in extra_nz.items()]:
        w = _sample_fails(st, v)
        if w is not None:
            return SourceResult(source.type, "fails", "the residual does not vanish",
                                tuple(sorted(nonzero.items())),
                                tuple((nm, key, v) for (nm, key), v in sorted(extra_nz.items())),
                                tuple(imposed), w)
    return SourceResult(source.type, "agrees_numerically",
                        f"residual vanishes numerically at {NUMERIC_POINTS} points, not proved symbolically",
                        tuple(sorted(nonzero.items())),
                        tuple((nm, key, v) for (nm, key), v in sorted(extra_nz.items())), tuple(imposed))
