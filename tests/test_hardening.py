"""Hostile and broken input, faults and interruptions: texgen refuses cleanly and loses nothing.

The fuzz harness (tests/fuzz/mutate.py) is shared with bench/fuzz_long.py, which
runs the same target for many more inputs by hand.
"""
from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from texgen import api, cli, errors
from texgen.physics.analysis import analyse
from texgen.engine import Budget, Curvature
from texgen.errors import BudgetExceeded, ConfigError, ConfigErrors, TexgenError
from texgen.spec.loader import MAX_FILE_BYTES
from texgen.output.render import written_by_texgen

from fuzz.mutate import SEEDS, SPACETIME_KEYS, TOKENS, Hang, mutant, run_target

ROOT = Path(__file__).resolve().parent.parent
LIBRARY = ROOT / "metrics_yaml"
KERR = LIBRARY / "kerr" / "kerr.yaml"
KERR_NEWMAN = LIBRARY / "kerr" / "kerr_newman.yaml"
SCHWARZSCHILD = LIBRARY / "schwarzschild" / "schwarzschild.yaml"
SPHERE = LIBRARY / "lower_dimensions" / "two_sphere.yaml"

TEXGEN_ERRORS = {name for name, obj in vars(errors).items()
                 if isinstance(obj, type) and issubclass(obj, TexgenError)}
"""The documented error classes (texgen/errors.py): the only exceptions bad input may raise."""

HANG_SECONDS = 5.0
"""Hang guard per input (generous: library files load in well under a second); not a speed target."""

FUZZ = settings(max_examples=80, deadline=None, derandomize=True, database=None,
                suppress_health_check=[HealthCheck.too_slow])
"""Small, reproducible in-suite runs; bench/fuzz_long.py does the long ones."""

# Schwarzschild in Schwarzschild coordinates, MTW (1973), eq. (31.1); the static
# orthonormal frame e_(0) = f^(-1/2) d/dt, e_(1) = f^(1/2) d/dr, e_(2) = d/dtheta / r,
# e_(3) = d/dphi / (r sin theta) is common practice.
HEAD = """\
texgen: 1
id: case
coordinates: [t, {name: r, range: "r > 2*M"}, {name: theta, range: "0 < theta < pi"}, {name: phi, period: 2*pi}]
parameters: {M: positive}
metric:
  line_element: -(1 - 2*M/r) dt^2 + dr^2/(1 - 2*M/r) + r^2 (dtheta^2 + sin(theta)^2 dphi^2)
"""
ROWS = ["  - {t: 1/sqrt(1 - 2*M/r)}\n", "  - {r: sqrt(1 - 2*M/r)}\n", "  - {theta: 1/r}\n",
        "  - {phi: 1/(r*sin(theta))}\n"]


# -- catalogue additions reached only after validation ---------------------------

@pytest.mark.parametrize("rows, got", [(ROWS[:3], 3), (ROWS + ["  - {t: 1}\n"], 5), (ROWS[:1], 1)])
def test_tetrad_of_wrong_dimension_is_a_config_error(tmp_path, rows, got):
    """The validator only checks the tetrad's shape; the analysis refuses a wrong row count."""
    path = tmp_path / "tetrad.yaml"
    path.write_text(HEAD + "tetrad:\n" + "".join(rows), encoding="utf-8")
    model = api.load_spacetime(path)
    with pytest.raises(ConfigError) as info:
        analyse(model, api.derive(model))
    assert info.value.format_message() == f"{path}:8:3: tetrad: Expected a list of 4 rows e_(i)^a but received: {got}"


def test_correct_tetrad_is_accepted(tmp_path):
    """The same file with the four static-frame rows passes: the refusal above is about the count."""
    path = tmp_path / "tetrad.yaml"
    path.write_text(HEAD + "tetrad:\n" + "".join(ROWS), encoding="utf-8")
    model = api.load_spacetime(path)
    assert analyse(model, api.derive(model)).frame_kind == "tetrad"


