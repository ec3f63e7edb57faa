"""Physical analysis checked against published results (sources named beside each check)."""
from __future__ import annotations

import math

import pytest
import sympy as sp

from texgen.output.sections import analysis as analysis_section
from texgen.physics import _tools as tools
from texgen.physics import analysis, horizons
from texgen.physics._tools import real_roots
from texgen.api import derive, load_spacetime_text

HEAD = "texgen: 1\nid: {id}\ntitle: {id}\n"

RN = HEAD.format(id="rn") + """
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive, Q: {assume: real, range: "-M < Q < M"}}
definitions: {f: 1 - 2*M/r + Q^2/r^2}
metric: {line_element: "-f dt^2 + dr^2/f + r^2 (dtheta^2 + sin(theta)^2 dphi^2)"}
structure: {horizon_function: r^2 - 2*M*r + Q^2, radial: r}
"""

SCHWARZSCHILD = HEAD.format(id="schw") + """
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive}
metric: {line_element: "-(1 - 2*M/r) dt^2 + dr^2/(1 - 2*M/r) + r^2 (dtheta^2 + sin(theta)^2 dphi^2)"}
"""

KERR = HEAD.format(id="kerr") + """
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive, a: {range: "0 <= a < M"}}
definitions: {Sigma: r^2 + a^2*cos(theta)^2, Delta: r^2 - 2*M*r + a^2}
metric:
  line_element: >
    -(1 - 2*M*r/Sigma) dt^2 - 4*M*a*r*sin(theta)^2/Sigma dt dphi
    + Sigma/Delta dr^2 + Sigma dtheta^2
    + (r^2 + a^2 + 2*M*r*a^2*sin(theta)^2/Sigma) sin(theta)^2 dphi^2
structure: {horizon_function: Delta, radial: r}
"""

WORMHOLE = HEAD.format(id="wormhole") + """
coordinates: [t, {name: r, range: "r > b0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {b0: positive}
metric: {line_element: "-dt^2 + dr^2/(1 - b0^2/r^2) + r^2 (dtheta^2 + sin(theta)^2 dphi^2)"}
"""

HAYWARD = HEAD.format(id="hayward") + """
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive, l: positive}
definitions: {f: 1 - 2*M*r^2/(r^3 + 2*M*l^2)}
metric: {line_element: "-f dt^2 + dr^2/f + r^2 (dtheta^2 + sin(theta)^2 dphi^2)"}
"""

GODEL = HEAD.format(id="godel") + """
coordinates: [t, {name: r, range: "r > 0"}, {name: phi, period: 2*pi}, z]
parameters: {a: positive}
metric:
  line_element: >
    4*a^2*(-dt^2 + dr^2 + dz^2 - (sinh(r)^4 - sinh(r)^2) dphi^2 - 2*sqrt(2)*sinh(r)^2 dphi dt)
"""

EARTH = HEAD.format(id="earth") + """
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive}
conventions: {units: explicit}
metric:
  line_element: >
    -(1 - 2*G*M/(c^2*r)) c^2 dt^2 + dr^2/(1 - 2*G*M/(c^2*r)) + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
"""


def _load(text):
    st = load_spacetime_text(text)
    cv = derive(st)
    return st, cv, analysis.analyse(st, cv)


def _sym(st, name):
    return next(x.symbol for x in tuple(st.coordinates) + tuple(st.parameters) if x.name == name)


def test_reissner_nordstrom_matter_and_horizons():
    """Carroll 2004 §5.8 / MTW ex. 31.8: rho = -p_r = p_t = Q^2/(8 pi r^4), r± = M ± sqrt(M^2 - Q^2)."""
    st, cv, an = _load(RN)
    M, Q, r = _sym(st, "M"), _sym(st, "Q"), _sym(st, "r")
    rho = Q**2 / (8 * sp.pi * r**4)
    assert an.frame_kind == "static"
    assert sp.simplify(an.energy_density - rho) == 0
    assert [sp.simplify(p - q) for p, q in zip(an.pressures, (-rho, rho, rho))] == [0, 0, 0]
    assert {k: v.status for k, v in an.energy_conditions.items()} == {
        "null": "holds", "weak": "holds", "strong": "holds", "dominant": "holds"}
    expected = [M + sp.sqrt(M**2 - Q**2), M - sp.sqrt(M**2 - Q**2)]
    assert [sp.simplify(h - e) for h, e in zip(an.horizons, expected)] == [0, 0]
    assert an.naked_condition == sp.StrictGreaterThan(Q**2, M**2, evaluate=False)


