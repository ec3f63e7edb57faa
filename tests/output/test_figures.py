"""Tests for texgen.figures: plotted data against published formulas, files, sections, errors."""
from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import pytest

from texgen.api import derive, library_dir, load_spacetime, load_spacetime_text
from texgen.errors import ConfigError, RenderError
from texgen.output.figures import Figure, draw_figures, report_section
from texgen.output.render import render

LIB = library_dir()
KN_VALUES = {"M": 1, "a": 0.6, "Q": 0.3}


def _library(rel: str):
    st = load_spacetime(LIB / rel)
    return st, derive(st)


@pytest.fixture(scope="module")
def kerr_newman(tmp_path_factory):
    st, cv = _library("kerr/kerr_newman.yaml")
    out = tmp_path_factory.mktemp("kn")
    figs = draw_figures(st, cv, out, "kn", settings={"values": KN_VALUES})
    return st, cv, out, {f.name: f for f in figs}


@pytest.fixture(scope="module")
def morris_thorne(tmp_path_factory):
    """The shipped file: its figures section chooses b(r) = b0^2/r and Phi = 0 with b0 = 1."""
    st, cv = _library("wormholes/morris_thorne.yaml")
    out = tmp_path_factory.mktemp("mt")
    return st, {f.name: f for f in draw_figures(st, cv, out, "mt", formats=("png",))}


@pytest.fixture(scope="module")
def eddington_finkelstein(tmp_path_factory):
    st, cv = _library("schwarzschild/schwarzschild_eddington_finkelstein_ingoing.yaml")
    out = tmp_path_factory.mktemp("ef")
    return st, cv, {f.name: f for f in draw_figures(st, cv, out, "ef", formats=("png",))}


def _close(a, b, tol=1e-9):
    return abs(a - b) <= tol * max(1.0, abs(b))


