"""Tests for texgen.cache and the cached build path of texgen.library."""
from __future__ import annotations

import json
import logging
from pathlib import Path

import pytest

from texgen import api
from texgen.library.cache import ResultCache, default_dir, entry_key
from texgen.library.build import entry_payload, render_payload

LIB = Path(__file__).resolve().parents[2] / "metrics_yaml"
SCHW = LIB / "schwarzschild" / "schwarzschild.yaml"


@pytest.fixture(scope="module")
def model():
    return api.load_spacetime(SCHW)


def test_default_dir_follows_xdg(monkeypatch, tmp_path):
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert default_dir() == tmp_path / "texgen"
    monkeypatch.delenv("XDG_CACHE_HOME")
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert default_dir() == tmp_path / "home" / ".cache" / "texgen"


def test_cold_then_warm_recomputes_nothing(tmp_path, model, spy):
    cache = ResultCache(tmp_path)
    cold = entry_payload(model, cache=cache)
    assert cold["cached"] is False
    assert spy == ["schwarzschild"]
    warm = entry_payload(model, cache=cache)
    assert warm["cached"] is True
    assert spy == ["schwarzschild"]  # no new Curvature on the warm hit
    assert warm["results"] == cold["results"]
    assert warm["context"] == cold["context"]
    assert cache.info().entries == 1


@pytest.mark.parametrize("fmt", ["tex", "md", "json"])
def test_cached_payload_renders_the_same_report_as_a_direct_build(tmp_path, model, fmt):
    cache = ResultCache(tmp_path)
    entry_payload(model, cache=cache)
    warm = entry_payload(model, cache=cache)
    assert warm["cached"] is True
    assert render_payload(warm, fmt) == api.report_text(model, api.derive(model), fmt)


