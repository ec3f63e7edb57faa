"""Shared fixtures: sample spacetime files, the bad-input catalogue, a counter of derivations made."""
from __future__ import annotations

import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from hypothesis import settings

import texgen.engine

# Property tests draw the same examples on every run, so that CI is reproducible
# (a failure found once is found again); bench/fuzz_long.py does the open-ended search.
settings.register_profile("texgen", derandomize=True)
settings.load_profile("texgen")

ROOT = Path(__file__).resolve().parent.parent
"""The repository's root folder."""

LIBRARY = ROOT / "metrics_yaml"
"""The shipped library of spacetime files."""

BAD_INPUTS = Path(__file__).parent / "bad_inputs"
"""The catalogue of bad spacetime files; expected.yaml says what each must report."""

KERR = """\
texgen: 1
id: kerr-test
title: Kerr black hole (Boyer-Lindquist coordinates)
version: "1.1.0"
references:
  - text: "R. P. Kerr, Phys. Rev. Lett. 11, 237 (1963)"
    doi: 10.1103/PhysRevLett.11.237
  - "R. H. Boyer and R. W. Lindquist, J. Math. Phys. 8, 265 (1967)"
changelog:
  1.0.0: First entry.
  1.1.0: Spin range.
coordinates:
  - t
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  M: positive
  a: {range: "0 <= a < M", value: 0.6}
definitions:
  Sigma: r^2 + a^2*cos(theta)^2
  Delta: r^2 - 2*M*r + a^2
metric:
  line_element: >
    -(1 - 2*M*r/Sigma) dt^2 - 4*M*a*r*sin(theta)^2/Sigma dt dphi
    + Sigma/Delta dr^2 + Sigma dtheta^2
    + (r^2 + a^2 + 2*M*r*a^2*sin(theta)^2/Sigma) sin(theta)^2 dphi^2
conventions:
  signature: "-+++"
  riemann_sign: -1
derive: [christoffel, ricci]
"""
"""The Kerr metric in Boyer-Lindquist form as in Misner, Thorne & Wheeler, Gravitation (1973), eq. (33.2)."""

SPHERE = """\
id: two-sphere
coordinates:
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  R: positive
metric:
  line_element: R^2 (dtheta^2 + sin(theta)^2 dphi^2)
conventions:
  signature: "++"
"""
"""The round 2-sphere of radius R, a Riemannian metric (common practice)."""


@pytest.fixture
def write(tmp_path):
    """Write text (or bytes) to a file in tmp_path and return its path."""

    def _write(text: str | bytes, name: str = "spacetime.yaml") -> Path:
        path = tmp_path / name
        if isinstance(text, bytes):
            path.write_bytes(text)
        else:
            path.write_text(text, encoding="utf-8")
        return path

    return _write


@pytest.fixture
def spy(monkeypatch):
    """Ids of the spacetimes whose Curvature is made (through texgen.engine.Curvature) during the test."""
    made = []

    class Spy(texgen.engine.Curvature):
        def __init__(self, *a, **k):
            made.append(a[0].id)
            super().__init__(*a, **k)

    monkeypatch.setattr(texgen.engine, "Curvature", Spy)
    return made


# -- compiling LaTeX reports -------------------------------------------------------

OVERFULL_TOLERANCE_PT = 3.0
"""Overfull boxes up to this width are tolerated (invisible at print resolution)."""


def _pdflatex() -> str:
    exe = shutil.which("pdflatex")
    if exe is None:
        if os.environ.get("CI"):
            pytest.fail("pdflatex is required in CI (install texlive-latex-recommended)")
        pytest.skip("pdflatex not installed")
    return exe


def _compile(tex: Path) -> str:
    """Compile twice in non-stop mode; return the log, failing on any LaTeX error."""
    exe = _pdflatex()
    for _ in range(2):
        proc = subprocess.run([exe, "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape", tex.name],
                              cwd=tex.parent, capture_output=True, text=True, errors="replace",
                              stdin=subprocess.DEVNULL, timeout=300)
        log = tex.with_suffix(".log").read_text(errors="replace")
        assert proc.returncode == 0, f"pdflatex failed on {tex.name}:\n" + "\n".join(
            line for line in log.splitlines() if line.startswith("!"))[:2000]
    return log


def _overfull(log: str) -> list[str]:
    bad = []
    for m in re.finditer(r"Overfull \\hbox \(([\d.]+)pt too wide\)[^\n]*", log):
        if float(m.group(1)) > OVERFULL_TOLERANCE_PT:
            bad.append(m.group(0))
    return bad