# ------------------------------------------------------------------ Kerr–Newman
def test_kerr_newman_figures_drawn(kerr_newman):
    _, _, out, figs = kerr_newman
    assert sorted(figs) == ["ctc", "invariants", "parameter_plane", "profiles"]
    for f in figs.values():
        assert Path(f.path_pdf).read_bytes()[:5] == b"%PDF-"
        assert Path(f.path_png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert Path(f.path_pdf).parent == out


def test_kerr_newman_horizons_in_profiles(kerr_newman):
    # r_± = M ± sqrt(M² − a² − Q²): Newman et al., J. Math. Phys. 6, 918 (1965); MTW (1973) §33.2.
    d = kerr_newman[3]["profiles"].data
    root = math.sqrt(1 - 0.6**2 - 0.3**2)
    assert len(d["horizons"]) == 2 and d["horizon_names"] == ["r_+", "r_-"]
    assert _close(d["horizons"][0], 1 + root)
    assert _close(d["horizons"][1], 1 - root)
    assert d["throats"] == []
    assert d["values"] == {"M": 1.0, "a": 0.6, "Q": 0.3}
    assert "$r/M = 1.742$, $r/M = 0.2584$" in d["caption_tex"]


def test_kerr_newman_ergosurface_on_the_equator(kerr_newman):
    # g_tt = 0 at theta = pi/2: Delta = a², i.e. r = M ± sqrt(M² − Q²) (MTW 1973 eq. 33.2, common practice).
    d = kerr_newman[3]["profiles"].data
    root = math.sqrt(1 - 0.3**2)
    assert len(d["ergosurfaces"]) == 2
    assert _close(d["ergosurfaces"][0], 1 + root)
    assert _close(d["ergosurfaces"][1], 1 - root)


def test_kerr_newman_metric_profile_values(kerr_newman):
    # Boyer–Lindquist Kerr–Newman on the equator (MTW 1973 eq. 33.2): -g_tt = 1 - (2Mr - Q²)/r², g_rr = r²/Delta.
    d = kerr_newman[3]["profiles"].data
    i = min(range(len(d["r"])), key=lambda k: abs(d["r"][k] - 5))
    r = d["r"][i]
    delta = r * r - 2 * r + 0.36 + 0.09
    assert _close(d["minus_g_tt"][i], 1 - (2 * r - 0.09) / r**2)
    assert _close(d["g_rr"][i], r * r / delta)
    assert _close(d["one_over_g_inv_rr"][i], r * r / delta)


def test_kerr_newman_kretschmann_at_outer_horizon(kerr_newman):
    # Henry, Astrophys. J. 535, 350 (2000), on the equator: K = 8 (6 M² r² − 12 M Q² r + 7 Q⁴)/r⁸.
    d = kerr_newman[3]["invariants"].data
    rp = 1 + math.sqrt(1 - 0.36 - 0.09)
    assert _close(d["kretschmann_at_special"][0], 8 * (6 * rp**2 - 12 * 0.09 * rp + 7 * 0.09**2) / rp**8, 1e-8)
    assert d["diverges_at_inner_edge"] is True


def test_kerr_newman_parameter_plane(kerr_newman):
    # Two horizons for a² + Q² < M², none (naked singularity) for a² + Q² > M² (Newman et al. 1965; MTW §33.2).
    d = kerr_newman[3]["parameter_plane"].data
    assert (d["x_name"], d["y_name"], d["scale_name"]) == ("a", "Q", "M")
    assert d["regions"] == ["two horizons", "one horizon", "no horizon (naked singularity)"]
    assert d["point"] == [0.6, 0.3]
    # the extremal line a^2 + Q^2 = M^2, written with the parameters, not with M = 1 put in
    assert (d["extremal_text"], d["extremal_tex"]) == ("Q**2 + a**2 = M**2", "Q^{2} + a^{2} = M^{2}")
    assert "The solid line is the extremal case $Q^{2} + a^{2} = M^{2}$" in kerr_newman[3]["parameter_plane"].caption
    checked = 0
    for j, q in enumerate(d["y"]):
        for i, a in enumerate(d["x"]):
            s = a * a + q * q
            if abs(s - 1) > 0.02 and s > 0:
                assert d["counts"][j][i] == (2 if s < 1 else 0), (a, q)
                checked += 1
    assert checked > 10000
    # a = Q = 0 is Schwarzschild: the second zero of Delta sits at r = 0, outside the declared range r > 0.
    assert d["counts"][d["y"].index(0.0)][0] == 1
    assert sum(row.count(0) for row in d["counts"]) > 1000


def test_kerr_newman_ctc_region(kerr_newman):
    # g_phiphi = ((r² + a²)² − Delta a² sin²θ) sin²θ / Sigma (MTW 1973 eq. 33.2): negative near the ring when Q ≠ 0.
    d = kerr_newman[3]["ctc"].data
    assert d["coordinate"] == "phi"
    a, q = 0.6, 0.3
    for j, th in enumerate(d["theta"]):
        for i, r in enumerate(d["r"]):
            delta = r * r - 2 * r + a * a + q * q
            g = ((r * r + a * a) ** 2 - delta * a * a * math.sin(th) ** 2) * math.sin(th) ** 2
            if abs(g) > 1e-9:
                assert d["timelike"][j][i] == (1 if g < 0 else 0), (r, th)
    assert sum(map(sum, d["timelike"])) > 0


def test_kerr_newman_no_radial_light_cones(kerr_newman):
    """Frame dragging mixes t and phi: radial cones in the t–r plane would mislead, so none are drawn."""
    assert "light_cones" not in kerr_newman[3]


# ------------------------------------------------------------------ Morris–Thorne
def test_morris_thorne_null_condition_violated_at_throat(morris_thorne):
    # Morris and Thorne, Am. J. Phys. 56, 395 (1988), eq. (14) with Phi = 0, b = b0²/r:
    # rho + p_r = (b' r − b)/(8 pi r³) = −1/(4 pi b0²) at r = b0.
    d = morris_thorne[1]["energy_conditions"].data
    assert d["values"] == {"b0": 1.0}  # from the shipped file's figures section
    i = d["r"].index(1.0)
    assert d["pressure_names"] == ["r", "theta", "phi"]
    assert _close(d["rho_plus_p"][0][i], -1 / (4 * math.pi))
    assert d["rho_plus_p"][0][i] < 0
    assert d["null_violated"][0][0] == 1.0
    assert "violated" in morris_thorne[1]["energy_conditions"].caption


def test_morris_thorne_throat_marked_not_horizon(morris_thorne):
    d = morris_thorne[1]["profiles"].data
    assert d["horizons"] == []
    assert d["throats"] == [1.0]
    assert "$b(r) = \\frac{b_{0}^{2}}{r}$" in d["caption_tex"]


# ------------------------------------------------------------------ light cones
def test_ingoing_eddington_finkelstein_cones_tip_inside_horizon(eddington_finkelstein):
    # Ingoing Eddington–Finkelstein: both future radial null directions point inwards for r < 2M
    # (MTW 1973 §31.4 and Box 31.2, recalled).
    d = eddington_finkelstein[2]["light_cones"].data
    assert d["horizons"] == [2.0]
    assert d["t_name"] == "v"
    rs = [c["r"] for c in d["cones"]]
    assert any(r < 2 for r in rs) and any(r > 2 for r in rs)
    for c in d["cones"]:
        assert c["tipped"] is (c["r"] < 2 - 1e-9), c["r"]
        if c["r"] > 2:
            # Outgoing ray dr/dv = (1 − 2M/r)/2 (common practice).
            (_, _), (dr, dv) = c["directions"]
            assert _close(dr / dv, (1 - 2 / c["r"]) / 2, 1e-9)


def test_schwarzschild_kretschmann_finite_at_horizon(eddington_finkelstein):
    # K = 48 M²/r⁶ (MTW 1973 eq. 31.4b, recalled): finite at r = 2M, diverging at r = 0.
    d = eddington_finkelstein[2]["invariants"].data
    assert _close(d["kretschmann_at_special"][0], 48 / 2**6)
    for r, k in zip(d["r"][:50], d["kretschmann_abs"][:50]):
        assert _close(k, 48 / r**6, 1e-9)
    assert d["diverges_at_inner_edge"] is True


# ------------------------------------------------------------------ files and sections
def test_drawing_twice_gives_identical_bytes(eddington_finkelstein, tmp_path):
    st, cv, _ = eddington_finkelstein
    first = draw_figures(st, cv, tmp_path / "one", "x", formats=("pdf", "png", "svg"))
    second = draw_figures(st, cv, tmp_path / "two", "x", formats=("pdf", "png", "svg"))
    assert [f.name for f in first] == ["profiles", "invariants", "light_cones"]
    for a, b in zip(first, second):
        for ext in ("pdf", "png", "svg"):
            pa, pb = tmp_path / "one" / f"x-{a.name}.{ext}", tmp_path / "two" / f"x-{b.name}.{ext}"
            assert pa.read_bytes() == pb.read_bytes(), pa.name
        assert b"CreationDate" not in Path(a.path_pdf).read_bytes()


def test_section_data(kerr_newman):
    st, cv, out, figs = kerr_newman
    sec = report_section(st, cv, None, tuple(figs.values()))
    assert sec["template_tex"] == "sections/figures.tex.j2"
    assert sec["template_md"] == "sections/figures.md.j2"
    assert sec["figures"][0] == {
        "name": "profiles", "file_pdf": "kn-profiles.pdf", "file_png": "kn-profiles.png",
        "caption_tex": figs["profiles"].data["caption_tex"], "caption_md": figs["profiles"].caption,
        "label": "fig:kerr-newman-profiles"}
    sub = report_section(st, cv, None, tuple(figs.values()), relative_to=out.parent)
    assert sub["figures"][0]["file_pdf"] == f"{out.name}/kn-profiles.pdf"


def test_latex_section_compiles_with_the_pdfs(kerr_newman):
    st, cv, out, figs = kerr_newman
    sec = report_section(st, cv, None, tuple(figs.values()))
    body = render("sections/figures.tex.j2", {"s": sec, "section_level": 1})
    assert body.count("\\includegraphics") == 4
    doc = ("\\documentclass{article}\n\\usepackage{amsmath,amssymb}\n\\usepackage{graphicx}\n"
           "\\begin{document}\n" + body + "\n\\end{document}\n")
    (out / "doc.tex").write_text(doc)
    proc = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape", "doc.tex"],
                          cwd=out, capture_output=True, text=True, errors="replace", timeout=120)
    assert proc.returncode == 0, proc.stdout[-2000:]
    log = (out / "doc.log").read_text(errors="replace")
    for name in figs:
        assert f"kn-{name}.pdf" in log
    assert (out / "doc.pdf").read_bytes()[:5] == b"%PDF-"


