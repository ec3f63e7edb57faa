"""Tests for texgen.cache and the cached build path of texgen.library."""
from __future__ import annotations

import json
import logging
from pathlib import Path

import pytest

import texgen.derive
from texgen import api
from texgen.cache import ResultCache, default_dir, entry_key
from texgen.library import entry_payload, render_payload

LIB = Path(__file__).resolve().parent.parent / "metrics_yaml"
SCHW = LIB / "schwarzschild" / "schwarzschild.yaml"


@pytest.fixture
def spy(monkeypatch):
    """Count Curvature objects made anywhere through texgen.derive.Curvature."""
    made = []

    class Spy(texgen.derive.Curvature):
        def __init__(self, *a, **k):
            made.append(a[0].id)
            super().__init__(*a, **k)

    monkeypatch.setattr(texgen.derive, "Curvature", Spy)
    return made


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
    with caplog.at_level(logging.DEBUG, logger="texgen.cache"):
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
