"""Tests for texgen.versioning: the physics hash, version checks and diffs between versions."""
from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest
import sympy as sp

from texgen.api import load_spacetime, load_spacetime_text
from texgen.errors import ConfigError
from texgen.library.diff import diff_models
from texgen.library.versions import check_versions, load_record, parse_version, physics_hash, record

LIB = Path(__file__).resolve().parents[2] / "metrics_yaml"

# An invented spherically symmetric test entry (demo data, not a published metric).
BASE = """\
texgen: 1
id: ball
title: A test ball
version: 1.0.0
changelog:
  1.0.0: First entry.
coordinates:
  - t
  - {name: r, range: "r > 0"}
  - {name: theta, range: "0 < theta < pi"}
  - {name: phi, period: 2*pi}
parameters:
  M: positive
definitions:
  f: 1 - 2*M/r
metric:
  line_element: -f dt^2 + dr^2/f + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
"""


def _model(text: str = BASE):
    return load_spacetime_text(text, "ball.yaml")


@pytest.mark.parametrize("edit", [
    lambda s: s.replace("title: A test ball", "title: Another title"),
    lambda s: s.replace("version: 1.0.0", "version: 1.0.1").replace("1.0.0: First", "1.0.1: x\n  1.0.0: First"),
    lambda s: "# a comment\n" + s.replace("  M: positive", "  M: positive   # the mass"),
    lambda s: s.replace("1 - 2*M/r", "(r - 2*M)/r"),
    lambda s: s.replace("f: 1 - 2*M/r", "g: 1 - 2*M/r").replace("-f dt^2 + dr^2/f", "-g dt^2 + dr^2/g"),
    lambda s: s.replace("changelog:", "notes: A remark.\nchangelog:"),
])
def test_hash_ignores_prose_layout_and_equivalent_forms(edit):
    assert physics_hash(_model(edit(BASE))) == physics_hash(_model())


@pytest.mark.parametrize("edit", [
    lambda s: s.replace("1 - 2*M/r", "1 - 2*M/r + M^2/r^2"),
    lambda s: s.replace('"r > 0"', '"r > 2*M"'),
    lambda s: s.replace("period: 2*pi", "period: pi"),
    lambda s: s.replace("M: positive", "M: real"),
    lambda s: s + "cosmological_constant: 1\n",
    lambda s: s + "conventions: {riemann_sign: -1}\n",
])
def test_hash_changes_with_the_physics(edit):
    assert physics_hash(_model(edit(BASE))) != physics_hash(_model())


def test_hash_is_the_same_in_other_processes():
    """Stable across processes: no hash seeds, no memory addresses (PYTHONHASHSEED varied)."""
    path = LIB / "kerr" / "kerr_newman.yaml"
    code = f"from texgen.api import load_spacetime as l; from texgen.library.versions import physics_hash as h; " \
           f"print(h(l({str(path)!r})))"
    seen = set()
    for seed in ("0", "1", "4711"):
        env = dict(os.environ, PYTHONHASHSEED=seed)
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, check=True)
        seen.add(out.stdout.strip())
    assert seen == {physics_hash(load_spacetime(path))}


@pytest.mark.parametrize("text, parsed", [("1.2.3", (1, 2, 3, "")), ("0.10.0-rc1", (0, 10, 0, "rc1"))])
def test_parse_version(text, parsed):
    assert parse_version(text) == parsed


def test_parse_version_rejects_non_semver():
    with pytest.raises(ConfigError, match=r"^Expected a semantic version such as '1.0.0' but received: '1.2'$"):
        parse_version("1.2")


def test_library_matches_its_stored_record():
    """metrics_yaml/VERSIONS.json is current: every entry's version and physics hash are recorded."""
    from texgen.library.entries import load_entries

    entries, errors = load_entries([LIB])
    assert errors == []
    assert check_versions(entries.values(), load_record(LIB / "VERSIONS.json")) == []


def test_physics_change_without_version_bump_is_flagged(tmp_path):
    """A copy of the Kerr entry with a changed metric but the same version is reported."""
    src = (LIB / "kerr" / "kerr.yaml").read_text(encoding="utf-8")
    stored = record([load_spacetime(LIB / "kerr" / "kerr.yaml")])
    changed = tmp_path / "kerr.yaml"
    assert "Delta: r^2 - 2*M*r + a^2" in src
    changed.write_text(src.replace("Delta: r^2 - 2*M*r + a^2", "Delta: r^2 - 2*M*r + 2*a^2"), encoding="utf-8")
    issues = check_versions([load_spacetime(changed)], stored)
    assert len(issues) == 1
    assert issues[0].id == "kerr"
    assert issues[0].message.startswith("physics changed but version not bumped (still 1.0.0; hash ")


