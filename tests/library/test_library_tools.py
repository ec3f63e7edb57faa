"""Tests for texgen.library: relations between entries, listing, checks, bulk builds and the index."""
from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from texgen import cli
from texgen.api import load_spacetime
from texgen.errors import ConfigError
from texgen.library.entries import claims_status, load_entries
from texgen.library.relations import check_relations

LIB = Path(__file__).resolve().parents[2] / "metrics_yaml"
KERR = LIB / "kerr" / "kerr.yaml"
KERR_NEWMAN = LIB / "kerr" / "kerr_newman.yaml"
SCHW = LIB / "schwarzschild" / "schwarzschild.yaml"
EF = LIB / "schwarzschild" / "schwarzschild_eddington_finkelstein_ingoing.yaml"
EF_ID = "schwarzschild-eddington-finkelstein-ingoing"


def _entries(*paths):
    models = [load_spacetime(p) for p in paths]
    return {m.id: m for m in models}


def test_kerr_newman_with_zero_charge_is_kerr():
    """Kerr-Newman (Newman et al., J. Math. Phys. 6, 918 (1965)) at Q = 0 is Kerr (Kerr 1963)."""
    [r] = check_relations(_entries(KERR, KERR_NEWMAN), ["kerr"])
    assert (r.kind, r.other, r.holds, r.method, r.failures) == ("limit_of", "kerr-newman", True, "exact", ())


def test_ingoing_eddington_finkelstein_maps_to_schwarzschild():
    """v = t + r + 2M ln(r/2M - 1) (Finkelstein, Phys. Rev. 110, 965 (1958); MTW ch. 31):
    the pulled-back metric, Ricci scalar and Kretschmann scalar agree."""
    [r] = check_relations(_entries(SCHW, EF), [EF_ID])
    assert (r.kind, r.other, r.holds, r.method) == ("same_as", "schwarzschild", True, "exact")


def _with_relation(tmp_path, src: Path, relation: str) -> Path:
    text = src.read_text(encoding="utf-8")
    head, sep, _ = text.partition("relations:\n")
    out = tmp_path / src.name
    out.write_text((head if sep else text) + "relations:\n" + relation, encoding="utf-8")
    return out


def test_wrong_limit_fails_with_a_readable_message(tmp_path):
    """Kerr-Newman with Q = 1 is not Kerr: g_tt differs by Q^2/Sigma, here 1/(r^2 + a^2 cos^2 theta)."""
    path = _with_relation(tmp_path, KERR, "  - limit_of: kerr-newman\n    set: {Q: 1}\n")
    [r] = check_relations(_entries(path, KERR_NEWMAN), ["kerr"])
    assert not r.holds
    assert r.method == "fails"
    assert r.message.startswith("'kerr-newman' with Q = 1 is not this metric: g[t,t] differs by ")
    assert r.failures[0][0] == "g[t,t]"
    assert "and 3 more" in r.message  # g_tt, g_tphi, g_rr, g_phiphi carry Delta


def test_wrong_map_fails(tmp_path):
    """With t = v + r + 2M ln(r/2M - 1), dt = dv + dr/f and -f dt^2 + dr^2/f = -f dv^2 - 2 dv dr:
    g_vr = -1 where the ingoing form has +1 (hand calculation, common practice)."""
    path = _with_relation(tmp_path, EF, '  - same_as: schwarzschild\n'
                                        '    map: {t: "v + r + 2*M*log(r/(2*M) - 1)", r: r, theta: theta, phi: phi}\n')
    [r] = check_relations(_entries(path, SCHW), [EF_ID])
    assert not r.holds
    assert r.message == "'schwarzschild' pulled back through the map is not this spacetime: g[v,r] differs by -2"
    assert r.failures == (("g[v,r]", "-2"),)