def test_schwarzschild_singularities_and_orbits():
    """Wald 1984 §12.5 (kappa = 1/4M); photon sphere 3M, ISCO 6M (standard graduate texts)."""
    st, cv, an = _load(SCHWARZSCHILD)
    M, r = _sym(st, "M"), _sym(st, "r")
    assert an.hawking_ellis_type == "vacuum"
    assert an.horizons == (2 * M,)
    assert sp.Eq(r, 0, evaluate=False) in an.curvature_singularities
    assert sp.Eq(r, 2 * M, evaluate=False) in an.coordinate_singularities
    assert an.curvature_limits == {"r -> 0": sp.oo}
    assert an.surface_gravities == (1 / (4 * M),)
    assert an.hawking_temperatures == (1 / (8 * sp.pi * M),)
    assert an.photon_sphere == 3 * M
    assert an.isco == 6 * M
    assert an.static_region == "static observers cannot exist for r < 2*M"


def test_kerr_horizons_ergosurface_and_no_ctc_for_positive_r():
    """Carter 1968 Phys. Rev. 174, 1559; Hawking & Ellis 1973 §5.6: r± = M ± sqrt(M^2 - a^2),
    ergosurface r = M + sqrt(M^2 - a^2 cos^2 theta), g_phiphi < 0 only at r < 0."""
    st, cv, an = _load(KERR)
    M, a, th = _sym(st, "M"), _sym(st, "a"), _sym(st, "theta")
    assert an.frame_kind == "zamo"
    assert [sp.simplify(h - e) for h, e in zip(an.horizons, (M + sp.sqrt(M**2 - a**2), M - sp.sqrt(M**2 - a**2)))] == [0, 0]
    assert sp.simplify(an.ergosurfaces[0] - (M + sp.sqrt(M**2 - a**2 * sp.cos(th) ** 2))) == 0
    assert an.naked_condition == sp.StrictGreaterThan(a**2, M**2, evaluate=False)
    assert not an.ctc_regions["phi"].startswith("timelike")


def test_kerr_newman_horizons_and_naked_condition():
    """Newman et al. 1965 J. Math. Phys. 6, 918; MTW §33.2: r± = M ± sqrt(M^2 - a^2 - Q^2)."""
    M, a, Q = sp.symbols("M a Q", positive=True)
    r = sp.Symbol("r", positive=True)
    h = r**2 - 2 * M * r + a**2 + Q**2
    roots = real_roots(h, r)
    assert {sp.simplify(x - M) for x in roots} == {sp.sqrt(M**2 - a**2 - Q**2), -sp.sqrt(M**2 - a**2 - Q**2)}
    assert horizons._naked_condition(h, r) == sp.StrictGreaterThan(Q**2 + a**2, M**2, evaluate=False)


def test_morris_thorne_wormhole_violates_nec_at_throat():
    """Morris & Thorne 1988 Am. J. Phys. 56, 395, eqs. (14): rho = b'/(8 pi r^2); b = b0^2/r, Phi = 0."""
    st, cv, an = _load(WORMHOLE)
    b0, r = _sym(st, "b0"), _sym(st, "r")
    assert sp.simplify(an.energy_density - sp.diff(b0**2 / r, r) / (8 * sp.pi * r**2)) == 0
    # radial tension tau = b/(8 pi r^3) for Phi = 0, so p_r = -tau
    assert sp.simplify(an.pressures[0] + b0**2 / (8 * sp.pi * r**4)) == 0
    nec = an.energy_conditions["null"]
    assert nec.status == "violated"
    assert tools.value_at(nec.inequalities[nec.failing], nec.witness) < 0
    assert an.energy_conditions["weak"].status == "violated"


def test_hayward_regular_core():
    """Hayward 2006 PRL 96, 031103: curvature finite at r = 0 (de Sitter core), strong condition violated there."""
    st, cv, an = _load(HAYWARD)
    M, l = _sym(st, "M"), _sym(st, "l")
    assert an.curvature_limits["r -> 0"] == 24 / l**4
    assert sp.Eq(_sym(st, "r"), 0, evaluate=False) not in an.curvature_singularities
    assert an.energy_conditions["strong"].status == "violated"


def test_godel_closed_timelike_curves_beyond_critical_radius():
    """Gödel 1949 Rev. Mod. Phys. 21, 447; Hawking & Ellis 1973 §5.7: CTCs for sinh r > 1."""
    st, cv, an = _load(GODEL)
    text = an.ctc_regions["phi"]
    assert text.startswith("timelike (closed timelike curves) for r > ")
    bound = sp.sympify(text.rsplit("r > ", 1)[1])
    assert abs(float(bound) - math.log(1 + math.sqrt(2))) < 1e-12