def test_version_bump_with_changelog_is_accepted(tmp_path):
    src = (LIB / "kerr" / "kerr.yaml").read_text(encoding="utf-8")
    stored = record([load_spacetime(LIB / "kerr" / "kerr.yaml")])
    text = src.replace("Delta: r^2 - 2*M*r + a^2", "Delta: r^2 - 2*M*r + 2*a^2")
    text = text.replace("version: 1.0.0", "version: 2.0.0").replace("changelog:\n", "changelog:\n  2.0.0: Changed.\n")
    (tmp_path / "kerr.yaml").write_text(text, encoding="utf-8")
    assert check_versions([load_spacetime(tmp_path / "kerr.yaml")], stored) == []


@pytest.mark.parametrize("edit, message", [
    (lambda s: s.replace("version: 1.0.0", "version: 1.1.0"), "version 1.1.0 has no changelog entry"),
])
def test_version_without_changelog_entry(edit, message):
    assert [i.message for i in check_versions([_model(edit(BASE))])] == [message]


def test_lower_version_than_recorded():
    stored = record([_model(BASE.replace("version: 1.0.0", "version: 1.2.0").replace("1.0.0: First", "1.2.0: x"))])
    assert [i.message for i in check_versions([_model()], stored)] == ["version 1.0.0 is lower than the recorded 1.2.0"]


def _same(text: str, expected: str) -> bool:
    """Engine output (trusted text) equals the expected expression; term order is the engine's."""
    names = {n: sp.Symbol(n) for n in ("M", "Q", "r")}
    return sp.cancel(sp.sympify(text, locals=names) - sp.sympify(expected, locals=names)) == 0


def test_diff_reports_changed_components():
    """Schwarzschild -> Reissner-Nordstrom form: f gains Q^2/r^2 (common practice: RN metric,
    Reissner 1916, Nordstrom 1918); g_tt changes by -Q^2/r^2 and g_rr accordingly."""
    old = _model()
    new = _model(BASE.replace("version: 1.0.0", "version: 1.1.0")
                 .replace("1.0.0: First", "1.1.0: Charge.\n  1.0.0: First")
                 .replace("M: positive", "M: positive\n  Q: real")
                 .replace("f: 1 - 2*M/r", "f: 1 - 2*M/r + Q^2/r^2"))
    d = diff_models(old, new)
    assert d.physics_changed
    assert d.comparable
    assert "parameters.Q.symbol" in d.definition
    assert "version" in d.definition
    assert "title" not in d.definition
    got = {(c.quantity, c.key): c.difference for c in d.components}
    assert _same(got[("metric", "t,t")], "-Q**2/r**2")
    # Ricci scalar of RN vanishes (traceless Maxwell stress), so it is unchanged.
    assert ("ricci_scalar", "") not in got
    # Kretschmann: 48M^2/r^6 -> (48M^2r^2 - 96MQ^2r + 56Q^4)/r^8 (Henry 2000, Q^4 and MQ^2 terms).
    assert _same(got[("invariants", "kretschmann")], "(-96*M*Q**2*r + 56*Q**4)/r**8")
    assert ("ricci", "t,t") in got and ("einstein", "t,t") in got
    assert ("christoffel", "r,t,t") in got


def test_diff_of_prose_only_changes_no_component():
    d = diff_models(_model(), _model(BASE.replace("title: A test ball", "title: New")))
    assert not d.physics_changed
    assert d.definition == ("title",)
    assert d.components == ()


def test_hash_ignores_the_keyword_order_of_cached_symbols():
    """sympy returns a cached Symbol made earlier with another keyword order; the hash must not see it."""
    import sympy as sp

    from texgen.library.versions import _srepr

    assert _srepr(sp.Symbol("Qv", positive=True, real=True)) == "Symbol('Qv', positive=True, real=True)"
    assert _srepr(sp.Symbol("Qw", real=True, positive=True)) == "Symbol('Qw', positive=True, real=True)"