def test_latex_section_compiles_with_pngs_and_light_cones(eddington_finkelstein, tmp_path):
    st, cv, figs = eddington_finkelstein
    sec = report_section(st, cv, None, tuple(figs.values()), relative_to=tmp_path)
    body = render("sections/figures.tex.j2", {"s": sec, "section_level": 1})
    assert "$v$--$r$ plane" in body
    (tmp_path / "doc.tex").write_text("\\documentclass{article}\n\\usepackage{amsmath,amssymb}\n\\usepackage{graphicx}\n"
                                      "\\begin{document}\n" + body + "\n\\end{document}\n")
    proc = subprocess.run(["pdflatex", "-interaction=nonstopmode", "-halt-on-error", "-no-shell-escape", "doc.tex"],
                          cwd=tmp_path, capture_output=True, text=True, errors="replace", timeout=120)
    assert proc.returncode == 0, proc.stdout[-2000:]
    assert "ef-light_cones.png" in (tmp_path / "doc.log").read_text(errors="replace")


def test_markdown_section_references_existing_pngs(kerr_newman):
    st, cv, out, figs = kerr_newman
    sec = report_section(st, cv, None, tuple(figs.values()))
    text = render("sections/figures.md.j2", {"s": sec})
    assert "![profiles](kn-profiles.png)" in text
    refs = [line.split("](")[1].rstrip(")") for line in text.splitlines() if line.startswith("![")]
    assert len(refs) == 4
    for ref in refs:
        assert (out / ref).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_no_figures_for_the_two_sphere(tmp_path):
    st, cv = _library("lower_dimensions/two_sphere.yaml")
    assert draw_figures(st, cv, tmp_path, "s2") == ()
    assert report_section(st, cv, None, ()) is None
    assert list(tmp_path.iterdir()) == []


