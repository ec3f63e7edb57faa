"""Tests for texgen.claims: parsing claims, deciding them, exact-solution checks, the check command."""
from __future__ import annotations

import json
from pathlib import Path

import pytest
import sympy as sp

from texgen import api, cli
from texgen.output.sections import checks
from texgen.physics import claims
from texgen.errors import ConfigError

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "metrics_yaml" / "demo" / "veiled_black_hole.yaml"

SCHWARZSCHILD = """\
texgen: 1
id: s
title: s
version: 1.0.0
coordinates:
  - t
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  M: positive
metric:
  line_element: -(1 - 2*M/r) dt^2 + dr^2/(1 - 2*M/r) + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
"""

# Reissner (1916), Nordstrom (1918); A = -Q/r dt in Gaussian units (MTW 1973, ex. 31.8).
REISSNER_NORDSTROM = """\
texgen: 1
id: rn
title: rn
version: 1.0.0
coordinates:
  - t
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  M: positive
  Q: {assume: real, range: "-M < Q < M"}
definitions:
  f: 1 - 2*M/r + Q^2/r^2
metric:
  line_element: -f dt^2 + dr^2/f + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
source:
  type: electromagnetic
  potential: {t: CHARGE/r}
"""

# Kerr-Newman in Boyer-Lindquist coordinates: Misner, Thorne & Wheeler (1973), eq. (33.2);
# the potential A = -(Q r/Sigma)(dt - a sin^2(theta) dphi): MTW eq. (33.5); Carter (1968).
KERR_NEWMAN = """\
texgen: 1
id: kn
title: kn
version: 1.0.0
coordinates:
  - t
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  M: positive
  a: {range: "0 <= a < M"}
  Q: {assume: real, range: "-sqrt(M^2 - a^2) < Q < sqrt(M^2 - a^2)"}
definitions:
  Sigma: r^2 + a^2*cos(theta)^2
  Delta: r^2 - 2*M*r + a^2 + Q^2
metric:
  line_element: >
    -(Delta - a^2*sin(theta)^2)/Sigma dt^2
    - 2*a*sin(theta)^2*(r^2 + a^2 - Delta)/Sigma dt dphi
    + ((r^2 + a^2)^2 - Delta*a^2*sin(theta)^2)*sin(theta)^2/Sigma dphi^2
    + Sigma/Delta dr^2 + Sigma dtheta^2
source:
  type: electromagnetic
  potential: {t: -FACTOR*Q*r/Sigma, phi: FACTOR*Q*a*r*sin(theta)^2/Sigma}
"""

# FLRW with a perfect fluid at rest; the Friedmann equations as in Weinberg (1972), eqs. (15.1.20)-(15.1.21)
# and Carroll (2004), eqs. (8.44)-(8.45).
FLRW = """\
texgen: 1
id: flrw
title: flrw
version: 1.0.0
coordinates:
  - t
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  k: real
functions:
  a: {of: [t], assume: positive}
  rho: {of: [t], latex: "\\\\rho"}
  p: [t]
metric:
  line_element: -dt^2 + a(t)^2 (dr^2/(1 - k*r^2) + r^2 (dtheta^2 + sin(theta)^2 dphi^2))
source:
  type: perfect_fluid
  density: rho(t)
  pressure: p(t)
  velocity: {t: 1}
"""
FRIEDMANN = """\
impose:
  - "diff(a(t), t)^2 = 8*pi*rho(t)*a(t)^2/3 - k"
  - "2*a(t)*diff(a(t), t, 2) + diff(a(t), t)^2 + k = -8*pi*p(t)*a(t)^2"
"""

