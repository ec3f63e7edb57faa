"""Heavy spacetimes for bench/bench_heavy.py and tests/test_heavy.py, as texgen YAML text.

Each case is YAML (so the bench measures the whole pipeline: schema, engine,
claims, report) with the published facts it must satisfy written as claims.
"""
from __future__ import annotations

from texgen.api import load_spacetime_text

_HEAD = "texgen: 1\nversion: 1.0.0\nchangelog:\n  1.0.0: Benchmark case.\n"

SCHWARZSCHILD = _HEAD + """\
id: bench-schwarzschild
title: Schwarzschild black hole
description: Vacuum, static, spherically symmetric.
references:
  - text: "K. Schwarzschild, Sitzungsber. Preuss. Akad. Wiss. 189 (1916)"
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters:
  M: positive
definitions:
  f: 1 - 2*M/r
metric:
  line_element: -f dt^2 + dr^2/f + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
source:
  type: vacuum
claims:
  - label: kretschmann
    quantity: kretschmann
    equals: 48*M^2/r^6
    reference: "common practice (e.g. MTW 1973, ch. 31)"
"""

KERR_NEWMAN = _HEAD + """\
id: bench-kerr-newman
title: Kerr-Newman black hole (Boyer-Lindquist coordinates)
description: Einstein-Maxwell, stationary, axisymmetric.
references:
  - text: "C. W. Misner, K. S. Thorne, J. A. Wheeler, Gravitation (1973), eq. 33.2"
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters:
  M: positive
  a: positive
  Q: real
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
  potential: {t: -Q*r/Sigma, phi: Q*a*r*sin(theta)^2/Sigma}
claims:
  - label: ricci-scalar
    quantity: ricci_scalar
    equals: 0
    reference: "traceless Maxwell stress tensor in four dimensions (common practice)"
"""

# Carter (1968), Commun. Math. Phys. 10, 280; in this form e.g. Stuchlik & Hledik
# (2000), Acta Phys. Slovaca 52, 363; the potential's 1/Xi goes with the dt/Xi
# normalisation of the metric (checked here by the source claim, not assumed).
KERR_NEWMAN_DE_SITTER = _HEAD + """\
id: bench-kerr-newman-de-sitter
title: Kerr-Newman-de Sitter black hole (Boyer-Lindquist-type coordinates)
description: Einstein-Maxwell with a cosmological constant Lambda.
references:
  - text: "B. Carter, Commun. Math. Phys. 10, 280 (1968)"
  - text: "Z. Stuchlik, S. Hledik, Acta Phys. Slovaca 52, 363 (2002)"
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters:
  M: positive
  a: positive
  Q: real
  Lambda: {assume: real, latex: "\\\\Lambda"}
definitions:
  Sigma: r^2 + a^2*cos(theta)^2
  Dr: (r^2 + a^2)*(1 - Lambda*r^2/3) - 2*M*r + Q^2
  Dth: 1 + Lambda*a^2*cos(theta)^2/3
  Xi: 1 + Lambda*a^2/3
metric:
  line_element: >
    -Dr/(Xi^2*Sigma) (dt - a*sin(theta)^2 dphi)^2
    + Dth*sin(theta)^2/(Xi^2*Sigma) (a dt - (r^2 + a^2) dphi)^2
    + Sigma/Dr dr^2 + Sigma/Dth dtheta^2
cosmological_constant: Lambda
source:
  type: electromagnetic
  potential: {t: -Q*r/(Xi*Sigma), phi: Q*a*r*sin(theta)^2/(Xi*Sigma)}
claims:
  - label: ricci-scalar
    quantity: ricci_scalar
    equals: 4*Lambda
    reference: "trace of G_ab + Lambda g_ab = 8 pi T_ab with traceless T_ab (common practice)"
"""