def test_earth_clocks_one_km_apart():
    """Weak-field limit g h / c^2 ≈ 1.09e-13 for h = 1 km at Earth's surface (common practice)."""
    st = load_spacetime_text(EARTH)
    R, M, G, c = 6.371e6, 5.972e24, 6.674e-11, 299792458
    diff = analysis.clock_rate_difference(st, R, R + 1000, {"M": M, "G": G, "c": c})
    g = G * M / R**2
    assert abs(float(diff) - g * 1000 / c**2) < 1e-3 * g * 1000 / c**2
    assert f"{float(diff):.3g}" == "1.09e-13"


def test_results_and_report_section_are_plain_data():
    """JSON and template data carry only plain values (texgen report contract, common practice)."""
    import json

    from texgen.output.printer import ExpressionPrinter, ReportOptions

    st, cv, an = _load(RN)
    res = analysis_section.results(st, cv)
    assert json.loads(json.dumps(res)) == res
    assert res["energy_conditions"]["null"]["status"] == "holds"
    sec = analysis_section.report_section(st, cv, ExpressionPrinter(st, ReportOptions()))
    assert sec["template_tex"] == "sections/analysis.tex.j2"
    assert sec["matter"]["density"]["latex"] == r"\frac{Q^{2}}{8 \pi r^{4}}"


@pytest.mark.parametrize("rows, message", [
    ("tetrad: [{t: 1}]", "Expected a list of 4 rows e_(i)^a but received: 1"),
    ("tetrad: [{t: 1}, {r: 1}, {theta: 1/r}, {phi: 1/(r*sin(theta))}]", "Expected orthonormal rows"),
])
def test_bad_tetrad_is_a_config_error(rows, message):
    """A wrong tetrad is the file's fault: ConfigError with the key path (project rule)."""
    from texgen.errors import ConfigError

    st = load_spacetime_text(SCHWARZSCHILD + rows + "\n")
    with pytest.raises(ConfigError) as info:
        analysis.analyse(st, derive(st))
    assert message in info.value.message
    assert "tetrad" in str(info.value.location)


# -- library files -------------------------------------------------------------

import time
from pathlib import Path

LIBRARY = Path(__file__).resolve().parents[2] / "metrics_yaml"
LIBRARY_FILES = sorted(LIBRARY.rglob("*.yaml"))
HANG_GUARD_S = 120
"""Per-file bound against hangs only (the targets are measured by hand, see bench/)."""


_ANALYSED: dict = {}


def _library(name):
    """Model, curvature and analysis of one library entry, computed once per test run."""
    from texgen.api import load_spacetime

    if name not in _ANALYSED:
        st = load_spacetime(next(p for p in LIBRARY_FILES if p.stem == name))
        cv = derive(st)
        start = time.process_time()
        an = analysis.analyse(st, cv)
        _ANALYSED[name] = (st, cv, an, time.process_time() - start)
    return _ANALYSED[name][:3]


@pytest.mark.parametrize("path", LIBRARY_FILES, ids=lambda p: p.stem)
def test_every_library_file_analyses(path):
    """Every library entry analyses without an exception (project rule: no tracebacks)."""
    st, cv, an = _library(path.stem)
    assert _ANALYSED[path.stem][3] < HANG_GUARD_S
    assert set(an.energy_conditions) <= set(analysis.CONDITIONS)


def test_alcubierre_eulerian_energy_density():
    """Alcubierre 1994 Class. Quantum Grav. 11, L73, eq. (19): rho = -v^2 (df/dr_s)^2 (y^2 + z^2)/(32 pi r_s^2)."""
    st, cv, an = _library("alcubierre")
    t, x, y, z, v, R, s = (_sym(st, n) for n in ("t", "x", "y", "z", "v", "R", "sigma"))
    rs = sp.sqrt((x - v * t) ** 2 + y**2 + z**2)
    df = s * (1 / sp.cosh(s * (rs + R)) ** 2 - 1 / sp.cosh(s * (rs - R)) ** 2) / (2 * sp.tanh(s * R))
    expected = -v**2 * (y**2 + z**2) * df**2 / (32 * sp.pi * rs**2)
    assert an.frame_kind == "tetrad"
    assert cv.is_zero(an.energy_density - expected)
    # negative in the wall: at y = 1 inside the bubble wall df != 0
    point = {t: 0, x: 0, y: 1, z: 0, v: sp.Rational(1, 2), R: 1, s: 2}
    assert tools.value_at(an.energy_density, point) < 0
    assert an.energy_conditions["weak"].status == "violated"