@pytest.mark.parametrize("claim, where, message", [
    ("{quantity: christoffel, indices: [r, t, x], equals: 0}", "8:45: claims[0].indices[2]",
     "Expected a coordinate name or a number 0..3 but received: 'x' (allowed: t, r, theta, phi)"),
    ("{quantity: riemann, indices: [0, 1, 2, 4], equals: 0}", "8:44: claims[0].indices[3]",
     "Index 4 is out of range: the coordinates are numbered 0..3"),
    ("{quantity: ricci, indices: [t, t, r], equals: 0}", "8:32: claims[0].indices",
     "Expected 2 indices for ricci but received: 3"),
    ("{quantity: kretschmann, indices: [t], equals: 0}", "8:38: claims[0].indices",
     "kretschmann is a scalar and takes no indices"),
    ("{quantity: weyl, indices: [t, r], equals: 0}", "8:31: claims[0].indices",
     "Expected 4 indices for weyl but received: 2"),
    ("{quantity: pressure, indices: [t], equals: 0}", "8:36: claims[0].indices[0]",
     "A pressure is along a spatial frame direction, not along time"),
])
def test_claim_about_a_component_that_does_not_exist(tmp_path, capsys, claim, where, message):
    """``texgen check`` refuses claims on components the spacetime does not have (exit 2, no traceback)."""
    path = tmp_path / "claims.yaml"
    path.write_text(HEAD + "claims:\n  - " + claim + "\n", encoding="utf-8")
    assert cli.main(["check", str(path)]) == 2
    out, err = capsys.readouterr()
    assert out == ""
    assert err == f"error: {path}:{where}: {message}\n"


# -- LaTeX injection through references --------------------------------------

HOSTILE = r"\input{/etc/passwd} \write18{touch pwned} \immediate\write18{touch pwned2} \catcode`\@=11 \def\x{}"


def test_latex_in_references_is_printed_not_run(tmp_path):
    """Commands in references and DOIs reach the PDF as text, even with shell escape allowed."""
    exe = shutil.which("pdflatex")
    assert exe is not None, "pdflatex is required for this test (texlive-latex-recommended)"
    text = SPHERE.read_text(encoding="utf-8")
    refs = (f"references:\n  - text: '{HOSTILE}'\n    doi: '10.1/x\\input{{/etc/hostname}}'\n"
            f"  - '100% R&D $x$ #1 ^_~ {{}} \\end{{document}}'\n")
    text = text.replace("references:\n", refs, 1) if "references:\n" in text else text + refs
    model = api.load_spacetime_text(text, str(tmp_path / "hostile.yaml"))
    assert model.references[0].startswith(HOSTILE)
    tex = api.build_report(model, tmp_path / "hostile.tex").read_text(encoding="utf-8")
    md = api.build_report(model, tmp_path / "hostile.md").read_text(encoding="utf-8")
    for raw in (r"\input{", r"\write18{", r"\catcode`", r"\immediate", r"\end{document} "):
        assert raw not in tex
    assert tex.count(r"\end{document}") == 1
    assert r"\input{/etc/passwd}" not in md and r"\\input\{/etc/passwd\}" in md
    # -shell-escape on purpose: even if \write18 were allowed, nothing may run.
    proc = subprocess.run([exe, "-interaction=nonstopmode", "-halt-on-error", "-shell-escape", "-recorder",
                           "hostile.tex"], cwd=tmp_path, stdin=subprocess.DEVNULL, capture_output=True, text=True,
                          errors="replace", timeout=120)
    assert proc.returncode == 0, proc.stdout[-2000:]
    assert not (tmp_path / "pwned").exists() and not (tmp_path / "pwned2").exists()
    # -recorder lists every file pdflatex opened: /etc/passwd and /etc/hostname never were.
    opened = (tmp_path / "hostile.fls").read_text(encoding="utf-8", errors="replace")
    assert "INPUT ./hostile.tex" in opened or "INPUT hostile.tex" in opened
    assert "/etc/passwd" not in opened and "/etc/hostname" not in opened
    assert shutil.which("pdftotext") is not None, "pdftotext is required for this test (poppler-utils)"
    pdf = subprocess.run(["pdftotext", "hostile.pdf", "-"], cwd=tmp_path, capture_output=True, text=True,
                         check=True).stdout.replace("\n", " ")
    assert "\\input{/etc/passwd}" in pdf and "\\write18{touch pwned}" in pdf


# -- fuzzing -----------------------------------------------------------------

def _check(data: bytes) -> None:
    outcome = run_target(data, hang_seconds=HANG_SECONDS * 4)
    assert outcome.result == "accepted" or outcome.result in TEXGEN_ERRORS
    assert outcome.seconds < HANG_SECONDS


@FUZZ
@given(st.sampled_from(sorted(SEEDS)), st.integers(0, 2**32 - 1), st.integers(1, 8))
def test_mutated_library_files_fail_only_with_texgen_errors(name, seed, rounds):
    """Byte, line and key/value mutations of every library file: success or a texgen error, quickly."""
    _check(mutant(name, seed, rounds))


