"""The build and demo subcommands (texgen/_commands.py) through texgen.cli.main."""
from __future__ import annotations

import json
from pathlib import Path

from texgen import api, cli

ROOT = Path(__file__).resolve().parents[2]
SCHWARZSCHILD = ROOT / "metrics_yaml" / "schwarzschild" / "schwarzschild.yaml"
DEMO = ROOT / "metrics_yaml" / "demo" / "veiled_black_hole.yaml"


def test_build_single_file_format_from_extension(tmp_path, capsys):
    out = tmp_path / "s.json"
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(out)]) == 0
    assert json.loads(out.read_text())["spacetime"]["id"] == "schwarzschild"
    assert "wrote" in capsys.readouterr().out


def test_build_unknown_extension_is_bad_input(tmp_path, capsys):
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(tmp_path / "s.pdf")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: Cannot tell the report format from 's.pdf'")


def test_build_folder_writes_one_report_per_entry_and_an_index(tmp_path, monkeypatch):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "cache"))
    src = tmp_path / "lib"
    src.mkdir()
    (src / "a.yaml").write_text(SCHWARZSCHILD.read_text())
    (src / "b.yaml").write_text(DEMO.read_text())
    out = tmp_path / "out"
    assert cli.main(["build", str(src), "-o", str(out), "-f", "md", "-f", "tex", "-q", "--no-figures",
                     "--jobs", "2"]) == 0
    assert sorted(p.name for p in out.iterdir()) == [
        "demo-veiled-black-hole.md", "demo-veiled-black-hole.tex", "index.md", "index.tex",
        "schwarzschild.md", "schwarzschild.tex"]
    assert "schwarzschild" in (out / "index.md").read_text()
    first = (out / "schwarzschild.md").read_bytes()
    # A second build is served from the cache and writes the same bytes.
    assert any((tmp_path / "cache").rglob("*"))
    assert cli.main(["build", str(src), "-o", str(out), "-f", "md", "-f", "tex", "-q", "--no-figures"]) == 0
    assert (out / "schwarzschild.md").read_bytes() == first


def test_build_folder_reports_a_bad_entry_and_builds_the_others(tmp_path, capsys):
    src = tmp_path / "lib"
    src.mkdir()
    (src / "a.yaml").write_text(SCHWARZSCHILD.read_text())
    (src / "broken.yaml").write_text("id: broken\ncoordinates: [t, r]\nmetric: {line_element: -dt^2 + dq^2}\n")
    out = tmp_path / "out"
    assert cli.main(["build", str(src), "-o", str(out), "-q", "--no-cache", "--no-figures"]) == 2
    assert (out / "schwarzschild.tex").exists()
    err = capsys.readouterr().err
    assert "broken.yaml:3:" in err and "Unknown name 'dq'" in err


def test_build_fragment_has_no_preamble(tmp_path):
    out = tmp_path / "f.tex"
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(out), "--fragment", "--section-level", "subsection",
                     "-q"]) == 0
    text = out.read_text()
    assert r"\documentclass" not in text and text.count(r"\subsection*{") == 1


def test_build_refuses_to_overwrite_foreign_file(tmp_path, capsys):
    out = tmp_path / "paper.tex"
    out.write_text("my own paper\n")
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(out), "-q"]) == 2
    assert out.read_text() == "my own paper\n"
    assert "Refusing to overwrite" in capsys.readouterr().err
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(out), "-q", "--force"]) == 0


def test_build_passes_options_to_the_api(tmp_path, monkeypatch):
    seen = []

    class Writer:
        def __init__(self, model, curvature):
            self.model = model

        def write(self, target, options):
            seen.append((self.model.id, Path(target).name, options))
            return Path(target)

    monkeypatch.setattr(api, "ReportWriter", Writer)
    monkeypatch.setattr(api, "derive", lambda model: None)
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(tmp_path / "x.tex"), "--fragment",
                     "--section-level", "chapter", "--template", str(tmp_path), "-q"]) == 0
    (ident, name, opts), = seen
    assert (ident, name) == ("schwarzschild", "x.tex")
    assert opts == api.BuildOptions(fmt=None, standalone=False, section_level=0, template_dir=str(tmp_path),
                                    force=False, figures=True)


def test_demo_builds_the_embedded_spacetime(tmp_path):
    out = tmp_path / "demo"
    assert cli.main(["demo", "-o", str(out), "--no-pdf"]) == 0
    names = sorted(p.name for p in out.iterdir())
    assert [n for n in names if not n.endswith((".pdf", ".png"))] == [
        "demo-veiled-black-hole.json", "demo-veiled-black-hole.md", "demo-veiled-black-hole.tex"]
    # The demo's figures sit next to its reports, and the Markdown report points at them.
    assert "demo-veiled-black-hole-profiles.png" in names
    assert "(demo-veiled-black-hole-profiles.png)" in (out / "demo-veiled-black-hole.md").read_text()
    assert "veiled black hole" in (out / "demo-veiled-black-hole.md").read_text()