# Vaidya (1951): ds^2 = -(1 - 2m(v)/r) dv^2 + 2 dv dr + r^2 dOmega^2 with T_ab = rho k_a k_b,
# k_a = -d_a v and rho = m'(v)/(4 pi r^2) (Griffiths & Podolsky 2009, eq. (9.25)).
VAIDYA = """\
texgen: 1
id: vaidya
title: vaidya
version: 1.0.0
coordinates:
  - v
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
functions:
  m: {of: [v], assume: positive}
metric:
  line_element: -(1 - 2*m(v)/r) dv^2 + 2 dv dr + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
source:
  type: null_dust
  density: DENSITY
  null_vector: {v: -1}
"""


def _load(text: str, source: str = "bh.yaml"):
    model = api.load_spacetime_text(text, source)
    return model, api.derive(model)


def _decide(text: str):
    model, cv = _load(text)
    return claims.decide_claims(model, cv)


# ------------------------------------------------------------------ parsing errors
@pytest.mark.parametrize("section, message", [
    ("claims:\n  - quantity: kretchmann\n    equals: 0\n",
     "bh.yaml:15:15: claims[0].quantity: Expected a quantity name but received: 'kretchmann' "
     "(did you mean 'kretschmann'?)"),
    ("claims:\n  - quantity: christoffel\n    indices: [r, t]\n    equals: 0\n",
     "bh.yaml:16:14: claims[0].indices: Expected 3 indices for christoffel but received: 2"),
    ("claims:\n  - quantity: christoffel\n    indices: [r, t, x]\n    equals: 0\n",
     "bh.yaml:16:21: claims[0].indices[2]: Expected a coordinate name or a number 0..3 but received: 'x' "
     "(allowed: t, r, theta, phi)"),
    ("claims:\n  - quantity: ricci\n    indices: [0, 4]\n    equals: 0\n",
     "bh.yaml:16:18: claims[0].indices[1]: Index 4 is out of range: the coordinates are numbered 0..3"),
    ("claims:\n  - property: vacum\n",
     "bh.yaml:15:15: claims[0].property: Expected a property name but received: 'vacum' (did you mean 'vacuum'?)"),
    ("claims:\n  - quantity: ricci_scalar\n    property: flat\n",
     "bh.yaml:15:5: claims[0]: Expected exactly one of 'quantity', 'property', 'energy_condition' but received: "
     "'quantity', 'property'"),
    ("claims:\n  - energy_condition: weak\n    verdict: hold\n",
     "bh.yaml:16:14: claims[0].verdict: Expected one of: holds, violated but received: 'hold' "
     "(did you mean 'holds'?)"),
    ("claims:\n  - quantity: ricci_scalar\n    indices: [r]\n    equals: 0\n",
     "bh.yaml:16:14: claims[0].indices: ricci_scalar is a scalar and takes no indices"),
    ("claims:\n  - quantity: ricci_scalar\n    equal: 0\n",
     "bh.yaml:16:12: claims[0].equal: Unknown key 'equal' (did you mean 'equals'?)\n"
     "bh.yaml:15:5: claims[0]: Missing required key 'equals'"),
    ("source:\n  type: electromagnetc\n",
     "bh.yaml:15:9: source.type: Expected one of: vacuum, electromagnetic, perfect_fluid, null_dust, scalar_field "
     "but received: 'electromagnetc' (did you mean 'electromagnetic'?)"),
    ("source:\n  type: electromagnetic\n  potential: {t: -1/r, x: 1}\n",
     "bh.yaml:16:27: source.potential.x: Unknown coordinate 'x' (allowed: t, r, theta, phi)"),
    ("source:\n  type: perfect_fluid\n  density: 1\n",
     "bh.yaml:15:3: source: Missing required key 'pressure' for a perfect_fluid source\n"
     "bh.yaml:15:3: source: Missing required key 'velocity' for a perfect_fluid source"),
    ("impose:\n  - \"diff(M, r)\"\n",
     "bh.yaml:15:5: impose[0]: Expected an equation 'lhs = rhs' but received: 'diff(M, r)'"),
])
def test_bad_sections_name_file_line_and_path(section, message):
    model = api.load_spacetime_text(SCHWARZSCHILD + section, "bh.yaml")
    with pytest.raises(ConfigError) as info:
        claims.parse_claims(model)
        claims.parse_source(model)
        claims.parse_impose(model)
    assert info.value.format_message() == message