_scalars = st.one_of(st.sampled_from(TOKENS), st.sampled_from(SPACETIME_KEYS), st.integers(-10**25, 10**25),
                     st.floats(allow_nan=True), st.booleans(), st.none(), st.text(max_size=40))
_trees = st.recursive(_scalars, lambda kids: st.lists(kids, max_size=5)
                      | st.dictionaries(st.sampled_from(SPACETIME_KEYS) | st.text(max_size=8), kids, max_size=5),
                      max_leaves=40)


@FUZZ
@given(st.dictionaries(st.sampled_from(SPACETIME_KEYS), _trees, max_size=10))
def test_random_documents_fail_only_with_texgen_errors(doc):
    """Random YAML documents made of texgen's keys and hostile values."""
    _check(yaml.safe_dump(doc, allow_unicode=True).encode("utf-8"))


@FUZZ
@given(st.binary(max_size=2000))
def test_random_bytes_fail_only_with_texgen_errors(data):
    """Arbitrary bytes (bad UTF-8, NUL, control characters)."""
    _check(data)


def test_harness_replays_a_mutant_from_its_seed():
    """A failure found by bench/fuzz_long.py is reproduced from (file, seed, rounds) alone."""
    assert mutant("kerr/kerr.yaml", 12345, 5) == mutant("kerr/kerr.yaml", 12345, 5)
    assert mutant("kerr/kerr.yaml", 12345, 5) != SEEDS["kerr/kerr.yaml"]


def test_hang_guard_interrupts_a_hang(monkeypatch):
    """The guard itself works: a target that never returns is stopped with Hang."""
    import fuzz.mutate as harness

    def forever(doc):
        while True:
            time.sleep(0.01)

    monkeypatch.setattr(harness, "build_model", forever)
    with pytest.raises(Hang):
        run_target(SEEDS["kerr/kerr.yaml"], hang_seconds=0.2)


# -- resource limits ---------------------------------------------------------

SIZE_BOUND = 30.0
"""Hang guard for the inputs near the size limits: PyYAML alone takes about 2 s for 600 kB on an idle
core (measured), so 30 s leaves room for a shared, loaded machine; not a speed target."""

BASE = ("texgen: 1\nid: big\ncoordinates: [t, {name: r, range: 'r > 0'}]\nparameters: {M: positive, a: real}\n"
        "metric:\n  line_element: -dt^2 + dr^2\n")


def _expression(length: int, term: str) -> str:
    body = "-dt^2 + (1"
    while len(body) + len(term) + len(") dr^2") <= length:
        body += term
    return body + " " * (length - len(body) - len(") dr^2")) + ") dr^2"


def _timed_load(path: Path):
    """Load through the CLI's entry point with the hang guard; return (model or error, seconds)."""
    def ring(signum, frame):
        raise Hang(f"{path.name}: no result after {SIZE_BOUND * 2} s")

    old = signal.signal(signal.SIGALRM, ring)
    signal.setitimer(signal.ITIMER_REAL, SIZE_BOUND * 2)
    start = time.perf_counter()
    try:
        try:
            result = api.load_spacetime(path)
        except TexgenError as exc:
            result = exc
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)
    return result, time.perf_counter() - start


def test_long_flat_list_just_under_the_size_limit(tmp_path):
    """45 000 references (about 620 kB): accepted, every one kept."""
    path = tmp_path / "flat.yaml"
    path.write_text(BASE + "references:\n" + "".join(f"  - ref {i}\n" for i in range(45_000)), encoding="utf-8")
    assert path.stat().st_size < MAX_FILE_BYTES
    model, seconds = _timed_load(path)
    assert len(model.references) == 45_000
    assert seconds < SIZE_BOUND


def test_file_over_the_size_limit_is_refused_unread(tmp_path):
    path = tmp_path / "huge.yaml"
    path.write_text(BASE + "#" + "x" * MAX_FILE_BYTES + "\n", encoding="utf-8")
    err, _ = _timed_load(path)
    size = path.stat().st_size
    assert err.format_message() == f"{path}: File is too large ({size} bytes; at most {MAX_FILE_BYTES})"


def test_too_many_values_are_refused(tmp_path):
    """The node limit (50 000 values) stops a flat list before the byte limit does."""
    path = tmp_path / "many.yaml"
    path.write_text(BASE + "references:\n" + "".join(f"  - {i}\n" for i in range(60_000)), encoding="utf-8")
    err, seconds = _timed_load(path)
    assert isinstance(err, ConfigError) and "more than 50000 values" in err.format_message()
    assert seconds < SIZE_BOUND