@pytest.mark.parametrize("relation, where, message", [
    ("  - limit_of: kerr-newmann\n    set: {Q: 0}\n", "relations[0].limit_of",
     "Expected the id of a library entry but received: 'kerr-newmann' (did you mean 'kerr-newman'?)"),
    ("  - limit_of: kerr-newman\n    set: {q: 0}\n", "relations[0].set.q",
     "Expected a parameter of 'kerr-newman' (M, a, Q) but received: 'q'"),
    ("  - limit_of: kerr-newman\n    set: {Q: 0 +}\n", "relations[0].set.Q", None),
    ("  - limit_of: kerr-newman\n", "relations[0].set", "Expected a mapping of parameter: value but received: None"),
    ("  - same_as: kerr-newman\n    map: {t: t, r: r, theta: theta, psi: phi}\n", "relations[0].map.psi",
     "Expected a coordinate of 'kerr-newman' (t, r, theta, phi) but received: 'psi'"),
    ("  - same_as: kerr-newman\n    map: {t: t, r: r, theta: theta}\n", "relations[0].map",
     "Expected an expression for every coordinate of 'kerr-newman' but received none for: phi"),
    ("  - same_as: kerr-newman\n    map: {t: t, r: r, theta: theta, phi: chi}\n", "relations[0].map.phi", None),
    ("  - {limit_of: kerr-newman, same_as: kerr-newman}\n", "relations[0]", None),
])
def test_bad_relations_are_config_errors(tmp_path, relation, where, message):
    path = _with_relation(tmp_path, KERR, relation)
    with pytest.raises(ConfigError) as info:
        check_relations(_entries(path, KERR_NEWMAN), ["kerr"])
    err = info.value
    assert err.location.file == str(path)
    assert err.location.path == where
    assert err.location.line is not None and err.location.line > 60
    if message is not None:
        assert err.message + (f" ({err.hint})" if err.hint else "") == message


def test_relation_error_line_points_at_the_key(tmp_path):
    path = _with_relation(tmp_path, EF, '  - same_as: schwarzschild\n    map:\n      t: v\n      r: r\n'
                                        '      theta: theta\n      phi: phi\n      x: r\n')
    with pytest.raises(ConfigError) as info:
        check_relations(_entries(path, SCHW), [EF_ID])
    lines = path.read_text(encoding="utf-8").splitlines()
    assert lines[info.value.location.line - 1] == "      x: r"


def test_every_library_relation_holds():
    """All relations declared in metrics_yaml/ hold (the entries' references are in each file)."""
    entries, errors = load_entries([LIB])
    assert errors == []
    results = check_relations(entries)
    assert len(results) >= 13
    assert [(r.id, r.other, r.message) for r in results if not r.holds] == []


@pytest.mark.parametrize("results, text", [
    (None, ""),
    ({}, ""),
    ({"claims": []}, "no claims"),
    ({"claims": [{"holds": True}, {"holds": True}], "source_check": {"holds": True}}, "3/3 hold"),
    ({"claims": [{"holds": True}, {"holds": False}], "source_check": None}, "1/2 hold, 1 fails"),
    ({"claims": [{"holds": False}, {"holds": False}]}, "0/2 hold, 2 fail"),
])
def test_claims_status(results, text):
    assert claims_status(results) == text


# ------------------------------------------------------------------ command line

def _copy(tmp_path, *rels) -> Path:
    folder = tmp_path / "lib"
    for rel in rels:
        (folder / rel).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(LIB / rel, folder / rel)
    return folder


def test_library_lists_entries(tmp_path, capsys):
    folder = _copy(tmp_path, "kerr/kerr.yaml", "lower_dimensions/two_sphere.yaml")
    assert cli.main(["library", str(folder)]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].split() == ["ID", "VERSION", "DIM", "FAMILY", "CLAIMS", "TITLE"]
    assert [x.split()[0] for x in lines[1:]] == ["kerr", "two-sphere"]
    kerr = lines[1].split()
    assert kerr[1:4] == ["1.0.0", "4", "kerr"]


def test_library_check_passes_on_the_shipped_library(capsys):
    assert cli.main(["library", "--check", str(LIB)]) == 0
    assert capsys.readouterr().out.splitlines()[-1].endswith(" relations, 0 problem(s)")