def test_bad_claim_is_exit_code_2(tmp_path, capsys):
    path = tmp_path / "bad.yaml"
    path.write_text(SCHWARZSCHILD + "claims:\n  - quantity: kretchmann\n    equals: 0\n")
    assert cli.main(["check", str(path)]) == 2
    assert "claims[0].quantity: Expected a quantity name" in capsys.readouterr().err


# ------------------------------------------------------------------ deciding claims
def test_schwarzschild_claims_are_proved():
    # Kretschmann scalar 48 M^2/r^6: C. Cherubini et al., Int. J. Mod. Phys. D 11, 827 (2002), eq. (9).
    # Gamma^r_tt = M (r - 2M)/r^3 and Gamma^theta_phiphi = -sin cos: Carroll (2004), eq. (5.17).
    results = _decide(SCHWARZSCHILD + """\
claims:
  - {label: k, quantity: kretschmann, equals: 48*M^2/r^6}
  - {label: g, quantity: christoffel, indices: [r, t, t], equals: M*(r - 2*M)/r^3}
  - {label: g2, quantity: christoffel, indices: [2, 3, 3], equals: -sin(theta)*cos(theta)}
  - {label: inv, quantity: metric_inverse, indices: [r, r], equals: 1 - 2*M/r}
  - {label: vac, property: vacuum}
  - {label: nonflat, property: flat, holds: false}
""")
    assert [(r.claim.label, r.status) for r in results] == [
        ("k", "proved"), ("g", "proved"), ("g2", "proved"), ("inv", "proved"), ("vac", "proved"),
        ("nonflat", "proved")]


def test_wrong_claim_shows_claimed_derived_difference_and_point():
    (r,) = _decide(SCHWARZSCHILD + "claims:\n  - {label: k, quantity: kretschmann, equals: 24*M^2/r^6}\n")
    assert r.status == "fails"
    assert r.claim.expected == 24 * sp.Symbol("M", positive=True) ** 2 / sp.Symbol("r", positive=True) ** 6
    M, rr = sp.Symbol("M", positive=True), sp.Symbol("r", positive=True)
    assert sp.simplify(r.derived - 48 * M**2 / rr**6) == 0
    assert sp.simplify(r.difference + 24 * M**2 / rr**6) == 0
    point = dict(r.witness.point)
    value = {"M": float(point["M"]), "r": float(point["r"])}
    assert float(r.witness.claimed) == pytest.approx(24 * value["M"] ** 2 / value["r"] ** 6, rel=1e-5)
    assert float(r.witness.derived) == pytest.approx(48 * value["M"] ** 2 / value["r"] ** 6, rel=1e-5)


def test_false_property_claim_fails():
    (r,) = _decide(SCHWARZSCHILD + "claims:\n  - {label: f, property: flat}\n")
    assert (r.status, r.message) == ("fails", "component [t,r,t,r] does not vanish")


@pytest.mark.parametrize("equals", [
    "-r^4*sin(theta)*Abs(sin(theta))",                 # |sin| = sin on 0 < theta < pi
])
def test_true_but_unproved_determinant_agrees_numerically(equals):
    (r,) = _decide(SCHWARZSCHILD + f"claims:\n  - {{quantity: determinant, equals: \"{equals}\"}}\n")
    assert r.status == "agrees_numerically"
    assert r.method == "agrees numerically at 12 points (40 digits), not proved symbolically"


@pytest.mark.parametrize("equals", [
    "48*M^2*sqrt(r^2 + 2*r + 1)/(r^6*(r + 1))",       # sqrt((r+1)^2) = r + 1 for r > 0
    "48*M^2/r^6 + sqrt(3 + 2*sqrt(2)) - 1 - sqrt(2)",   # denested radical: sqrt(3 + 2 sqrt 2) = 1 + sqrt 2
])
def test_true_but_unproved_scalar_is_never_called_proved(equals):
    (r,) = _decide(SCHWARZSCHILD + f"claims:\n  - {{quantity: kretschmann, equals: \"{equals}\"}}\n")
    assert r.status == "agrees_numerically"


