"""Tests for the library of published spacetimes in metrics_yaml/.

Every file must load; the entries must carry ids, references, versions and
changelogs; the relations between entries must hold; and the metric texgen
reads from a file must equal the metric as printed in the literature, written
out independently here.
"""
from __future__ import annotations

import re
from pathlib import Path

import pytest
import sympy as sp

from texgen.api import load_spacetime
from texgen.spec.expressions import parse_expression
from texgen.spec.schema import namespace

LIBRARY = Path(__file__).resolve().parents[2] / "metrics_yaml"
FILES = sorted(p for p in LIBRARY.rglob("*.yaml") if p.is_file())
SEMVER = re.compile(r"^\d+\.\d+\.\d+$")


def _rel(path: Path) -> str:
    return path.relative_to(LIBRARY).as_posix()


_CACHE: dict[Path, object] = {}


def _load(path: Path):
    """Each file is loaded once per test run (loading samples the metric numerically)."""
    if path not in _CACHE:
        _CACHE[path] = load_spacetime(path)
    return _CACHE[path]


def _by_id():
    return {_load(p).id: _load(p) for p in FILES}


def _published():
    """Entries other than the invented demo."""
    return [p for p in FILES if _rel(p).split("/")[0] != "demo"]


def _renamed(expr, symbols):
    """``expr`` with its symbols replaced by same-named ones from ``symbols``.

    Entries declare different assumptions for the same name (``Lambda`` real in
    one file, positive in another), so symbols are matched by name.
    """
    names = {s.name: s for s in symbols}
    return expr.xreplace({s: names[s.name] for s in expr.free_symbols if s.name in names})


def _symbols(model) -> dict[str, sp.Symbol]:
    return {s.name: s for s in model.coordinate_symbols + model.parameter_symbols}


def _is_zero_matrix(m) -> bool:
    return all(sp.simplify(e) == 0 for e in m)


def test_library_has_at_least_25_published_entries():
    assert len(_published()) >= 25


@pytest.mark.parametrize("path", FILES, ids=_rel)
def test_file_validates(path):
    model = _load(path)
    assert model.id
    assert model.metric.shape == (model.dimension, model.dimension)


def test_ids_are_unique():
    ids = [_load(p).id for p in FILES]
    duplicates = sorted({i for i in ids if ids.count(i) > 1})
    assert duplicates == []


@pytest.mark.parametrize("path", FILES, ids=_rel)
def test_entry_has_references_version_and_changelog(path):
    model = _load(path)
    assert model.references
    assert SEMVER.match(model.version)
    assert model.version != "0.0.0"
    assert model.version in dict(model.changelog)
    assert model.title
    assert model.family == _rel(path).split("/")[0]


@pytest.mark.parametrize("path", _published(), ids=_rel)
def test_published_entry_has_claims_naming_their_reference(path):
    """Each claim says where its value comes from (a reference, or "common practice")."""
    section = _load(path).section("claims")
    assert section is not None and section.data
    missing = [c.get("label", i) for i, c in enumerate(section.data) if not c.get("reference")]
    assert missing == []


def _relations():
    out = []
    for p in FILES:
        section = _load(p).section("relations")
        for i, rel in enumerate(section.data if section else []):
            kind = "limit_of" if "limit_of" in rel else "same_as"
            out.append(pytest.param(p, rel, id=f"{_rel(p)}:{kind}:{rel[kind]}"))
    return out


@pytest.mark.parametrize("path, relation", _relations())
def test_relation_holds(path, relation):
    """``limit_of``: the other entry with ``set`` applied is this metric.
    ``same_as``: the other entry's metric pulled back through ``map`` is this metric."""
    model = _load(path)
    ns = namespace(model)
    subs_defs = model.definition_substitutions()
    own = list(model.coordinate_symbols + model.parameter_symbols)
    entries = _by_id()
    if "limit_of" in relation:
        other = entries[relation["limit_of"]]
        ons = namespace(other)
        assert set(relation["set"]) <= {p.name for p in other.parameters}
        sub = {ons.symbols[k]: parse_expression(v, ns).xreplace(subs_defs) for k, v in relation["set"].items()}
        limit = _renamed(other.metric.xreplace(sub), own)
        assert _is_zero_matrix(limit - model.metric)
    else:
        other = entries[relation["same_as"]]
        assert set(relation["map"]) == {c.name for c in other.coordinates}
        images = [parse_expression(relation["map"][c.name], ns).xreplace(subs_defs) for c in other.coordinates]
        jac = sp.Matrix(other.dimension, model.dimension,
                        lambda i, j: sp.diff(images[i], model.coordinate_symbols[j]))
        g_other = _renamed(other.metric, model.parameter_symbols).xreplace(
            {c.symbol: images[i] for i, c in enumerate(other.coordinates)})
        assert _is_zero_matrix(jac.T * g_other * jac - model.metric)