def test_draw_list_selects_figures(eddington_finkelstein, tmp_path):
    st, cv, _ = eddington_finkelstein
    figs = draw_figures(st, cv, tmp_path, "e", formats=("png",), settings={"draw": ["invariants"]})
    assert [(f.name, f.path_pdf, Path(f.path_png).name) for f in figs] == [("invariants", None, "e-invariants.png")]
    assert isinstance(figs[0], Figure)


# ------------------------------------------------------------------ errors
@pytest.mark.parametrize("settings, message", [
    ({"values": {"M": "heavy"}}, "<src>:8: figures.values.M: Expected a number but received: 'heavy'"),
    ({"draw": ["profiles", "penrose"]},
     "<src>:8: figures.draw[1]: Expected one of: 'profiles', 'invariants', 'energy_conditions', 'parameter_plane', "
     "'ctc', 'light_cones' but received: 'penrose'"),
    ({"radial_range": [10, 1]},
     "<src>:8: figures.radial_range: Expected a list [lower, upper] of two increasing numbers but received: [10, 1]"),
    ({"parameter_plane": {"x": "a", "y": "J"}},
     "<src>:8: figures.parameter_plane.y: Expected one of: 'M', 'a' but received: 'J'"),
    ({"colours": "bright"},
     "<src>:8: figures.colours: Expected one of: 'values', 'functions', 'radial_range', 'draw', 'parameter_plane' "
     "but received: 'colours'"),
    ({"values": {"b0": 1}}, "<src>:8: figures.values.b0: Expected a parameter name but received: 'b0'"),
    ({"values": {"M": 1, "a": 1.5}}, "<src>:8: figures.values.a: Expected a value with 0 <= a < M but received: 1.5"),
])
def test_bad_settings(settings, message, tmp_path):
    text = KERR_SMALL + "figures: {}\n"
    st = load_spacetime_text(text, "<src>")
    with pytest.raises(ConfigError) as exc:
        draw_figures(st, None, tmp_path, "k", settings=settings)
    assert exc.value.format_message() == message