def test_numerical_comparison_catches_wrong_claim_it_cannot_prove():
    # The same form with the sign lost: the normal form cannot decide it, a sample point does.
    (r,) = _decide(SCHWARZSCHILD + "claims:\n  - {quantity: determinant, equals: \"r^4*sin(theta)*Abs(sin(theta))\"}\n")
    assert r.status == "fails"
    assert float(r.witness.claimed) == pytest.approx(-float(r.witness.derived), rel=1e-9)


# ------------------------------------------------------------------ exact-solution checks
def test_reissner_nordstrom_electrovacuum_is_proved():
    model, cv = _load(REISSNER_NORDSTROM.replace("CHARGE", "-Q"))
    res = claims.check_source(model, cv)
    assert (res.type, res.status, res.residual, res.extra) == ("electromagnetic", "proved", (), ())


def test_reissner_nordstrom_wrong_charge_factor_fails_with_residual():
    model, cv = _load(REISSNER_NORDSTROM.replace("CHARGE", "-2*Q"))
    res = claims.check_source(model, cv)
    assert res.status == "fails"
    Q, r = sp.Symbol("Q", real=True), sp.Symbol("r", positive=True)
    M = sp.Symbol("M", positive=True)
    f = 1 - 2 * M / r + Q**2 / r**2
    # G_tt = f Q^2/r^4 while 8 pi T_tt = f (2Q)^2/r^4: the residual is -3 f Q^2/r^4 (common practice).
    got = dict(res.residual)
    assert cv.is_zero(got[(0, 0)] + 3 * f * Q**2 / r**4)
    assert cv.is_zero(got[(1, 1)] - 3 * Q**2 / (r**4 * f))
    assert sorted(got) == [(0, 0), (1, 1), (2, 2), (3, 3)]


def test_kerr_newman_electrovacuum_with_published_potential_is_proved():
    model, cv = _load(KERR_NEWMAN.replace("FACTOR", "1"))
    res = claims.check_source(model, cv)
    assert (res.status, res.residual, res.extra) == ("proved", (), ())


def test_kerr_newman_wrong_charge_factor_fails_readably():
    model, cv = _load(KERR_NEWMAN.replace("FACTOR", "2"))
    res = claims.check_source(model, cv)
    assert res.status == "fails"
    assert res.residual and res.witness is not None
    # Maxwell's equations still hold for any constant factor; only the field equations fail.
    assert res.extra == ()
    text = checks.source_json(model, res)
    assert set(text["residual"]) >= {"t,t", "r,r", "theta,theta", "phi,phi", "t,phi"}


def test_flrw_perfect_fluid_with_friedmann_equations_is_proved():
    model, cv = _load(FLRW + FRIEDMANN)
    res = claims.check_source(model, cv)
    assert (res.status, res.residual) == ("proved", ())
    targets = [str(x) for x, _ in res.imposed]
    assert targets == ["rho(t)", "p(t)"]


def test_flrw_without_friedmann_equations_reports_them():
    model, cv = _load(FLRW)
    res = claims.check_source(model, cv)
    assert res.status == "fails"
    t, r = model.coordinate_symbols[:2]
    k = model.parameter_symbols[0]
    a, rho, p = (f.applied for f in model.functions)
    ad, add = sp.diff(a, t), sp.diff(a, t, 2)
    got = dict(res.residual)
    assert sorted(got) == [(0, 0), (1, 1), (2, 2), (3, 3)]
    # First Friedmann equation: 3 (a'^2 + k)/a^2 = 8 pi rho (Carroll 2004, eq. (8.44)).
    assert cv.is_zero(got[(0, 0)] - (3 * (ad**2 + k) / a**2 - 8 * sp.pi * rho))
    # Second: -(2 a a'' + a'^2 + k) = 8 pi p a^2, times g_rr/a^2 = 1/(1 - k r^2).
    assert cv.is_zero(got[(1, 1)] - (-(2 * a * add + ad**2 + k) - 8 * sp.pi * p * a**2) / (1 - k * r**2))