def test_expression_of_20000_characters_with_names(tmp_path):
    """An expression at the length limit made of names only is read in bounded time, exactly."""
    path = tmp_path / "long.yaml"
    expr = _expression(20_000, " + M*a/(r*t)")
    assert len(expr) == 20_000
    path.write_text(BASE.replace("-dt^2 + dr^2", expr), encoding="utf-8")
    model, seconds = _timed_load(path)
    assert str(model.metric[1, 1]) == "1665*M*a/(r*t) + 1"
    assert seconds < SIZE_BOUND


def test_expression_over_the_length_limit(tmp_path):
    path = tmp_path / "over.yaml"
    path.write_text(BASE.replace("-dt^2 + dr^2", _expression(20_001, " + M*a/(r*t)")), encoding="utf-8")
    err, seconds = _timed_load(path)
    assert err.format_message() == (f"{path}:6:17: metric.line_element: "
                                    "Expression is too long (20001 characters; at most 20000)")
    assert seconds < SIZE_BOUND


@pytest.mark.parametrize("family, message", [
    ("[" * 100_000 + "]" * 100_000, "YAML is nested too deeply"),
    ("{a: " * 20_000 + "1" + "}" * 20_000, "YAML is nested too deeply"),
], ids=["lists", "mappings"])
def test_deep_yaml_nesting(tmp_path, family, message):
    path = tmp_path / "deep.yaml"
    path.write_text(BASE + f"family: {family}\n", encoding="utf-8")
    err, seconds = _timed_load(path)
    assert err.format_message() == f"{path}: {message}"
    assert seconds < SIZE_BOUND


def test_deep_expression_nesting(tmp_path):
    path = tmp_path / "deep.yaml"
    path.write_text(BASE.replace("-dt^2 + dr^2", "-dt^2 + " + "(" * 5000 + "r" + ")" * 5000 + " dr^2"),
                    encoding="utf-8")
    err, seconds = _timed_load(path)
    assert isinstance(err, ConfigErrors)
    assert err.format_message().startswith(f"{path}:6:225: metric.line_element: Expression is not well formed "
                                           "(too many nested parentheses)")
    assert seconds < SIZE_BOUND


# -- time budgets ---------------------------------------------------------------

def test_tiny_time_budget_on_a_heavy_metric():
    """Kerr-Newman with a 1 microsecond budget per stage: stopped at the first component of a stage."""
    cv = Curvature(api.load_spacetime(KERR_NEWMAN), budget=1e-6)
    start = time.perf_counter()
    with pytest.raises(BudgetExceeded) as info:
        cv.kretschmann
    assert info.value.stage in ("inverse", "christoffel", "christoffel_first", "riemann_down", "riemann")
    assert info.value.message.startswith(f"stage '{info.value.stage}' went over its budget of 1e-06 s at component ")
    assert time.perf_counter() - start < 60  # hang guard only


def test_term_budget_names_stage_and_component():
    """A size budget is deterministic: Kerr's first Christoffel symbol already has more than one term."""
    cv = Curvature(api.load_spacetime(KERR), budget=Budget(max_terms=1))
    with pytest.raises(BudgetExceeded) as info:
        cv.riemann
    exc = info.value
    assert exc.message == f"stage '{exc.stage}': component {exc.component} has more than 1 terms"
    assert isinstance(exc, errors.DerivationError)


def test_budget_exceeded_in_build_is_a_warning_not_a_traceback(tmp_path, capsys):
    """``build --max-terms 1``: the stages over budget are named on stderr, the report is still written."""
    target = tmp_path / "k.tex"
    assert cli.main(["build", str(KERR), "-o", str(target), "--max-terms", "1", "-q"]) == 0
    out, err = capsys.readouterr()
    stop = "stage 'christoffel_first': component Gamma_001 has more than 1 terms"
    assert out == ""
    assert err == f"warning: {KERR}: claims not decided: {stop}\nwarning: {KERR}: not computed: {stop}\n"
    assert written_by_texgen(target)


# -- nothing lost ------------------------------------------------------------

OLD_REPORT = "% generated by texgen\n% the previous report, which an interrupted build must keep\n"


def _temporaries(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if p.name.endswith(".tmp"))


def _default_sigint() -> None:
    # A child of a background job starts with SIGINT ignored; Python then never raises KeyboardInterrupt.
    signal.signal(signal.SIGINT, signal.SIG_DFL)