def test_bad_value_in_file_names_line_and_path(tmp_path):
    st = load_spacetime_text(KERR_SMALL + "figures:\n  values:\n    M: heavy\n", "k.yaml")
    with pytest.raises(ConfigError) as exc:
        draw_figures(st, None, tmp_path, "k")
    assert exc.value.format_message() == "k.yaml:10:8: figures.values.M: Expected a number but received: 'heavy'"


def test_missing_matplotlib(monkeypatch, tmp_path):
    st = load_spacetime_text(KERR_SMALL, "<src>")
    monkeypatch.setitem(sys.modules, "matplotlib", None)
    with pytest.raises(RenderError) as exc:
        draw_figures(st, None, tmp_path, "k")
    assert exc.value.message == "figures need matplotlib: pip install 'texgen[figures]'"


KERR_SMALL = """\
texgen: 1
id: k
title: Schwarzschild-like test file
coordinates: [t, {name: r, range: "r > 0"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive, a: {range: "0 <= a < M"}}
metric:
  line_element: -(1 - 2*M/r) dt^2 + dr^2/(1 - 2*M/r) + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
"""


def test_de_sitter_cones_tip_outwards_beyond_cosmological_horizon(tmp_path):
    # Static de Sitter: cosmological horizon at r = sqrt(3/Lambda) (Gibbons and Hawking, Phys. Rev. D 15, 2738
    # (1977), recalled); beyond it the future points to larger r.
    st, cv = _library("de_sitter/de_sitter_static.yaml")
    (fig,) = draw_figures(st, cv, tmp_path, "ds", formats=("png",), settings={"values": {"Lambda": 3},
                                                                              "draw": ["light_cones"]})
    d = fig.data
    assert _close(d["horizons"][0], 1.0)
    for c in d["cones"]:
        assert c["tipped"] is (c["r"] > 1 + 1e-9), c["r"]
        assert c["towards"] == ("larger" if c["r"] > 1 + 1e-9 else None)
    assert "point to larger $r$" in fig.caption


def test_schwarzschild_de_sitter_horizons_named_from_the_outside_in(tmp_path):
    # f = 1 - 2M/r - Lambda r^2/3 (Kottler 1918; Gibbons and Hawking, Phys. Rev. D 15, 2738 (1977), recalled):
    # for 9 Lambda M^2 < 1 its positive roots are the black-hole and the cosmological horizon, and beyond the
    # cosmological one f < 0 again. The shipped file plots M = 1, Lambda = 0.05; roots taken with numpy.
    import numpy as np

    st, cv = _library("de_sitter/schwarzschild_de_sitter.yaml")
    (fig,) = draw_figures(st, cv, tmp_path, "sds", formats=("png",), settings={"draw": ["profiles"]})
    d = fig.data
    roots = sorted((x.real for x in np.roots([-0.05 / 3, 0, 1, -2]) if abs(x.imag) < 1e-12 and x.real > 0),
                   reverse=True)
    assert len(roots) == 2 and len(d["horizons"]) == 2
    assert all(_close(got, want, 1e-9) for got, want in zip(d["horizons"], roots))
    assert d["horizon_names"] == ["r_c", "r_+"]
    assert "$M = 1$, $\\Lambda = 0.05$" in fig.caption