def test_flrw_fluid_velocity_must_be_normalised():
    model, cv = _load(FLRW.replace("velocity: {t: 1}", "velocity: {t: 2}") + FRIEDMANN)
    res = claims.check_source(model, cv)
    assert res.status == "fails"
    assert [(name, key, v) for name, key, v in res.extra] == [("normalisation", (), -3)]


def test_flrw_claims_reduce_with_imposed_relations():
    model, cv = _load(FLRW + FRIEDMANN + """\
claims:
  - label: rho
    quantity: einstein
    indices: [t, t]
    equals: 8*pi*rho(t)
""")
    (r,) = claims.decide_claims(model, cv)
    assert r.status == "proved"


def test_vaidya_null_dust_is_proved():
    model, cv = _load(VAIDYA.replace("DENSITY", "diff(m(v), v)/(4*pi*r^2)"))
    res = claims.check_source(model, cv)
    assert (res.status, res.residual, res.extra) == ("proved", (), ())


def test_vaidya_wrong_density_fails_in_the_vv_component_only():
    model, cv = _load(VAIDYA.replace("DENSITY", "diff(m(v), v)/(8*pi*r^2)"))
    res = claims.check_source(model, cv)
    v, r = model.coordinate_symbols[:2]
    m = model.functions[0].applied
    assert res.status == "fails"
    # G_vv - 8 pi T_vv = 2m'/r^2 - m'/r^2 (Griffiths & Podolsky 2009, eq. (9.25)).
    assert [k for k, _ in res.residual] == [(0, 0)]
    assert cv.is_zero(res.residual[0][1] - sp.diff(m, v) / r**2)


def test_scalar_field_source_residual():
    # Minkowski with a constant potential V = V0 acts as a cosmological constant: T_ab = -V0 g_ab.
    text = """\
texgen: 1
id: flat
title: flat
version: 1.0.0
coordinates: [t, x, y, z]
parameters:
  V0: positive
metric:
  line_element: -dt^2 + dx^2 + dy^2 + dz^2
source:
  type: scalar_field
  field: 0
  potential: V0 + field^2
"""
    model, cv = _load(text)
    res = claims.check_source(model, cv)
    V0 = model.parameter_symbols[0]
    assert res.status == "fails"
    assert dict(res.residual) == {(0, 0): -8 * sp.pi * V0, (1, 1): 8 * sp.pi * V0,
                                  (2, 2): 8 * sp.pi * V0, (3, 3): 8 * sp.pi * V0}


# ------------------------------------------------------------------ demo, reports and the command line
@pytest.fixture(scope="module")
def demo():
    """The demo spacetime and its curvature, shared: its matter analysis takes seconds."""
    return _load(DEMO.read_text(), str(DEMO))


def test_demo_claims_verdicts(demo):
    model, cv = demo
    verdicts = {r.claim.label: r.status for r in claims.decide_claims(model, cv)}
    assert verdicts == {"ricci-scalar": "proved", "energy-density": "proved", "energy-density-notebook": "fails",
                        "radial-pressure": "proved", "tangential-pressure": "proved", "not-vacuum": "proved",
                        "weak": "proved", "dominant": "fails"}
    notes = {r.claim.label: r.claim.note for r in claims.decide_claims(model, cv)}
    assert [k for k, n in notes.items() if n.startswith("Deliberate mistake")] == ["energy-density-notebook",
                                                                                   "dominant"]


