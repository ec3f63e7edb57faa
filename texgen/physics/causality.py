"""Causality: closed timelike curves along periodic coordinates and the tilt of radial light cones.

The Killing vector of a periodic coordinate is timelike where its norm has the
timelike sign (closed timelike curves); the radial null directions dr/dt in the
t–r plane show where both point to one side, i.e. where the light cones tip over.
"""
from __future__ import annotations

import sympy as sp

from . import _tools as tools
from .chart import SAMPLES, SEED, lower_bound, region_text, signs


def ctc_regions(st, cv, radial, ppoint, stand_ins, special, ti) -> dict:
    """Periodic coordinate name -> where its Killing vector is timelike, in words."""
    ctc: dict = {}
    for i, c in enumerate(st.coordinates):
        if c.period is None or ti is None:
            continue
        gpp = cv.canonical(st.metric[i, i])
        sg_space = -signs(st)[ti]  # the sign a spacelike norm has
        test = cv.canonical(sg_space * gpp)  # >= 0 means the Killing vector is not timelike
        if tools.proved_nonnegative(test, stand_ins):
            ctc[c.name] = "none: the Killing vector is nowhere timelike in the declared ranges"
            continue
        desc = None
        if radial is not None and (test.free_symbols & set(st.coordinate_symbols)) <= {radial}:
            iv = tools.negative_region(test, radial, ppoint | {radial: 1}, lower_bound(st, radial))
            desc = region_text(iv, radial, True)
            if desc:
                ctc[c.name] = f"timelike (closed timelike curves) for {desc}"
                continue
        pts = tools.sample_set(st, SAMPLES, SEED + 7, radial, special, [test])
        bad = [p for p in pts if tools.confirmed_negative(test, p)]
        if bad:
            rs = sorted(float(p[radial]) for p in bad) if radial is not None else []
            ctc[c.name] = ("timelike at sampled points" + (f" with {radial} in [{rs[0]:.4g}, {rs[-1]:.4g}]" if rs else ""))
        else:
            ctc[c.name] = f"none found at {len(pts)} sampled points (not proved)"
    return ctc


def radial_light_cones(st, cv, radial, ppoint, ti) -> tuple[tuple, str | None]:
    """(radial null directions dr/dt, where the cones tip over in words or None)."""
    nulls: tuple = ()
    tilt = None
    if ti is not None and radial is not None:
        i = st.coordinate_symbols.index(radial)
        gtt, gtr, grr = st.metric[ti, ti], st.metric[ti, i], st.metric[i, i]
        if cv.is_zero(grr) and not cv.is_zero(gtr):
            # Null-coordinate charts (Eddington–Finkelstein): one radial null direction is
            # t = const (along ∂_r), the other has dr/dt = -g_tt/(2 g_tr). Both point to one
            # side exactly where ∂_t is spacelike (future ∂_r side fixed by g(k, ∓∂_r) < 0).
            nulls = (cv.canonical(-gtt / (2 * gtr)),)
            sgt = signs(st)[ti] * cv.canonical(gtt)
            if (sgt.free_symbols & set(st.coordinate_symbols)) <= {radial}:
                iv = tools.negative_region(sgt, radial, ppoint | {radial: 1}, lower_bound(st, radial))
                tilt = region_text(iv, radial, True)
        elif not cv.is_zero(grr):
            disc = cv.canonical(gtr**2 - gtt * grr)
            root = sp.sqrt(disc)
            nulls = (sp.simplify(cv.canonical(-gtr / grr) + root / cv.canonical(grr)),
                     sp.simplify(cv.canonical(-gtr / grr) - root / cv.canonical(grr)))
            prod = cv.canonical(-gtt / grr)  # < 0: both radial null directions on one side
            if (prod.free_symbols & set(st.coordinate_symbols)) <= {radial}:
                iv = tools.negative_region(prod, radial, ppoint | {radial: 1}, lower_bound(st, radial))
                tilt = region_text(iv, radial, True)
    return nulls, tilt