# Round trip: the metric as published, typed in here independently of the files.

t, x, y, z, v, r, theta, phi, chi = sp.symbols("t x y z v r theta phi chi", real=True)
M, a, Q, l, J, k, mu = sp.symbols("M a Q l J k mu", real=True)
sin, cos = sp.sin, sp.cos
A = sp.Function("a")


def _schwarzschild():
    # K. Schwarzschild (1916); MTW, Gravitation (1973), eq. (31.1).
    f = 1 - 2 * M / r
    return sp.diag(-f, 1 / f, r**2, r**2 * sin(theta) ** 2)


def _reissner_nordstrom():
    # H. Reissner (1916), G. Nordstrom (1918); Gaussian units, G = c = 1.
    f = 1 - 2 * M / r + Q**2 / r**2
    return sp.diag(-f, 1 / f, r**2, r**2 * sin(theta) ** 2)


def _kerr():
    # R. H. Boyer and R. W. Lindquist, J. Math. Phys. 8, 265 (1967): the Kerr metric
    # written with rho^2 = r^2 + a^2 cos^2(theta), Delta = r^2 - 2 M r + a^2, in the
    # form g_phiphi = ((r^2 + a^2)^2 - a^2 Delta sin^2(theta)) sin^2(theta)/rho^2.
    rho2 = r**2 + a**2 * cos(theta) ** 2
    delta = r**2 - 2 * M * r + a**2
    g = sp.zeros(4)
    g[0, 0] = -(delta - a**2 * sin(theta) ** 2) / rho2
    g[0, 3] = g[3, 0] = -2 * M * a * r * sin(theta) ** 2 / rho2
    g[1, 1] = rho2 / delta
    g[2, 2] = rho2
    g[3, 3] = ((r**2 + a**2) ** 2 - a**2 * delta * sin(theta) ** 2) * sin(theta) ** 2 / rho2
    return g


def _kerr_newman():
    # E. T. Newman et al., J. Math. Phys. 6, 918 (1965), in Boyer-Lindquist form:
    # the Kerr metric with 2 M r replaced by 2 M r - Q^2 (MTW 1973, ch. 33).
    rho2 = r**2 + a**2 * cos(theta) ** 2
    w = 2 * M * r - Q**2
    g = sp.zeros(4)
    g[0, 0] = -(1 - w / rho2)
    g[0, 3] = g[3, 0] = -w * a * sin(theta) ** 2 / rho2
    g[1, 1] = rho2 / (r**2 - 2 * M * r + a**2 + Q**2)
    g[2, 2] = rho2
    g[3, 3] = (r**2 + a**2 + w * a**2 * sin(theta) ** 2 / rho2) * sin(theta) ** 2
    return g


def _flrw():
    # H. P. Robertson, Astrophys. J. 82, 284 (1935); A. G. Walker (1937):
    # ds^2 = -dt^2 + a(t)^2 [dr^2/(1 - k r^2) + r^2 dOmega^2].
    return sp.diag(-1, A(t) ** 2 / (1 - k * r**2), A(t) ** 2 * r**2, A(t) ** 2 * r**2 * sin(theta) ** 2)