def test_check_demo_exits_1_and_prints_the_table(capsys):
    assert cli.main(["check", str(DEMO)]) == 1
    out = capsys.readouterr().out.splitlines()
    assert out[0].split() == ["FILE", "CLAIM", "VERDICT", "HOW"]
    rows = {line.split()[1]: line.split()[2] for line in out[1:] if line.startswith(str(DEMO))}
    assert rows["energy-density-notebook"] == "fails"
    assert rows["ricci-scalar"] == "proved"


def test_check_exits_0_when_all_hold_and_writes_json(tmp_path, capsys):
    path = tmp_path / "s.yaml"
    path.write_text(SCHWARZSCHILD + "source: {type: vacuum}\nclaims:\n  - {label: k, quantity: kretschmann, "
                    "equals: 48*M^2/r^6}\n")
    out = tmp_path / "verdicts.json"
    assert cli.main(["check", str(path), "--json", str(out)]) == 0
    data = json.loads(out.read_text())
    assert data["exit_code"] == 0
    (entry,) = data["files"]
    assert [(c["label"], c["status"]) for c in entry["claims"]] == [("k", "proved")]
    assert entry["source_check"]["status"] == "proved"
    lines = capsys.readouterr().out.splitlines()
    assert [line.split()[1:3] for line in lines[1:]] == [["k", "proved"], ["source", "(vacuum)"]]


def test_check_json_records_failures(tmp_path):
    path = tmp_path / "s.yaml"
    path.write_text(SCHWARZSCHILD + "claims:\n  - {label: k, quantity: kretschmann, equals: 24*M^2/r^6}\n")
    out = tmp_path / "v.json"
    assert cli.main(["check", str(path), "--json", str(out)]) == 1
    (c,) = json.loads(out.read_text())["files"][0]["claims"]
    assert (c["status"], c["claimed"], c["derived"], c["difference"]) == ("fails", "24*M^2/r^6", "48*M**2/r**6",
                                                                          "-24*M**2/r**6")


def test_check_missing_file_exits_2(tmp_path, capsys):
    assert cli.main(["check", str(tmp_path / "nothing.yaml")]) == 2


def test_build_writes_report_with_checks_and_strict_exits_1(tmp_path, capsys):
    path = tmp_path / "s.yaml"
    path.write_text(SCHWARZSCHILD + "claims:\n  - {label: wrong-k, quantity: kretschmann, equals: 24*M^2/r^6}\n")
    out = tmp_path / "s.md"
    assert cli.main(["build", str(path), "-o", str(out)]) == 0
    assert "warning:" in capsys.readouterr().err
    text = out.read_text()
    assert "## Checks" in text and "| wrong-k | **fails** |" in text
    assert cli.main(["build", str(path), "-o", str(tmp_path / "s.tex"), "--strict"]) == 1
    tex = (tmp_path / "s.tex").read_text()
    assert r"\subsection*{Checks}" in tex and r"\paragraph{wrong-k: \textbf{fails}.}" in tex


def test_results_are_json_ready():
    model, cv = _load(REISSNER_NORDSTROM.replace("CHARGE", "-Q") + "claims:\n  - {quantity: ricci_scalar, equals: 0}\n")
    data = checks.results(model, cv)
    json.dumps(data)
    assert data["source_check"]["status"] == "proved"
    assert data["claims"][0]["label"] == "claims[0]"


# Kruskal (1960); Misner, Thorne & Wheeler (1973), eqs. (31.13)-(31.14): r(T, X) fixed implicitly by
# (r/2M - 1) exp(r/2M) = X^2 - T^2.
KRUSKAL = """\
texgen: 1
id: ks
title: ks
version: 1.0.0
coordinates:
  - T
  - X
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  M: positive
functions:
  r: {of: [T, X], assume: positive}
metric:
  line_element: 32*M^3/r(T, X)*exp(-r(T, X)/(2*M)) (-dT^2 + dX^2) + r(T, X)^2 (dtheta^2 + sin(theta)^2 dphi^2)
claims:
  - {label: k, quantity: kretschmann, equals: "48*M^2/r(T, X)^6"}
  - {label: vac, property: vacuum}
"""


