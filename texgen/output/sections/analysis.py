"""The analysis stage in the report and the JSON results: matter, energy conditions, structure.

:func:`section` turns an :class:`~texgen.physics.analysis.Analysis` into plain data
for ``templates/sections/analysis.*.j2``; :func:`results` into the JSON blocks
``matter``, ``energy_conditions`` and ``structure``.
"""
from __future__ import annotations

import sympy as sp

from ...errors import ConfigError, DerivationError
from ...physics import _tools as tools
from ...physics.analysis import CONDITIONS, analyse
from ...physics.chart import time_index
from ...spec.expressions import expression_to_text
from ..layout import estimate_width
from ..printer import equation


_STATUS_TEXT = {
    "holds": "holds (proved under the declared assumptions and ranges)",
    "violated": "violated",
    "holds_at_samples": "holds at all {n} sampled points (not proved)",
    "undecided": "undecided",
}


_CONDITION_TITLE = {"null": "Null", "weak": "Weak", "strong": "Strong", "dominant": "Dominant"}


def _wanted(st, name):
    return not st.derive or name in st.derive


def _point_text(pt: dict) -> dict:
    return {expression_to_text(k): f"{float(v):.6g}" for k, v in pt.items()}


_DISPLAY = None
"""The curvature object whose short display form the section's formulas use (set per section)."""


def _math(p, lhs: str, expr) -> dict:
    """One formula for the section: inline when short (``short``), else a display with broken lines.

    A formula whose lines still do not fit (a denominator too wide to break) is marked
    ``too_long``; the templates then point to the JSON results instead of overflowing the page.
    """
    if (_DISPLAY is not None and isinstance(expr, sp.Expr) and not expr.is_number
            and sp.count_ops(expr) < tools.MAX_OPS):
        try:
            expr = _DISPLAY.display(expr)
        except (DerivationError, *tools._SOLVE_ERRORS):
            pass
    eq = equation(p, lhs, expr, text=False)
    eq["short"] = not eq["multiline"] and estimate_width(lhs + " = " + eq["latex"]) < 40
    limit = p.options.max_width + 6
    eq["too_long"] = any(estimate_width(line) > limit for line in eq["lines"])
    return eq


def _labels(name: str, diagonal: bool, n_space: int) -> list[str]:
    """LaTeX names of the inequalities of one condition, in :func:`_inequalities` order."""
    if diagonal:
        sums = [rf"\rho + p_{{({i})}}" for i in range(1, n_space + 1)]
        return {"null": sums, "weak": [r"\rho"] + sums,
                "strong": [r"\rho + \textstyle\sum_{i} p_{(i)}"] + sums,
                "dominant": [r"\rho"] + [x for i in range(1, n_space + 1)
                                          for x in (rf"\rho - p_{{({i})}}", rf"\rho + p_{{({i})}}")]}[name]
    kk = [rf"T_{{ab}} k_{{({i}{s})}}^{{a}} k_{{({i}{s})}}^{{b}}" for i in range(1, n_space + 1) for s in "+-"]
    return kk if name in ("null", "strong") else [r"\rho"] + kk


def _singularity(p, eq) -> dict:
    lhs, rhs = (eq.lhs, eq.rhs) if isinstance(eq, sp.Equality) else (eq, sp.S.Zero)
    return _math(p, p.tex(lhs), rhs)


def report_section(spacetime, curvature, printer) -> dict | None:
    """Plain data for ``templates/sections/analysis.*.j2``, or None when nothing applies."""
    st = spacetime
    try:
        an = analyse(st, curvature)
    except DerivationError as exc:
        return {"template_tex": "sections/analysis.tex.j2", "template_md": "sections/analysis.md.j2",
                "failed": exc.message, "matter": None, "conditions": [], "structure": None, "notes": []}
    global _DISPLAY
    _DISPLAY = curvature
    try:
        return _section(st, an, printer)
    finally:
        _DISPLAY = None