def test_kerr_surface_gravity():
    """Wald 1984 §12.5 / Poisson 2004 §5.3: kappa± = (r± - r∓)/(2 (r±^2 + a^2)) (signed; negative inside)."""
    st, cv, an = _load(KERR)
    a = _sym(st, "a")
    rp, rm = an.horizons
    expected = ((rp - rm) / (2 * (rp**2 + a**2)), (rm - rp) / (2 * (rm**2 + a**2)))
    pt = {_sym(st, "M"): 1, a: sp.Rational(3, 5)}
    got = [tools.value_at(k, pt) for k in an.surface_gravities]
    want = [tools.value_at(e, pt) for e in expected]
    assert [round(g - w, 20) for g, w in zip(got, want)] == [0, 0]
    # M = 1, a = 3/5: r± = 9/5, 1/5, so kappa+ = (8/5)/(2 (81/25 + 9/25)) = 2/9
    assert got[0] == pytest.approx(2 / 9, rel=1e-15)
    assert tools.value_at(an.hawking_temperatures[0], pt) == pytest.approx(want[0] / (2 * math.pi), rel=1e-14)


def test_reissner_nordstrom_isco_numerically():
    """Reissner–Nordström ISCO: the largest root of M r^3 - 6 M^2 r^2 + 9 M Q^2 r - 4 Q^4 = 0
    (e.g. Pugliese, Quevedo & Ruffini 2011 Phys. Rev. D 83, 104052, recalled), solved with mpmath."""
    import mpmath

    st, cv, an = _library("reissner_nordstrom")
    M, Q = (float(an.parameter_point[_sym(st, n)]) for n in ("M", "Q"))
    roots = mpmath.polyroots([M, -6 * M**2, 9 * M * Q**2, -4 * Q**4])
    expected = max(float(mpmath.re(x)) for x in roots if abs(mpmath.im(x)) < 1e-12)
    assert float(an.isco) == pytest.approx(expected, rel=1e-10)


def test_ingoing_eddington_finkelstein_cones_tip_over():
    """Ingoing Eddington–Finkelstein (MTW 1973 §31.4): outgoing rays dr/dv = (1 - 2M/r)/2,
    ingoing v = const; for r < 2M both point to decreasing r."""
    st, cv, an = _library("schwarzschild_eddington_finkelstein_ingoing")
    M, r = _sym(st, "M"), _sym(st, "r")
    assert len(an.null_directions) == 1
    assert sp.simplify(an.null_directions[0] - (1 - 2 * M / r) / 2) == 0
    assert an.cone_tilt == "r < 2*M"


def test_demo_parameter_degeneracy_is_not_a_singularity():
    """A locus without coordinates (ell = 0) is a degenerate parameter value, not a place (common practice)."""
    st, cv, an = _library("veiled_black_hole")
    ell, r = _sym(st, "ell"), _sym(st, "r")
    assert sp.Eq(ell, 0, evaluate=False) in an.parameter_degeneracies
    assert all(x.free_symbols & set(st.coordinate_symbols) for x in an.curvature_singularities)
    assert sp.Eq(r, 0, evaluate=False) in an.curvature_singularities


# -- compiled reports ------------------------------------------------------------

@pytest.mark.parametrize("name", ["veiled_black_hole", "reissner_nordstrom", "kerr", "morris_thorne"])
def test_report_with_analysis_compiles_without_overfull_lines(name, tmp_path, monkeypatch):
    """The analysis section breaks long formulas: pdflatex reports no error and no overfull box > 3 pt."""
    from conftest import _compile, _overfull

    from texgen import api

    st, cv, _ = _library(name)
    tex = tmp_path / f"{name}.tex"
    api.build_report(st, tex, curvature=cv)
    assert "Causal structure" in tex.read_text()
    assert _overfull(_compile(tex)) == []


@pytest.mark.parametrize("name", ["schwarzschild", "schwarzschild_painleve_gullstrand",
                                  "schwarzschild_eddington_finkelstein_ingoing"])
def test_schwarzschild_surface_gravity_in_every_chart(name):
    """kappa = 1/(4M) is a property of the Killing horizon, not of the chart (Wald 1984 §12.5)."""
    st, cv, an = _library(name)
    assert an.horizons == (2 * _sym(st, "M"),)
    assert an.surface_gravities == (1 / (4 * _sym(st, "M")),)


def test_no_horizon_outside_the_declared_range():
    """Schwarzschild interior (Schwarzschild 1916; MTW 1973 §23.7): r < R, and 2 M r^2 = R^3 lies outside."""
    st, cv, an = _library("schwarzschild_interior")
    assert an.horizons == ()
    assert an.naked_condition is None