READY_THEN_MAIN = """\
import sys
from texgen import cli
print("ready", flush=True)
sys.exit(cli.main(sys.argv[1:]))
"""
"""What ``python -m texgen.cli`` does, after saying when the imports are done (a signal during the
imports would hit Python's start-up, not texgen)."""


def test_interrupted_builds_keep_the_previous_report(tmp_path):
    """A real build of Kerr-Newman (about 3 minutes, mostly claims and printing) stopped by SIGINT, SIGTERM
    and SIGKILL. The write window itself is covered by the two tests below."""
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    runs = {}
    for sig in (signal.SIGINT, signal.SIGTERM, signal.SIGKILL):
        folder = tmp_path / sig.name
        folder.mkdir()
        (folder / "kn.tex").write_text(OLD_REPORT, encoding="utf-8")
        proc = subprocess.Popen([sys.executable, "-c", READY_THEN_MAIN, "build", str(KERR_NEWMAN), "-o",
                                 str(folder / "kn.tex")], env=env, cwd=folder, stdin=subprocess.DEVNULL,
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                                preexec_fn=_default_sigint)
        runs[sig] = (folder, proc)
    for _, proc in runs.values():  # imports done (slow on a loaded machine), then into the build
        assert proc.stdout.readline() == "ready\n"
    time.sleep(2)
    for sig, (_, proc) in runs.items():
        assert proc.poll() is None, "the build finished before it could be interrupted"
        proc.send_signal(sig)
    results = {sig: (folder, proc.wait(timeout=60), proc.communicate()) for sig, (folder, proc) in runs.items()}
    expected = {signal.SIGINT: (130, "error: interrupted; outputs already written are intact\n"),
                signal.SIGTERM: (143, "error: terminated; outputs already written are intact\n"),
                signal.SIGKILL: (-signal.SIGKILL, "")}
    for sig, (folder, code, (out, err)) in results.items():
        assert (code, err) == expected[sig], sig.name
        assert out == ""  # the report line is printed only after a write
        assert (folder / "kn.tex").read_text(encoding="utf-8") == OLD_REPORT
        assert sorted(p.name for p in folder.iterdir()) == ["kn.tex"]


@pytest.mark.parametrize("stop, code", [(KeyboardInterrupt, 130), (cli._Terminated, 143)])
def test_interrupt_while_writing_removes_the_temporary(monkeypatch, tmp_path, capsys, stop, code):
    """The signal landing inside the atomic write itself: old report kept, temporary removed."""
    target = tmp_path / "s.tex"
    target.write_text(OLD_REPORT, encoding="utf-8")

    def interrupted_fsync(fd):
        raise stop()

    monkeypatch.setattr(os, "fsync", interrupted_fsync)
    assert cli.main(["build", str(SPHERE), "-o", str(target)]) == code
    assert target.read_text(encoding="utf-8") == OLD_REPORT
    assert _temporaries(tmp_path) == []


def test_sigterm_handler_is_restored_after_main(tmp_path):
    before = signal.getsignal(signal.SIGTERM)
    assert cli.main(["validate", "-q", str(SPHERE)]) == 0
    assert signal.getsignal(signal.SIGTERM) is before


SLOW_WEYL_WORKER_THEN_MAIN = """\
import os, sys, time
from texgen import cli
from texgen.engine import parallel as _parallel
work = _parallel._work
def slow(names, arg):  # the Weyl worker says who it is, then dawdles long enough to be stopped
    if names[0] == "weyl":
        with open("worker.pid.tmp", "w") as f:
            f.write(str(os.getpid()))
        os.replace("worker.pid.tmp", "worker.pid")
        time.sleep(120)
    return work(names, arg)
_parallel._work = slow  # forked workers inherit it
sys.exit(cli.main(sys.argv[1:]))
"""


def _build_with_a_stopped_worker(folder: Path, stop) -> tuple[int, str, str, int]:
    """``texgen build --jobs 2`` of Schwarzschild in its own process group; ``stop(build, worker_pid)``
    while the Weyl worker runs; returns (exit code, stdout, stderr, worker pid)."""
    proc = subprocess.Popen([sys.executable, "-c", SLOW_WEYL_WORKER_THEN_MAIN, "build", str(SCHWARZSCHILD),
                             "-o", "s.md", "--jobs", "2", "--no-figures"], cwd=folder, text=True,
                            env=dict(os.environ, PYTHONPATH=str(ROOT)), stdin=subprocess.DEVNULL,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, start_new_session=True)
    try:
        deadline = time.monotonic() + 120
        while not (folder / "worker.pid").exists():
            assert proc.poll() is None and time.monotonic() < deadline, "the Weyl worker never started"
            time.sleep(0.05)
        worker = int((folder / "worker.pid").read_text())
        stop(proc, worker)
        out, err = proc.communicate(timeout=60)  # not the worker's 120 s nap: nobody waits for it
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    return proc.returncode, out, err, worker