def _section(st, an, p) -> dict | None:
    s: dict = {"template_tex": "sections/analysis.tex.j2", "template_md": "sections/analysis.md.j2",
               "failed": "", "notes": list(an.notes)}
    vacuum = an.hawking_ellis_type == "vacuum"
    s["vacuum"] = vacuum
    matter = None
    if _wanted(st, "matter") and not vacuum and an.energy_density is not None:
        matter = {
            "frame_kind": an.frame_kind or "",
            "frame_text": {"static": "static observers", "zamo": "locally non-rotating (ZAMO) observers",
                           "eulerian": "Eulerian observers (normal to t = const)",
                           "tetrad": "the tetrad given in the file"}.get(an.frame_kind or "", ""),
            "type": an.hawking_ellis_type,
            "density": _math(p, r"\rho", an.energy_density),
            "pressures": [_math(p, f"p_{{({i})}}", x) for i, x in enumerate(an.pressures, start=1)],
            "coupling_tex": p.tex(st.conventions.coupling),
        }
    s["matter"] = matter
    conds = []
    if _wanted(st, "energy_conditions") and not vacuum:
        for name in CONDITIONS:
            v = an.energy_conditions.get(name)
            if v is None:
                continue
            labels = _labels(name, bool(an.pressures), st.dimension - 1)
            if len(labels) != len(v.inequalities):
                labels = [f"E_{{{k}}}" for k in range(1, len(v.inequalities) + 1)]
            witness = [f"{p.tex(k)} = {float(val):.6g}" for k, val in v.witness.items()] if v.witness else []
            conds.append({
                "name": name, "title": _CONDITION_TITLE[name], "status": v.status,
                "status_text": _STATUS_TEXT[v.status].format(n=v.samples),
                "inequalities": [_math(p, lab, x) for lab, x in zip(labels, v.inequalities)],
                "witness": witness, "region": v.region or "",
                "failing_tex": labels[v.failing] if v.failing is not None else "",
            })
    s["conditions"] = conds
    struct = None
    if _wanted(st, "structure"):
        r_tex = p.tex(an.radial) if an.radial is not None else ""
        forms = an.surface_gravity_forms if len(an.surface_gravity_forms) == len(an.horizons) else (None,) * len(an.horizons)
        horizons = []
        for k, (r, kap, tk, form) in enumerate(zip(an.horizons, an.surface_gravities, an.hawking_temperatures, forms), 1):
            horizons.append({
                "radius": _math(p, f"{r_tex}_{{({k})}}", r),
                "kappa": _math(p, rf"\kappa_{{({k})}}", kap) if kap is not None else None,
                "kappa_form": _math(p, rf"\kappa_{{({k})}}", form) if form is not None else None,
                "temperature": _math(p, rf"T_{{({k})}}", tk) if tk is not None else None,
            })
        struct = {
            "radial_tex": r_tex,
            "horizon_function": _math(p, "H", an.horizon_function) if an.horizon_function is not None else None,
            "horizons": horizons,
            "horizons_numeric": [f"{x:.6g}" for x in an.horizons_numeric] if not an.horizons else [],
            "parameter_point": [f"{p.tex(k)} = {float(v):.6g}" for k, v in an.parameter_point.items()],
            "naked": _math(p, p.tex(an.naked_condition.lhs), an.naked_condition.rhs) if an.naked_condition is not None else None,
            "ergosurfaces": [_math(p, r_tex, x) for x in an.ergosurfaces],
            "curvature_singularities": [_singularity(p, x) for x in an.curvature_singularities],
            "parameter_degeneracies": [_singularity(p, x) for x in an.parameter_degeneracies],
            "coordinate_singularities": [_singularity(p, x) for x in an.coordinate_singularities],
            "curvature_limits": [{"where": k, "eq": _math(p, "K", v)} for k, v in an.curvature_limits.items()],
            "ctc": [{"coordinate": k, "text": v} for k, v in an.ctc_regions.items()],
            "null_directions": [_math(p, rf"\left(\mathrm{{d}}{r_tex}/\mathrm{{d}}{p.tex(st.coordinates[time_index(st)].symbol)}\right)_{{{s_}}}", x)
                                for s_, x in zip("+-", an.null_directions)] if an.null_directions else [],
            "cone_tilt": an.cone_tilt or "",
            "clock_rate": _math(p, r"\mathrm{d}\tau/\mathrm{d}t", an.clock_rate) if an.clock_rate is not None else None,
            "static_region": an.static_region or "",
            "omega2": _math(p, r"\Omega^{2}", an.orbit_angular_velocity) if an.orbit_angular_velocity is not None else None,
            "orbit_rate": _math(p, r"\mathrm{d}\tau/\mathrm{d}t", an.orbit_clock_rate) if an.orbit_clock_rate is not None else None,
            "photon_sphere": _math(p, r_tex, an.photon_sphere) if an.photon_sphere is not None else None,
            "isco": _math(p, r_tex, an.isco) if an.isco is not None else None,
            "isco_numeric": isinstance(an.isco, sp.Float),
        }
    if struct is not None and not any(v for k, v in struct.items()
                                      if k not in ("radial_tex", "isco_numeric", "parameter_point")):
        struct = None  # an empty list would be a LaTeX error
    s["structure"] = struct
    if not matter and not conds and not struct:
        return None
    return s


