"""The command line (texgen/cli.py): exit codes, messages on stderr, calls into texgen.api."""
from __future__ import annotations

import re
import tempfile
from pathlib import Path

import pytest

from texgen import api, cli

from conftest import BAD_INPUTS, SPHERE


def test_validate_valid_file(write, capsys):
    path = write(SPHERE)
    assert cli.main(["validate", str(path)]) == 0
    out, err = capsys.readouterr()
    assert out == (f"{path}: valid: 'two-sphere' 0.0.0, 2 dimensions (theta, phi); parameters: R; "
                   "functions: none; signature ++\n")
    assert err == ""


def test_validate_quiet(write, capsys):
    assert cli.main(["validate", "-q", str(write(SPHERE))]) == 0
    assert capsys.readouterr() == ("", "")


def test_validate_invalid_file(capsys):
    path = BAD_INPUTS / "expr_unknown_name_did_you_mean.yaml"
    assert cli.main(["validate", str(path)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err == (f"error: {path}:15:22: metric.components[phi,phi]: Unknown name 'thet': 'thet' "
                   "(did you mean 'theta'?)\n")


def test_validate_reports_every_file(write, capsys):
    """Valid and invalid files together: each is reported, the exit code is 2."""
    good = write(SPHERE, "good.yaml")
    bad = BAD_INPUTS / "yaml_duplicate_top_key.yaml"
    assert cli.main(["validate", str(good), str(bad)]) == 2
    out, err = capsys.readouterr()
    assert out.startswith(f"{good}: valid: ")
    assert err == f"error: {bad}:5:1: id: Duplicate key 'id' (first given on line 2)\n"


def test_validate_all_bad_inputs(capsys):
    """Every catalogue file gives one 'error: file:line:col: ...' block and no traceback."""
    files = sorted(str(p) for p in BAD_INPUTS.glob("*.yaml") if p.name != "expected.yaml")
    assert cli.main(["validate", *files]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert "Traceback" not in err
    blocks = [line for line in err.splitlines() if line.startswith("error: ")]
    assert [b.split(":", 2)[1].strip() for b in blocks] == files
    assert all(re.match(r"error: .+\.yaml:\d+:\d+: ", b) for b in blocks)


def test_validate_missing_file(tmp_path, capsys):
    path = tmp_path / "nope.yaml"
    assert cli.main(["validate", str(path)]) == 2
    assert capsys.readouterr().err == f"error: {path}: No such file\n"


def test_validate_empty_folder(tmp_path, capsys):
    """Regression: a folder without spacetime files passed as valid."""
    assert cli.main(["validate", str(tmp_path)]) == 2
    assert capsys.readouterr().err == f"error: no spacetime files (.yaml, .yml) found in {tmp_path}\n"


@pytest.mark.parametrize("argv", [[], ["validate"], ["frobnicate"], ["validate", "--colour", "x.yaml"]])
def test_usage_errors_exit_2(argv, capsys):
    assert cli.main(argv) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err
    assert err.startswith("usage: texgen")
    if argv:
        assert err.splitlines()[-1].startswith("error: ")


@pytest.mark.parametrize("command", [[], ["validate"], ["build"], ["demo"], ["check"]])
def test_help_for_each_subcommand(command, capsys):
    assert cli.main(command + ["--help"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("usage: texgen" + (f" {command[0]}" if command else ""))


def test_version(capsys):
    from texgen import __version__

    assert cli.main(["--version"]) == 0
    assert capsys.readouterr().out == f"texgen {__version__}\n"


def test_validate_calls_the_api_with_each_file(monkeypatch, write, capsys):
    """The CLI is a thin layer: it expands folders with api.spacetime_files and loads each path."""
    real = api.load_spacetime_text(SPHERE, "sphere.yaml")
    calls = []

    def fake_load(path):
        calls.append(path)
        return real

    monkeypatch.setattr(api, "load_spacetime", fake_load)
    folder = write(SPHERE, "b.yaml").parent
    (folder / "a.yml").write_text(SPHERE, encoding="utf-8")
    (folder / "notes.txt").write_text("not a spacetime", encoding="utf-8")
    assert cli.main(["validate", "-q", str(folder), "extra.yaml"]) == 0
    assert calls == [folder / "a.yml", folder / "b.yaml", Path("extra.yaml")]


def test_internal_error_exit_3_with_log_and_no_traceback(monkeypatch, tmp_path, capsys):
    def broken(path):
        raise RuntimeError("simulated bug")

    monkeypatch.setattr(api, "load_spacetime", broken)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    assert cli.main(["validate", str(BAD_INPUTS / "missing_id.yaml")]) == 3
    out, err = capsys.readouterr()
    log = tmp_path / "texgen-error.log"
    assert err == f"error: internal error (RuntimeError: simulated bug); details in {log}\n"
    assert "Traceback" not in err
    text = log.read_text(encoding="utf-8")
    assert text.startswith("Traceback (most recent call last):")
    assert "RuntimeError: simulated bug" in text


def test_interrupt_exit_130(monkeypatch, capsys):
    def interrupted(path):
        raise KeyboardInterrupt

    monkeypatch.setattr(api, "load_spacetime", interrupted)
    assert cli.main(["validate", "x.yaml"]) == 130
    assert capsys.readouterr().err == "error: interrupted; outputs already written are intact\n"