def _gone(pid: int) -> bool:
    """The process ``pid`` has exited (a zombie counts: it runs nothing and is reaped by init)."""
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:
        try:
            if Path(f"/proc/{pid}/stat").read_text().split(") ")[-1].split()[0] in "ZX":
                return True
        except FileNotFoundError:
            return True
        time.sleep(0.05)
    return False


def test_killed_worker_leaves_its_stages_to_the_build_which_writes_the_serial_report(tmp_path):
    """SIGKILL of a worker process (what the kernel's out-of-memory killer does): the build notices,
    computes that worker's stages itself, says so, and writes the report a serial build writes."""
    serial = tmp_path / "serial.md"
    assert cli.main(["build", str(SCHWARZSCHILD), "-o", str(serial), "--no-figures", "-q"]) == 0
    code, out, err, worker = _build_with_a_stopped_worker(
        tmp_path, lambda build, pid: os.kill(pid, signal.SIGKILL))
    assert (code, out) == (0, f"{SCHWARZSCHILD}: wrote s.md\n"), err
    assert err == f"warning: {SCHWARZSCHILD}: a worker process died; computed here instead: weyl, weyl_squared\n"
    assert (tmp_path / "s.md").read_bytes() == serial.read_bytes()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.md", "serial.md", "worker.pid"]


@pytest.mark.parametrize("sig, code, message", [
    (signal.SIGINT, 130, "error: interrupted; outputs already written are intact\n"),
    (signal.SIGTERM, 143, "error: terminated; outputs already written are intact\n"),
])
def test_build_stopped_while_workers_run_stops_them_and_keeps_the_previous_report(tmp_path, sig, code, message):
    """Ctrl-C reaches the whole process group (the build and its workers), SIGTERM only the build: either
    way the build stops at once with its exit code and one line (no worker traceback), its workers are
    gone, and the previous report is untouched with no temporary left."""
    previous = "<!-- generated by texgen -->\nthe previous report\n"
    (tmp_path / "s.md").write_text(previous, encoding="utf-8")

    def stop(build, worker):
        if sig == signal.SIGINT:
            os.killpg(build.pid, signal.SIGINT)
        else:
            build.send_signal(signal.SIGTERM)

    got = _build_with_a_stopped_worker(tmp_path, stop)
    assert got[:3] == (code, "", message)
    assert _gone(got[3]), "a worker outlived the build"
    assert (tmp_path / "s.md").read_text(encoding="utf-8") == previous
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.md", "worker.pid"]


SLOW_SCHWARZSCHILD_ENTRY_THEN_MAIN = """\
import os, sys, time
from pathlib import Path
from texgen import cli
from texgen.library import build as library
build_entry = library.build_entry
def slow(path, *args, **kw):  # the first worker to build Schwarzschild says who it is, then dawdles
    if Path(path).stem == "schwarzschild" and not os.path.exists("worker.pid"):
        with open("worker.pid.tmp", "w") as f:
            f.write(str(os.getpid()))
        os.replace("worker.pid.tmp", "worker.pid")
        time.sleep(120)
    return build_entry(path, *args, **kw)
library.build_entry = slow  # forked workers inherit it
sys.exit(cli.main(sys.argv[1:]))
"""