def _txt(x):
    if x is None:
        return None
    try:
        return expression_to_text(x)
    except ConfigError:
        return str(x)


def results(spacetime, curvature) -> dict:
    """JSON-ready results: ``matter``, ``energy_conditions`` and ``structure``."""
    try:
        an = analyse(spacetime, curvature)
    except DerivationError as exc:
        return {"analysis_error": exc.message}
    out: dict = {
        "matter": {
            "frame": an.frame_kind,
            "hawking_ellis_type": an.hawking_ellis_type,
            "energy_density": _txt(an.energy_density),
            "pressures": [_txt(x) for x in an.pressures],
            "stress_energy": {",".join((spacetime.coordinates[i].name, spacetime.coordinates[j].name)):
                              _txt(an.stress_energy[i, j])
                              for i in range(spacetime.dimension) for j in range(i, spacetime.dimension)
                              if an.stress_energy[i, j] != 0},
        },
        "energy_conditions": {
            name: {"status": v.status, "inequalities": [_txt(x) for x in v.inequalities],
                   "witness": _point_text(v.witness) if v.witness else None, "samples": v.samples,
                   "region": v.region}
            for name, v in an.energy_conditions.items()},
        "structure": {
            "radial": _txt(an.radial),
            "horizon_function": _txt(an.horizon_function),
            "horizons": [_txt(x) for x in an.horizons],
            "horizons_numeric": list(an.horizons_numeric),
            "naked_condition": _txt(an.naked_condition),
            "ergosurfaces": [_txt(x) for x in an.ergosurfaces],
            "curvature_singularities": [_txt(x) for x in an.curvature_singularities],
            "coordinate_singularities": [_txt(x) for x in an.coordinate_singularities],
            "parameter_degeneracies": [_txt(x) for x in an.parameter_degeneracies],
            "curvature_limits": {k: _txt(v) for k, v in an.curvature_limits.items()},
            "surface_gravities": [_txt(x) for x in an.surface_gravities],
            "surface_gravities_at_horizon_radius": [_txt(x) for x in an.surface_gravity_forms],
            "hawking_temperatures": [_txt(x) for x in an.hawking_temperatures],
            "closed_timelike_curves": dict(an.ctc_regions),
            "radial_null_directions": [_txt(x) for x in an.null_directions],
            "light_cones_tip_over": an.cone_tilt,
            "static_clock_rate": _txt(an.clock_rate),
            "static_region": an.static_region,
            "circular_orbit_omega_squared": _txt(an.orbit_angular_velocity),
            "circular_orbit_clock_rate": _txt(an.orbit_clock_rate),
            "photon_sphere": _txt(an.photon_sphere),
            "isco": _txt(an.isco),
            "notes": list(an.notes),
        },
    }
    return out