def test_implicit_relation_proves_kruskal_vacuum_exactly():
    text = KRUSKAL + 'impose:\n  - "(r(T, X)/(2*M) - 1)*exp(r(T, X)/(2*M)) = X^2 - T^2"\nsource: {type: vacuum}\n'
    model, cv = _load(text)
    assert [(r.claim.label, r.status) for r in claims.decide_claims(model, cv)] == [("k", "proved"),
                                                                                    ("vac", "proved")]
    assert claims.check_source(model, cv).status == "proved"


def test_without_the_relation_kruskal_claims_fail():
    model, cv = _load(KRUSKAL)
    assert [r.status for r in claims.decide_claims(model, cv)] == ["fails", "fails"]


def test_demo_report_shows_the_checks(demo):
    model, cv = demo
    md = api.report_text(model, cv, "md")
    assert "## Checks" in md
    assert "| energy-density-notebook | **fails** |" in md and "| dominant | **fails** |" in md
    assert "**2 of 8 claims do not hold.**" in md


def test_potential_that_is_not_source_free_fails_maxwell():
    # A_t = -Q/r^2 on Reissner-Nordstrom: (1/sqrt(-g)) d_r(sqrt(-g) F^{rt}) = 2Q/r^4 (worked by hand,
    # with F_rt = 2Q/r^3 and sqrt(-g) = r^2 sin(theta)).
    model, cv = _load(REISSNER_NORDSTROM.replace("CHARGE/r", "-Q/r^2"))
    res = claims.check_source(model, cv)
    Q, r = sp.Symbol("Q", real=True), sp.Symbol("r", positive=True)
    assert res.status == "fails"
    assert [(name, key) for name, key, _ in res.extra] == [("maxwell", (0,))]
    assert cv.is_zero(res.extra[0][2] - 2 * Q / r**4)


def test_matter_claims_and_horizons_as_sets():
    # Reissner-Nordstrom: horizons M +- sqrt(M^2 - Q^2) (MTW 1973, ex. 31.8); Coulomb energy density
    # Q^2/(8 pi r^4) (common practice); the electromagnetic field obeys the dominant energy condition
    # (Hawking & Ellis 1973, ch. 4).
    text = REISSNER_NORDSTROM.replace("CHARGE", "-Q") + """\
structure:
  horizon_function: r^2 - 2*M*r + Q^2
claims:
  - {label: h, quantity: horizons, equals: ["M - sqrt(M^2 - Q^2)", "M + sqrt(M^2 - Q^2)"]}
  - {label: h1, quantity: horizons, equals: ["M + sqrt(M^2 - Q^2)"]}
  - {label: rho, quantity: energy_density, equals: Q^2/(8*pi*r^4)}
  - {label: pr, quantity: pressure, indices: [r], equals: -Q^2/(8*pi*r^4)}
  - {label: pt, quantity: pressure, indices: [phi], equals: -Q^2/(8*pi*r^4)}
  - {label: dec, energy_condition: dominant, verdict: holds}
  - {label: nec, energy_condition: null, verdict: violated}
"""
    got = [(r.claim.label, r.status) for r in _decide(text)]
    assert got == [("h", "proved"), ("h1", "fails"), ("rho", "proved"), ("pr", "proved"), ("pt", "fails"),
                   ("dec", "proved"), ("nec", "fails")]


def test_check_reads_each_file_through_the_api(monkeypatch, tmp_path, capsys):
    seen = []

    def fake_load(path):
        seen.append(str(path))
        raise ConfigError("Expected a mapping but received: a list")

    monkeypatch.setattr(api, "load_spacetime", fake_load)
    files = [tmp_path / "a.yaml", tmp_path / "b.yaml"]
    for f in files:
        f.write_text("x")
    assert cli.main(["check", str(files[0]), str(files[1])]) == 2
    assert seen == [str(files[0]), str(files[1])]
    assert capsys.readouterr().err.count("error: Expected a mapping but received: a list") == 2