def test_folder_build_with_a_killed_worker_builds_every_entry(tmp_path):
    """A worker of ``build FOLDER --jobs 2`` killed by SIGKILL mid-entry takes down the pool and every
    unfinished entry with it: the build runs them again in fresh workers, says so, and finishes
    with all reports and index pages, nothing partial."""
    src = tmp_path / "src"
    src.mkdir()
    for f in (SCHWARZSCHILD, SPHERE, LIBRARY / "lower_dimensions" / "btz.yaml"):
        shutil.copy(f, src / f.name)
    out = tmp_path / "out"
    proc = subprocess.Popen([sys.executable, "-c", SLOW_SCHWARZSCHILD_ENTRY_THEN_MAIN, "build", str(src),
                             "-o", str(out), "-f", "md", "--jobs", "2", "--no-cache", "--no-figures", "-q"],
                            cwd=tmp_path, text=True, env=dict(os.environ, PYTHONPATH=str(ROOT)),
                            stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            start_new_session=True)
    try:
        deadline = time.monotonic() + 120
        while not (tmp_path / "worker.pid").exists():
            assert proc.poll() is None and time.monotonic() < deadline, "the worker never started"
            time.sleep(0.05)
        os.kill(int((tmp_path / "worker.pid").read_text()), signal.SIGKILL)
        out_text, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
    assert (proc.returncode, out_text) == (0, ""), err
    reruns = err.splitlines()
    assert len(reruns) == 1 and reruns[0].startswith("warning: a worker process died; "), err
    assert reruns[0].endswith(" unfinished entries built again")
    assert sorted(p.name for p in out.iterdir()) == ["btz.md", "index.md", "index.tex", "schwarzschild.md",
                                                     "two-sphere.md"]
    assert written_by_texgen(out / "schwarzschild.md")


def test_internal_error_deep_in_build_goes_to_the_log(monkeypatch, tmp_path, capsys):
    """A bug deep in report building: exit 3, a short message with the log's path, the traceback in the log."""
    import texgen.output.document

    def broken(*args, **kwargs):
        raise RuntimeError("simulated bug in build_context")

    monkeypatch.setattr(texgen.output.document, "build_context", broken)
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))
    target = tmp_path / "out" / "s.tex"
    assert cli.main(["build", str(SPHERE), "-o", str(target)]) == 3
    out, err = capsys.readouterr()
    log = tmp_path / "texgen-error.log"
    assert err == f"error: internal error (RuntimeError: simulated bug in build_context); details in {log}\n"
    assert "Traceback" not in out + err
    text = log.read_text(encoding="utf-8")
    assert text.startswith("Traceback (most recent call last):")
    assert "in broken" in text and "RuntimeError: simulated bug in build_context" in text
    assert not target.exists()


def test_demo_refuses_to_overwrite_a_foreign_file(tmp_path, capsys):
    """``texgen demo`` into a folder holding someone's file: refused (exit 2), the file untouched."""
    model = api.load_spacetime(api.library_dir() / api.DEMO_FILE)
    mine = tmp_path / f"{model.id}.tex"
    mine.write_text("\\documentclass{article} my own paper\n", encoding="utf-8")
    assert cli.main(["demo", "-o", str(tmp_path), "--no-pdf"]) == 2
    _, err = capsys.readouterr()
    assert err == f"error: Refusing to overwrite {mine}: texgen did not write it (use --force to overwrite)\n"
    assert mine.read_text(encoding="utf-8") == "\\documentclass{article} my own paper\n"
    assert _temporaries(tmp_path) == []


def test_demo_force_reaches_the_writer(monkeypatch, tmp_path, capsys):
    """``--force`` is passed on to every report the demo writes (the writer's own test is in test_render)."""
    calls = []

    class Writer:
        def __init__(self, model, curvature):
            pass

        def write(self, target, opts):
            calls.append((Path(target).name, opts.fmt, opts.force))
            return Path(target)

    monkeypatch.setattr(api, "derive", lambda model, **kw: None)
    monkeypatch.setattr(api, "ReportWriter", Writer)
    assert cli.main(["demo", "-o", str(tmp_path), "--no-pdf", "--force"]) == 0
    assert calls == [("demo-veiled-black-hole.tex", "tex", True), ("demo-veiled-black-hole.md", "md", True),
                     ("demo-veiled-black-hole.json", "json", True)]


# -- determinism ---------------------------------------------------------------

def test_kerr_report_is_byte_identical_across_hash_seeds(tmp_path):
    """The Kerr report (LaTeX and JSON, and its figures) from two processes with different PYTHONHASHSEED."""
    procs = []
    for seed in ("0", "4242"):
        out = tmp_path / seed
        env = dict(os.environ, PYTHONHASHSEED=seed, PYTHONPATH=str(ROOT))
        procs.append((out, subprocess.Popen(
            [sys.executable, "-m", "texgen.cli", "build", str(KERR), "-o", str(out / "kerr.tex"),
             "-f", "tex", "-f", "json", "-q"], env=env, cwd=tmp_path, stdin=subprocess.DEVNULL)))
    outputs = []
    for out, proc in procs:
        assert proc.wait(timeout=600) == 0
        outputs.append({p.name: p.read_bytes() for p in sorted(out.iterdir())})
    assert {"kerr.tex", "kerr.json"} <= outputs[0].keys()
    assert outputs[0].keys() == outputs[1].keys()
    for name in sorted(outputs[0]):  # the report, and whatever figures the build draws with it
        assert outputs[0][name] == outputs[1][name], name