# Myers & Perry (1986), Ann. Phys. 172, 304, one rotation plane in five dimensions
# (in this form e.g. Emparan & Reall 2008, Living Rev. Rel. 11, 6, eq. 7).
MYERS_PERRY_5D = _HEAD + """\
id: bench-myers-perry-5d
title: Myers-Perry black hole in five dimensions, one spin
description: Vacuum, rotating in one plane.
references:
  - text: "R. C. Myers, M. J. Perry, Ann. Phys. (N.Y.) 172, 304 (1986)"
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi/2"}, {name: phi, period: 2*pi},
              {name: psi, period: 2*pi, latex: "\\\\psi"}]
parameters:
  mu: {assume: positive, latex: "\\\\mu"}
  a: positive
definitions:
  Sigma: r^2 + a^2*cos(theta)^2
  Delta: r^2 + a^2 - mu
metric:
  line_element: >
    -dt^2 + mu/Sigma (dt - a*sin(theta)^2 dphi)^2 + Sigma/Delta dr^2 + Sigma dtheta^2
    + (r^2 + a^2)*sin(theta)^2 dphi^2 + r^2*cos(theta)^2 dpsi^2
source:
  type: vacuum
claims:
  - label: vacuum
    property: vacuum
    reference: "Myers and Perry (1986)"
"""

STATIONARY_AXISYMMETRIC = _HEAD + """\
id: bench-stationary-axisymmetric
title: General stationary axisymmetric metric, four free functions
description: "-e^(2 nu) dt^2 + e^(2 psi) (dphi - omega dt)^2 + e^(2 mu) (dr^2 + r^2 dtheta^2)."
references:
  - text: "J. M. Bardeen, Astrophys. J. 162, 71 (1970)"
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
functions:
  nu: {of: [r, theta], latex: "\\\\nu"}
  psi: {of: [r, theta], latex: "\\\\psi"}
  omega: {of: [r, theta], latex: "\\\\omega"}
  mu: {of: [r, theta], latex: "\\\\mu"}
metric:
  line_element: >
    -exp(2*nu(r, theta)) dt^2 + exp(2*psi(r, theta)) (dphi - omega(r, theta) dt)^2
    + exp(2*mu(r, theta)) (dr^2 + r^2 dtheta^2)
"""


def tangherlini(n: int) -> str:
    """Schwarzschild–Tangherlini in n >= 4 dimensions (Tangherlini 1963, Nuovo Cimento 27, 636)."""
    k = n - 2
    angles = [f"th{i}" for i in range(1, k + 1)]
    sphere = ""
    for name in reversed(angles):
        sphere = f"d{name}^2" if not sphere else f"d{name}^2 + sin({name})^2 ({sphere})"
    coords = ", ".join(f'{{name: {a}, range: "0 < {a} < pi"}}' for a in angles[:-1])
    coords += f", {{name: {angles[-1]}, period: 2*pi}}"
    # K = (n-1)(n-2)^2(n-3) mu^2 / r^(2(n-1)): common practice, recalled (it gives
    # 48 M^2/r^6 for n = 4, mu = 2M, and 72 mu^2/r^8 for n = 5)
    kr = (n - 1) * (n - 2) ** 2 * (n - 3)
    return _HEAD + f"""\
id: bench-tangherlini-{n}d
title: Schwarzschild-Tangherlini black hole in {n} dimensions
description: Static vacuum black hole.
references:
  - text: "F. R. Tangherlini, Nuovo Cimento 27, 636 (1963)"
coordinates: [t, {{name: r, range: "r > 0"}}, {coords}]
parameters:
  mu: {{assume: positive, latex: "\\\\mu"}}
definitions:
  f: 1 - mu/r^{n - 3}
metric:
  line_element: -f dt^2 + dr^2/f + r^2 ({sphere})
source:
  type: vacuum
claims:
  - label: kretschmann
    quantity: kretschmann
    equals: {kr}*mu^2/r^{2 * (n - 1)}
    reference: "(n-1)(n-2)^2(n-3) mu^2/r^(2(n-1)) (common practice, recalled)"
"""


TANGHERLINI_DIMENSIONS = tuple(range(4, 11))

CASES: dict[str, str] = {
    "schwarzschild": SCHWARZSCHILD,
    "kerr_newman": KERR_NEWMAN,
    "kerr_newman_de_sitter": KERR_NEWMAN_DE_SITTER,
    "myers_perry_5d": MYERS_PERRY_5D,
    **{f"tangherlini_{n}d": tangherlini(n) for n in TANGHERLINI_DIMENSIONS},
    "stationary_axisymmetric": STATIONARY_AXISYMMETRIC,
}


def load(name: str):
    """The frozen model of case ``name``."""
    return load_spacetime_text(CASES[name], f"{name}.yaml")