def _btz():
    # M. Banados, C. Teitelboim, J. Zanelli, Phys. Rev. Lett. 69, 1849 (1992):
    # ds^2 = -N^2 dt^2 + N^-2 dr^2 + r^2 (N^phi dt + dphi)^2.
    n2 = -M + r**2 / l**2 + J**2 / (4 * r**2)
    nphi = -J / (2 * r**2)
    g = sp.zeros(3)
    g[0, 0] = -n2 + r**2 * nphi**2
    g[0, 2] = g[2, 0] = r**2 * nphi
    g[1, 1] = 1 / n2
    g[2, 2] = r**2
    return g


def _goedel():
    # K. Goedel, Rev. Mod. Phys. 21, 447 (1949): ds^2 = a^2 (dx0^2 - dx1^2 + e^(2 x1) dx2^2/2
    # - dx3^2 + 2 e^(x1) dx0 dx2) in +---; here times -1, with (x0, x1, x2, x3) = (t, x, z, y).
    g = sp.zeros(4)
    g[0, 0] = -(a**2)
    g[0, 3] = g[3, 0] = -(a**2) * sp.exp(x)
    g[1, 1] = a**2
    g[2, 2] = a**2
    g[3, 3] = -(a**2) * sp.exp(2 * x) / 2
    return g


def _tangherlini():
    # F. R. Tangherlini, Nuovo Cimento 27, 636 (1963), five dimensions: f = 1 - mu/r^2.
    f = 1 - mu / r**2
    return sp.diag(-f, 1 / f, r**2, r**2 * sin(chi) ** 2, r**2 * sin(chi) ** 2 * sin(theta) ** 2)


@pytest.mark.parametrize("relpath, expected", [
    ("schwarzschild/schwarzschild.yaml", _schwarzschild),
    ("charged/reissner_nordstrom.yaml", _reissner_nordstrom),
    ("kerr/kerr.yaml", _kerr),
    ("kerr/kerr_newman.yaml", _kerr_newman),
    ("cosmology/flrw.yaml", _flrw),
    ("lower_dimensions/btz.yaml", _btz),
    ("exotic/goedel.yaml", _goedel),
    ("higher_dimensions/schwarzschild_tangherlini_5d.yaml", _tangherlini),
])
def test_metric_round_trip(relpath, expected):
    model = _load(LIBRARY / relpath)
    g = _renamed(model.metric, list(model.coordinate_symbols + model.parameter_symbols))
    g = g.xreplace({f.applied: sp.Function(f.name)(*f.arguments) for f in model.functions})
    want = _renamed(expected(), list(model.coordinate_symbols + model.parameter_symbols))
    assert _is_zero_matrix(sp.Matrix(g) - want)


def test_round_trip_detects_a_wrong_metric():
    """The comparison is not vacuous: Kerr is not Kerr-Newman with Q != 0."""
    model = _load(LIBRARY / "kerr/kerr.yaml")
    want = _renamed(_kerr_newman(), list(model.coordinate_symbols + model.parameter_symbols))
    assert not _is_zero_matrix(sp.Matrix(model.metric) - want)


DELIBERATE_MISTAKES = {"demo-veiled-black-hole": {"energy-density-notebook", "dominant"}}
"""Claims that are wrong on purpose: the demo shows how texgen reports a failing claim."""


@pytest.mark.parametrize("path", sorted(LIBRARY.rglob("*.yaml")), ids=lambda p: str(p.relative_to(LIBRARY)))
def test_every_library_claim_and_source_check_holds(path):
    """The library tests itself: each entry's claims come from its references (named in each claim)."""
    from texgen.physics import claims
    from texgen.api import derive, load_spacetime

    model = load_spacetime(path)
    cv = derive(model)
    results = claims.decide_claims(model, cv)
    failing = {r.claim.label for r in results if not r.holds}
    assert failing == DELIBERATE_MISTAKES.get(model.id, set()), [
        (r.claim.label, r.status, r.message) for r in results if not r.holds]
    assert all(r.status != "undecided" for r in results)
    source = claims.check_source(model, cv)
    if source is not None:
        assert source.holds, (source.type, source.status)


# ------------------------------------------------------------------ folder builds with figures

FIGURED = ("wormholes/morris_thorne.yaml", "lower_dimensions/two_sphere.yaml")
MT_FIGURES = [f"morris-thorne-{name}.{ext}" for name in ("profiles", "invariants", "energy_conditions", "light_cones")
              for ext in ("pdf", "png")]


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir()) if p.is_file()}


