"""Polynomial backends of the exact field: the few operations it needs, on python-flint or sympy.

python-flint is an optional accelerator: the same algorithm runs on sympy's sparse
polynomials when it is missing (only slower).  :class:`Unmappable` is raised by
every part of the arithmetic for input it cannot represent.
"""
from __future__ import annotations

from typing import Any, Sequence

import sympy as sp

try:  # pragma: no cover - availability depends on the installation
    import flint as _flint
except ImportError:  # pragma: no cover
    _flint = None


class Unmappable(Exception):
    """The expression has a part the polynomial field cannot represent."""

# ---------------------------------------------------------------------------
# polynomial backends: the few operations the field needs
# ---------------------------------------------------------------------------


def _to_rational(c: Any) -> sp.Rational:
    p = getattr(c, "p", None)
    if p is not None and not isinstance(c, sp.Basic):
        return sp.Rational(int(p), int(c.q))
    return sp.Rational(int(c.numerator), int(c.denominator))


class _FlintPolys:
    """Polynomials over QQ from python-flint (fmpq_mpoly), lex order."""

    name = "flint"

    def __init__(self, names: Sequence[str]):
        self.ctx = _flint.fmpq_mpoly_ctx.get(tuple(names), "lex")
        self.gens = list(self.ctx.gens()) if names else []
        self.zero = self.ctx.constant(0)
        self.one = self.ctx.constant(1)

    def const(self, q: sp.Rational):
        return self.ctx.constant(_flint.fmpq(int(q.p), int(q.q)))

    def diff(self, p, i: int):
        return p.derivative(i)

    def degrees(self, p):
        return p.degrees()

    def factor(self, p):
        c, fs = p.factor()
        return _to_rational(c), list(fs)

    def terms(self, p):
        return zip(p.monoms(), p.coeffs())

    def from_terms(self, d: dict):
        return self.ctx.from_dict({k: _flint.fmpq(int(v.p), int(v.q)) for k, v in d.items()})

    def nterms(self, p) -> int:
        return len(p)


class _SympyPolys:
    """Polynomials over QQ from sympy.polys.rings, lex order (the pure-Python path)."""

    name = "polys"

    def __init__(self, names: Sequence[str]):
        from sympy.polys.domains import QQ
        from sympy.polys.rings import PolyRing

        self.QQ = QQ
        self.ring = PolyRing(tuple(names) or ("_unused",), QQ, "lex")
        self.gens = list(self.ring.gens) if names else []
        self.zero = self.ring.zero
        self.one = self.ring.one

    def const(self, q: sp.Rational):
        return self.ring.ground_new(self.QQ(int(q.p), int(q.q)))

    def diff(self, p, i: int):
        return p.diff(self.gens[i])

    def degrees(self, p):
        return p.degrees()

    def factor(self, p):
        c, fs = p.factor_list()
        return _to_rational(c), list(fs)

    def terms(self, p):
        return p.terms()

    def from_terms(self, d: dict):
        return self.ring.from_dict({k: self.QQ(int(v.p), int(v.q)) for k, v in d.items()})

    def nterms(self, p) -> int:
        return len(p)


def available_backends() -> tuple[str, ...]:
    """Names of the polynomial backends that can run here, fastest first."""
    return ("flint", "polys") if _flint is not None else ("polys",)