def test_library_check_flags_unbumped_physics_and_broken_relation(tmp_path, capsys):
    folder = _copy(tmp_path, "kerr/kerr.yaml", "kerr/kerr_newman.yaml")
    assert cli.main(["library", "--record", str(folder)]) == 0
    assert cli.main(["library", "--check", str(folder)]) == 0
    kerr = folder / "kerr" / "kerr.yaml"
    kerr.write_text(kerr.read_text(encoding="utf-8").replace("Delta: r^2 - 2*M*r + a^2", "Delta: r^2 - M*r + a^2"),
                    encoding="utf-8")
    capsys.readouterr()
    assert cli.main(["library", "--check", str(folder)]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err[0].startswith(f"error: {kerr}: relations[0]: 'kerr-newman' with Q = 0 is not this metric: ")
    assert err[1].startswith(f"error: {kerr}: kerr: physics changed but version not bumped (still 1.0.0; hash ")
    assert len(err) == 2


def test_diff_of_two_files_exits_1_when_the_physics_changed(tmp_path, capsys):
    old = tmp_path / "old.yaml"
    new = tmp_path / "new.yaml"
    text = SCHW.read_text(encoding="utf-8")
    old.write_text(text, encoding="utf-8")
    new.write_text(text.replace("title: ", "title: Renamed ", 1), encoding="utf-8")
    assert cli.main(["diff", str(old), str(new), "--no-cache"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[1].startswith("physics: unchanged")
    assert out[2:] == ["definition: title", "components: no metric or derived component differs"]
    assert cli.main(["diff", str(SCHW), str(LIB / "charged" / "reissner_nordstrom.yaml"), "--no-cache"]) == 1
    out = capsys.readouterr().out
    assert "  [t,t] new - old = -Q**2/r**2" in out
    assert "invariants:\n" in out


def test_diff_needs_two_files_or_two_revisions(capsys):
    assert cli.main(["diff", str(SCHW)]) == 2
    assert capsys.readouterr().err == "error: Expected OLD.yaml NEW.yaml but received 1 file(s)\n"
    assert cli.main(["diff", str(SCHW), "--rev", "HEAD"]) == 2
    assert "Expected one FILE with two --rev" in capsys.readouterr().err


def test_diff_between_git_revisions(tmp_path, capsys):
    """Two commits of one file in a scratch repository, read back with git show."""
    import subprocess

    def git(*a):
        subprocess.run(["git", *a], cwd=tmp_path, check=True, capture_output=True,
                       env={"GIT_AUTHOR_NAME": "t", "GIT_AUTHOR_EMAIL": "t@t", "GIT_COMMITTER_NAME": "t",
                            "GIT_COMMITTER_EMAIL": "t@t", "PATH": __import__("os").environ["PATH"],
                            "HOME": str(tmp_path)})

    git("init", "-q")
    f = tmp_path / "s.yaml"
    text = SCHW.read_text(encoding="utf-8")
    f.write_text(text, encoding="utf-8")
    git("add", "s.yaml")
    git("commit", "-q", "-m", "one")
    f.write_text(text.replace("f: 1 - 2*M/r", "f: 1 - 2*M/r + M^2/r^2"), encoding="utf-8")
    assert "f: 1 - 2*M/r + M^2/r^2" in f.read_text(encoding="utf-8")
    git("commit", "-q", "-am", "two")
    assert cli.main(["diff", str(f), "--rev", "HEAD~1", "--rev", "HEAD", "--no-cache"]) == 1
    out = capsys.readouterr().out
    assert "  [t,t] new - old = -M**2/r**2" in out
    assert cli.main(["diff", str(f), "--rev", "HEAD~5", "--rev", "HEAD", "--no-cache"]) == 2
    assert "at revision 'HEAD~5'" in capsys.readouterr().err


def test_cache_info_and_clear(tmp_path, capsys):
    d = tmp_path / "c"
    (d / "ab").mkdir(parents=True)
    (d / "ab" / "x.json").write_text("{}", encoding="utf-8")
    assert cli.main(["cache", "info", "--cache-dir", str(d)]) == 0
    assert capsys.readouterr().out == f"{d}: 1 entries, 0.0 KiB\n"
    assert cli.main(["cache", "clear", "--cache-dir", str(d)]) == 0
    assert capsys.readouterr().out == f"removed 1 entries from {d}\n"


# ------------------------------------------------------------------ bulk build and index

SMALL = ("minkowski/minkowski_cartesian.yaml", "minkowski/minkowski_spherical.yaml",
         "schwarzschild/schwarzschild.yaml", "lower_dimensions/two_sphere.yaml")


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """A small folder (four published entries and one broken file) built with two worker processes."""
    from texgen.library.cache import ResultCache
    from texgen.library.build import build_library

    tmp = tmp_path_factory.mktemp("bulk")
    folder = _copy(tmp, *SMALL)
    (folder / "broken.yaml").write_text("texgen: 1\nid: broken\n", encoding="utf-8")
    events = []
    result = build_library([folder], tmp / "out", formats=("tex", "md", "json"), jobs=2,
                           cache=ResultCache(tmp / "cache"), progress=lambda *a: events.append(a))
    return tmp, folder, result, events


def test_bulk_build_writes_every_report_and_survives_a_broken_entry(built):
    tmp, folder, result, events = built
    ids = [e["id"] for e in result.entries]
    assert ids == ["broken", "two-sphere", "minkowski-cartesian", "minkowski-spherical", "schwarzschild"]  # file order
    assert result.failed == 1
    broken = result.entries[0]
    assert broken["error"] == (f"{folder / 'broken.yaml'}:1:1: Missing required key 'coordinates'\n"
                               f"{folder / 'broken.yaml'}:1:1: Missing required key 'metric'")
    for e in result.entries[1:]:
        assert e["error"] is None
        assert e["reports"] == {f: f"{e['id']}.{f}" for f in ("tex", "md", "json")}
        assert e["cached"] is False
        for name in e["reports"].values():
            assert (tmp / "out" / name).is_file()
    assert [p.name for p in result.index] == ["index.md", "index.tex"]


def test_bulk_build_progress_counts_every_entry(built):
    _, _, _, events = built
    assert [e[0] for e in events] == [1, 2, 3, 4, 5]
    assert {e[1] for e in events} == {5}
    assert sorted((e[2], e[3]) for e in events) == [
        ("broken", "failed"), ("minkowski-cartesian", "done"), ("minkowski-spherical", "done"),
        ("schwarzschild", "done"), ("two-sphere", "done")]


def test_bulk_build_reports_equal_single_builds(built):
    from texgen import api

    tmp, folder, _, _ = built
    model = api.load_spacetime(folder / "schwarzschild" / "schwarzschild.yaml")
    cv = api.derive(model)
    for fmt in ("tex", "md", "json"):
        assert (tmp / "out" / f"schwarzschild.{fmt}").read_text(encoding="utf-8") == api.report_text(model, cv, fmt)


def test_index_markdown(built):
    tmp, _, result, _ = built
    md = (tmp / "out" / "index.md").read_text(encoding="utf-8").splitlines()
    assert md[0] == "<!-- generated by texgen 0.1.0 -->"
    assert "5 entries, 1 failed." in md
    assert ("| `schwarzschild` | Schwarzschild black hole (Schwarzschild coordinates) | 1.1.0 | 4 | schwarzschild "
            "| 9/9 hold | [schwarzschild.md](schwarzschild.md) |") in md
    assert "| `two-sphere` | Round two-sphere | 1.0.0 | 2 | lower\\_dimensions | 6/6 hold | [two-sphere.md](two-sphere.md) |" in md
    assert any(line.startswith("| `broken` |  | - | - | - | - | failed: ") for line in md)
    assert "| `minkowski-spherical` | same spacetime as | `minkowski-cartesian` | coordinate map |" in md
    assert "| `minkowski-spherical` | limit of | `schwarzschild` | M = 0 |" in md
    assert "| `schwarzschild` | limit of | `kerr` (not built) | a = 0 |" in md
    assert "- minkowski: `minkowski-cartesian`, `minkowski-spherical`" in md


def test_index_latex(built):
    tmp, _, _, _ = built
    tex = (tmp / "out" / "index.tex").read_text(encoding="utf-8")
    assert tex.startswith("% generated by texgen 0.1.0\n\\documentclass")
    assert ("\\texttt{schwarzschild} & Schwarzschild black hole (Schwarzschild coordinates) & 1.1.0 & 4 & "
            "schwarzschild & 9/9 hold \\\\") in tex
    assert "\\texttt{minkowski-spherical} & limit of & \\texttt{schwarzschild} & M = 0 \\\\" in tex
    assert tex.rstrip().endswith("\\end{document}")


def test_warm_bulk_build_recomputes_nothing(built, spy):
    """Second build in this process with the same cache: every entry a hit, no Curvature made."""
    from texgen.library.cache import ResultCache
    from texgen.library.build import build_library

    tmp, folder, _, _ = built
    before = (tmp / "out" / "schwarzschild.tex").read_text(encoding="utf-8")
    result = build_library([folder], tmp / "out", formats=("tex", "md", "json"),
                           cache=ResultCache(tmp / "cache"))
    assert spy == []
    assert [e["cached"] for e in result.entries] == [False, True, True, True, True]
    assert (tmp / "out" / "schwarzschild.tex").read_text(encoding="utf-8") == before


def test_bulk_build_accepts_any_executor(tmp_path):
    """A thread pool stands in for other executors (a Dask client's get_executor() has the same interface)."""
    from concurrent.futures import ThreadPoolExecutor

    from texgen.library.build import build_library

    folder = _copy(tmp_path, "lower_dimensions/two_sphere.yaml")
    with ThreadPoolExecutor(max_workers=1) as ex:
        result = build_library([folder], tmp_path / "out", formats=("md",), executor=ex)
    assert [(e["id"], e["error"], e["reports"]) for e in result.entries] == [("two-sphere", None, {"md": "two-sphere.md"})]


def test_bulk_build_in_process_reports_engine_stages(tmp_path):
    from texgen.library.build import build_library

    folder = _copy(tmp_path, "lower_dimensions/two_sphere.yaml")
    events = []
    build_library([folder], tmp_path / "out", formats=("md",), progress=lambda *a: events.append(a))
    stages = {e[3] for e in events}
    assert {"christoffel", "riemann_down", "ricci"} <= stages
    assert events[-1] == (1, 1, "two-sphere", "done")


@pytest.mark.parametrize("kwargs, message", [
    ({"formats": ("pdf",)}, "Expected one of: 'tex', 'md', 'json' but received: 'pdf'"),
])
def test_bulk_build_bad_arguments(tmp_path, kwargs, message):
    from texgen.library.build import build_library

    folder = _copy(tmp_path, "lower_dimensions/two_sphere.yaml")
    with pytest.raises(ConfigError, match="^" + message.replace("(", r"\(").replace(")", r"\)") + "$"):
        build_library([folder], tmp_path / "out", **kwargs)


def test_bulk_build_of_an_empty_folder(tmp_path):
    from texgen.library.build import build_library

    (tmp_path / "empty").mkdir()
    with pytest.raises(ConfigError, match="^No spacetime files found in "):
        build_library([tmp_path / "empty"], tmp_path / "out")


def test_library_listing_shows_verdicts_of_an_earlier_build(tmp_path, capsys):
    from texgen.library.cache import ResultCache
    from texgen.library.build import entry_payload

    folder = _copy(tmp_path, "schwarzschild/schwarzschild.yaml", "lower_dimensions/two_sphere.yaml")
    entry_payload(load_spacetime(folder / "schwarzschild" / "schwarzschild.yaml"), cache=ResultCache(tmp_path / "c"))
    assert cli.main(["library", str(folder), "--cache-dir", str(tmp_path / "c")]) == 0
    rows = {line.split()[0]: line for line in capsys.readouterr().out.splitlines()[1:]}
    assert "  9/9 hold  " in rows["schwarzschild"]
    assert "  6 claims, not checked  " in rows["two-sphere"]