KILLED_MID_WRITE = """\
import os, signal, sys
from texgen.output import render
render.os.replace = lambda src, dst: os.kill(os.getpid(), signal.SIGKILL)  # die between write and rename
render.write_atomic(sys.argv[1], "% generated by texgen\\nnew\\n")
"""


def test_writer_killed_mid_write_leaves_old_report_and_next_write_cleans_up(tmp_path):
    """SIGKILL between writing the temporary and the rename: the old report stays; the next write of the
    same report removes the dead writer's temporary."""
    target = tmp_path / "kn.tex"
    target.write_text(OLD_REPORT, encoding="utf-8")
    proc = subprocess.run([sys.executable, "-c", KILLED_MID_WRITE, str(target)], cwd=tmp_path,
                          env=dict(os.environ, PYTHONPATH=str(ROOT)), capture_output=True, text=True)
    assert proc.returncode == -signal.SIGKILL
    assert target.read_text(encoding="utf-8") == OLD_REPORT
    left = _temporaries(tmp_path)
    assert len(left) == 1 and left[0].startswith(".kn.tex.") and _pid_field(left[0]).isdigit()
    assert cli.main(["build", str(SPHERE), "-o", str(target), "-q"]) == 0
    assert _temporaries(tmp_path) == []
    assert written_by_texgen(target) and target.read_text(encoding="utf-8") != OLD_REPORT


def _pid_field(name: str) -> str:
    """The pid field of a temporary's name ``.<report>.<pid>.<random>.tmp``."""
    return name.split(".")[-3]


def test_live_writers_and_other_reports_temporaries_are_kept(tmp_path):
    """Only a dead writer's temporary of the same report is removed."""
    sleeper = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(60)"])
    try:
        dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                              text=True, check=True).stdout.strip()
        names = [f".s.tex.{sleeper.pid}.abc123.tmp",  # a live writer
                 f".s.tex.5.{dead}.abc123.tmp",  # a temporary of report 's.tex.5'
                 f".s.tex.{dead}.abc123.tmp"]  # a dead writer of this report
        for name in names:
            (tmp_path / name).write_text("partial", encoding="utf-8")
        from texgen.output.render import write_atomic

        write_atomic(tmp_path / "s.tex", "% generated by texgen\n")
        assert _temporaries(tmp_path) == sorted(names[:2])
    finally:
        sleeper.kill()
        sleeper.wait()


@pytest.mark.parametrize("line_element", ["0", "-0.0", "0*dt^2", "dt^2 - dt^2"])
def test_zero_line_element_is_a_config_error(tmp_path, line_element):
    """Regression, found by bench/fuzz_long.py (mutant('wormholes/ellis.yaml', 15250, 4)): a line element
    that is identically zero crashed the validator; it is refused as bad input."""
    path = tmp_path / "zero.yaml"
    path.write_text(f"texgen: 1\nid: x\ncoordinates: [t, r]\nmetric:\n  line_element: {line_element}\n",
                    encoding="utf-8")
    with pytest.raises(ConfigError) as info:
        api.load_spacetime(path)
    assert info.value.format_message() == f"{path}:5:3: metric: The metric is zero"


def test_definition_after_one_depending_on_a_broken_definition(tmp_path):
    """A depends on the broken B, C on A: the unknown name must be reported, not crash the cycle check."""
    path = tmp_path / "defs.yaml"
    path.write_text("texgen: 1\nid: x\ncoordinates: [t, r]\ndefinitions:\n  A: B + 1\n  B: nothing_declared\n"
                    "  C: A + 1\nmetric:\n  line_element: -dt^2 + dr^2\n", encoding="utf-8")
    with pytest.raises(ConfigError, match="Unknown name 'nothing_declared'"):
        api.load_spacetime(path)


def test_tagged_mapping_key_is_a_config_error(tmp_path):
    path = tmp_path / "tag.yaml"
    path.write_text("texgen: 1\n!x id: x\ncoordinates: [t, r]\nmetric:\n  line_element: -dt^2 + dr^2\n",
                    encoding="utf-8")
    with pytest.raises(ConfigError, match="Unsupported YAML tag '!x'"):
        api.load_spacetime(path)