def _copy_entries(tmp: Path, *rels: str) -> Path:
    import shutil

    folder = tmp / "src"
    for rel in rels:
        (folder / rel).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(LIBRARY / rel, folder / rel)
    return folder


@pytest.fixture(scope="module")
def figured(tmp_path_factory):
    """Two entries built cold into out/ with figures and a cache, then warm into warm/ with derive disabled."""
    from texgen import api
    from texgen.library.cache import ResultCache
    from texgen.library.build import build_library

    tmp = tmp_path_factory.mktemp("figured")
    folder = _copy_entries(tmp, *FIGURED)
    cold = build_library([folder], tmp / "out", formats=("tex", "md"), cache=ResultCache(tmp / "cache"),
                         options=api.BuildOptions())
    mp = pytest.MonkeyPatch()

    def no_derive(*a, **k):
        raise AssertionError("a warm build derived")

    mp.setattr(api, "derive", no_derive)
    try:
        warm = build_library([folder], tmp / "warm", formats=("tex", "md"), cache=ResultCache(tmp / "cache"),
                             options=api.BuildOptions())
    finally:
        mp.undo()
    return tmp, folder, cold, warm


def test_folder_build_draws_figures_that_the_reports_reference(figured):
    tmp, _, cold, _ = figured
    entries = {e["id"]: e for e in cold.entries}
    assert [e["error"] for e in cold.entries] == [None, None]
    assert entries["morris-thorne"]["figures"] == MT_FIGURES
    assert entries["two-sphere"]["figures"] == []  # no time, no radial coordinate: nothing to draw
    md = (tmp / "out" / "morris-thorne.md").read_text(encoding="utf-8")
    tex = (tmp / "out" / "morris-thorne.tex").read_text(encoding="utf-8")
    png_refs = re.findall(r"!\[[a-z_]+\]\(([^)]+)\)", md)
    pdf_refs = re.findall(r"\\includegraphics\[[^]]*\]\{([^}]+)\}", tex)
    assert png_refs == [f for f in MT_FIGURES if f.endswith(".png")]
    assert pdf_refs == [f for f in MT_FIGURES if f.endswith(".pdf")]
    for name in png_refs:
        assert (tmp / "out" / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    for name in pdf_refs:
        assert (tmp / "out" / name).read_bytes()[:5] == b"%PDF-"
    # the "done when": the wormhole report shows the null-energy-condition violation at the throat
    assert "Hatched: the null energy condition is violated for $1 \\leq r \\leq" in md
    assert "Figures" not in (tmp / "out" / "two-sphere.md").read_text(encoding="utf-8")


def test_warm_folder_build_copies_identical_figures_without_deriving(figured):
    tmp, _, cold, warm = figured
    assert [e["cached"] for e in cold.entries] == [False, False]
    assert [e["cached"] for e in warm.entries] == [True, True]
    assert [e["figures"] for e in warm.entries] == [e["figures"] for e in cold.entries]
    assert _snapshot(tmp / "warm") == _snapshot(tmp / "out")


def test_folder_build_equals_a_single_file_build(figured, tmp_path):
    """Same input, same figure files and the same report, whichever way it was built."""
    from texgen import api

    tmp, folder, _, _ = figured
    report = api.build_report(folder / FIGURED[0], tmp_path / "morris-thorne.md")
    single = _snapshot(tmp_path)
    built = _snapshot(tmp / "out")
    assert sorted(single) == sorted(MT_FIGURES + ["morris-thorne.md"])
    assert single == {name: built[name] for name in single}
    assert report.read_text(encoding="utf-8") == (tmp / "out" / "morris-thorne.md").read_text(encoding="utf-8")


@pytest.mark.parametrize("damage", ["truncate", "delete"])
def test_damaged_cached_figure_makes_the_entry_a_miss(figured, tmp_path, caplog, damage):
    import logging
    import shutil

    from texgen import api
    from texgen.library.cache import ResultCache
    from texgen.library.build import build_library

    tmp, folder, _, _ = figured
    shutil.copytree(tmp / "cache", tmp_path / "cache")
    cache = ResultCache(tmp_path / "cache")
    want = _snapshot(tmp / "out")
    png = want["morris-thorne-energy_conditions.png"]
    import hashlib

    victim = tmp_path / "cache" / "figures" / f"{hashlib.sha256(png).hexdigest()}.png"
    if damage == "truncate":
        victim.write_bytes(png[: len(png) // 2])
    else:
        victim.unlink()
    with caplog.at_level(logging.DEBUG, logger="texgen"):
        again = build_library([folder], tmp_path / "out", formats=("tex", "md"), cache=cache,
                              options=api.BuildOptions())
    assert [(e["id"], e["cached"]) for e in again.entries] == [("two-sphere", True), ("morris-thorne", False)]
    assert any("morris-thorne-energy_conditions.png of morris-thorne missing or corrupt" in r.getMessage()
               for r in caplog.records)
    assert _snapshot(tmp_path / "out") == want
    assert victim.read_bytes() == png  # the cache holds the figure again


def test_no_figures_build_writes_no_figure_files_and_keeps_its_own_entry(figured, tmp_path):
    import shutil

    from texgen import api
    from texgen.library.cache import ResultCache
    from texgen.library.build import build_library

    tmp, folder, _, _ = figured
    shutil.copytree(tmp / "cache", tmp_path / "cache")
    cache = ResultCache(tmp_path / "cache")
    plain = build_library([folder], tmp_path / "plain", formats=("tex", "md"), cache=cache,
                          options=api.BuildOptions(figures=False))
    assert [(e["cached"], e["figures"]) for e in plain.entries] == [(False, []), (False, [])]
    assert sorted(_snapshot(tmp_path / "plain")) == ["index.md", "index.tex", "morris-thorne.md", "morris-thorne.tex",
                                                     "two-sphere.md", "two-sphere.tex"]
    assert "Figures" not in (tmp_path / "plain" / "morris-thorne.md").read_text(encoding="utf-8")
    assert "includegraphics" not in (tmp_path / "plain" / "morris-thorne.tex").read_text(encoding="utf-8")
    # both kinds of entry now sit side by side: each build hits its own
    again = build_library([folder], tmp_path / "plain2", formats=("md",), cache=cache,
                          options=api.BuildOptions(figures=False))
    figs = build_library([folder], tmp_path / "figs", formats=("md",), cache=cache, options=api.BuildOptions())
    assert [e["cached"] for e in again.entries + figs.entries] == [True, True, True, True]
    assert "morris-thorne-profiles.png" in _snapshot(tmp_path / "figs")
    assert not any(name.endswith(".png") for name in _snapshot(tmp_path / "plain2"))


def test_no_shorthands_folder_build_equals_the_single_file_build_and_keeps_its_own_entry(figured, tmp_path):
    """--no-shorthands reaches folder builds: no Shorthands list, the single-file report's bytes, and a cache
    entry apart from the default one (which keeps hitting)."""
    import shutil

    from texgen import api
    from texgen.library.cache import ResultCache
    from texgen.library.build import build_library

    tmp, folder, _, _ = figured
    shutil.copytree(tmp / "cache", tmp_path / "cache")
    cache = ResultCache(tmp_path / "cache")
    opts = api.BuildOptions(figures=False, shorthands=False)
    full = build_library([folder], tmp_path / "full", formats=("md",), cache=cache, options=opts)
    assert [e["cached"] for e in full.entries] == [False, False]
    md = (tmp_path / "full" / "morris-thorne.md").read_text(encoding="utf-8")
    assert "## Shorthands" not in md
    assert "## Shorthands" in (tmp / "out" / "morris-thorne.md").read_text(encoding="utf-8")
    single = api.build_report(folder / FIGURED[0], tmp_path / "single.md", opts)
    assert single.read_text(encoding="utf-8") == md
    again = build_library([folder], tmp_path / "again", formats=("md",), cache=cache, options=opts)
    default = build_library([folder], tmp_path / "default", formats=("md",), cache=cache, options=api.BuildOptions())
    assert [e["cached"] for e in again.entries + default.entries] == [True, True, True, True]