def test_hayward_kretschmann_finite_at_the_centre(tmp_path):
    # Hayward, Phys. Rev. Lett. 96, 031103 (2006): f = 1 - 2 M r²/(r³ + 2 M l²) ≈ 1 - r²/l² near r = 0,
    # a de Sitter core of radius l, whose Kretschmann scalar is 24/l⁴ (common practice).
    st, cv = _library("regular/hayward.yaml")
    (fig,) = draw_figures(st, cv, tmp_path, "h", formats=("png",), settings={"draw": ["invariants"]})
    d = fig.data
    assert d["finite_at_inner_edge"] is True
    assert d["diverges_at_inner_edge"] is False
    assert "finite limit as $r \\to 0$" in fig.caption
    assert abs(d["kretschmann_abs"][0] - 24 / d["values"]["l"] ** 4) < 1e-3 * 24 / d["values"]["l"] ** 4


# ------------------------------------------------------------------ horizons where g^rr stays finite
def test_isotropic_schwarzschild_horizon_marked(tmp_path):
    # Isotropic coordinates: r = rho (1 + M/(2 rho))^2, -g_tt = ((1 - M/(2 rho))/(1 + M/(2 rho)))^2 (MTW 1973,
    # Exercise 31.7 and eq. (31.22), recalled from memory): g^rho rho = psi^-4 vanishes nowhere, the horizon
    # r = 2M (MTW eq. 31.1) sits at rho = M/2, where g_tt = 0.
    st, cv = _library("schwarzschild/schwarzschild_isotropic.yaml")
    figs = {f.name: f for f in draw_figures(st, cv, tmp_path, "iso", formats=("png",),
                                            settings={"values": {"M": 2}, "draw": ["profiles", "light_cones"]})}
    d = figs["profiles"].data
    assert d["horizons"] == [1.0]
    assert d["throats"] == []
    rho = d["horizons"][0]
    assert _close(rho * (1 + 2 / (2 * rho)) ** 2, 2 * 2)
    i = d["r"].index(1.0)
    assert abs(d["minus_g_tt"][i]) < 1e-12
    assert "horizons at $\\rho/M = 0.5$" in d["caption_tex"]  # the axes and captions in units of M
    # both sides of rho = M/2 are static exteriors in these coordinates: no cone tips over
    assert not any(c["tipped"] for c in figs["light_cones"].data["cones"])


def test_tangherlini_horizon_is_not_a_throat(tmp_path):
    # Tangherlini, Nuovo Cimento 27, 636 (1963), five dimensions: f = 1 - mu/r^2, horizon at r = sqrt(mu).
    # The extra polar angle chi is set to pi/2 like theta when the surfaces r = const are tested for being null.
    st, cv = _library("higher_dimensions/schwarzschild_tangherlini_5d.yaml")
    (fig,) = draw_figures(st, cv, tmp_path, "t5", formats=("png",), settings={"values": {"mu": 4},
                                                                              "draw": ["profiles"]})
    assert fig.data["horizons"] == [2.0]
    assert fig.data["throats"] == []


@pytest.mark.parametrize("rel, settings, label", [
    # Schwarzschild depends on r only through r/M (common practice: radii in units of M), the horizon r = 2M
    ("schwarzschild/schwarzschild.yaml", {"values": {"M": 2}}, "horizons at $r/M = 2$"),
    # BTZ's M is dimensionless (Banados, Teitelboim, Zanelli, Phys. Rev. Lett. 69, 1849 (1992)): plain r
    ("lower_dimensions/btz.yaml", {"values": {"M": 1, "l": 1, "J": 0}}, "horizons at $r = 1$"),
])
def test_radii_in_units_of_the_mass_only_when_it_sets_the_scale(rel, settings, label, tmp_path):
    st, cv = _library(rel)
    (fig,) = draw_figures(st, cv, tmp_path, "u", formats=("png",), settings=dict(settings, draw=["profiles"]))
    assert label in fig.data["caption_tex"]