@pytest.mark.parametrize("damage", [
    lambda b: b[: len(b) // 2],                                   # truncated
    lambda b: b.replace(b'"ricci_scalar":"0"', b'"ricci_scalar":"1"'),  # edited: checksum no longer fits
    lambda b: b"\xff\xfe not json",                                # garbage
    lambda b: json.dumps({"format": 1, "key": {}, "payload": {}, "checksum": "x"}).encode(),  # foreign
])
def test_corrupt_entry_is_recomputed_and_logged(tmp_path, model, spy, caplog, damage):
    cache = ResultCache(tmp_path)
    entry_payload(model, cache=cache)
    [path] = list(tmp_path.glob("??/*.json"))
    raw = path.read_bytes()
    damaged = damage(raw)
    assert damaged != raw
    path.write_bytes(damaged)
    with caplog.at_level(logging.DEBUG, logger="texgen.library.cache"):
        again = entry_payload(model, cache=cache)
    assert again["cached"] is False
    assert spy == ["schwarzschild", "schwarzschild"]
    assert any(str(path) in rec.getMessage() for rec in caplog.records)
    assert again["results"]["ricci_scalar"] == "0"
    assert entry_payload(model, cache=cache)["cached"] is True  # rewritten whole


def test_key_ignores_comments_but_not_prose_or_options(tmp_path, model):
    text = SCHW.read_text(encoding="utf-8")
    commented = api.load_spacetime_text("# a comment\n" + text, str(SCHW))
    retitled = api.load_spacetime_text(text.replace("title: ", "title: New ", 1), str(SCHW))
    assert entry_key(commented) == entry_key(model)
    assert entry_key(retitled)["physics"] == entry_key(model)["physics"]
    assert entry_key(retitled) != entry_key(model)
    assert entry_key(model, {"section_level": 2}) != entry_key(model, {"section_level": 1})


def test_comment_change_hits_and_refreshes_the_file_hash(tmp_path, model, spy):
    cache = ResultCache(tmp_path)
    entry_payload(model, cache=cache)
    text = SCHW.read_text(encoding="utf-8")
    commented = api.load_spacetime_text("# a comment\n" + text, str(SCHW))
    warm = entry_payload(commented, cache=cache)
    assert warm["cached"] is True
    assert len(spy) == 1
    assert warm["context"]["sha256"] == commented.sha256 != model.sha256
    assert warm["results"]["spacetime"]["sha256"] == commented.sha256


def test_entries_are_json_with_a_checksum(tmp_path, model):
    cache = ResultCache(tmp_path)
    entry_payload(model, cache=cache)
    [path] = list(tmp_path.glob("??/*.json"))
    data = json.loads(path.read_text(encoding="utf-8"))
    assert sorted(data) == ["checksum", "format", "key", "payload"]
    assert sorted(data["payload"]) == ["context", "results"]
    assert len(data["checksum"]) == 64


def test_info_and_clear(tmp_path, model):
    cache = ResultCache(tmp_path / "c")
    assert cache.info().entries == 0
    entry_payload(model, cache=cache)
    entry_payload(model, cache=cache, options=api.BuildOptions(section_level=2))
    info = cache.info()
    assert (info.path, info.entries) == (str(tmp_path / "c"), 2)
    assert info.bytes > 1000
    (tmp_path / "c" / "keep.txt").write_text("not ours", encoding="utf-8")
    assert cache.clear() == 2
    assert cache.info().entries == 0
    assert (tmp_path / "c" / "keep.txt").is_file()


def test_figure_files_are_kept_by_content(tmp_path, caplog):
    import hashlib

    cache = ResultCache(tmp_path)
    data = b"\x89PNG\r\n\x1a\n not really a picture"
    sha = cache.put_figure(data, "png")
    assert sha == hashlib.sha256(data).hexdigest()
    assert (tmp_path / "figures" / f"{sha}.png").read_bytes() == data
    assert cache.put_figure(data, "png") == sha  # the same content is one file
    assert cache.get_figure(sha, "png") == data
    assert cache.get_figure(sha, "pdf") is None
    (tmp_path / "figures" / f"{sha}.png").write_bytes(data + b"!")
    with caplog.at_level(logging.DEBUG, logger="texgen.library.cache"):
        assert cache.get_figure(sha, "png") is None
    assert any("failed its integrity check" in rec.getMessage() for rec in caplog.records)
    assert cache.get_figure("../../etc/passwd", "png") is None  # names are checked, never followed


def test_info_and_clear_count_figure_files(tmp_path, model, capsys):
    from texgen import cli

    cache = ResultCache(tmp_path / "c")
    entry_payload(model, cache=cache)
    cache.put_figure(b"one", "png")
    cache.put_figure(b"two", "pdf")
    info = cache.info()
    assert (info.entries, info.figures) == (1, 2)
    assert cli.main(["cache", "info", "--cache-dir", str(tmp_path / "c")]) == 0
    assert capsys.readouterr().out.startswith(f"{tmp_path / 'c'}: 1 entries, 2 figure files, ")
    assert cli.main(["cache", "clear", "--cache-dir", str(tmp_path / "c")]) == 0
    assert capsys.readouterr().out == f"removed 1 entries and 2 figure files from {tmp_path / 'c'}\n"
    assert cache.info() == type(info)(str(tmp_path / "c"), 0, 0, 0)
    assert not (tmp_path / "c" / "figures").exists()


def test_figures_have_their_own_entry(tmp_path, model):
    """A build with figures and one without (--no-figures) never take each other's entry."""
    from texgen.library.cache import options_key as _options_key

    assert entry_key(model, _options_key(None, figures=True)) != entry_key(model, _options_key(None))
    cache = ResultCache(tmp_path)
    entry_payload(model, cache=cache)
    drawn = entry_payload(model, cache=cache, figures_dir=tmp_path / "out")
    assert drawn["cached"] is False
    assert [f["file"] for f in drawn["figures"]] == [
        f"schwarzschild-{n}.{e}" for n in ("profiles", "invariants", "light_cones") for e in ("pdf", "png")]
    assert entry_payload(model, cache=cache)["cached"] is True
    assert "figures" not in entry_payload(model, cache=cache)
    assert entry_payload(model, cache=cache, figures_dir=tmp_path / "out")["cached"] is True
    assert cache.info().entries == 2
