"""Heavy spacetimes: the bench cases' physics, worker processes, progress bar, budgets end to end.

Covers texgen/_parallel.py and texgen/_progress.py, and the --budget, --max-terms,
--jobs and --quiet options of ``texgen build`` (texgen/_commands.py).
"""
from __future__ import annotations

import io
import os
import pickle
import signal
import sys
from pathlib import Path

import pytest

from texgen import api, cli
from texgen.physics import claims
from texgen.engine.parallel import HeavyCurvature, map_in_workers
from texgen.cli.progress import ProgressBar
from texgen.engine import Budget, Curvature
from texgen.errors import BudgetExceeded, DerivationError

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "bench"))
import heavy_cases  # noqa: E402

PARALLEL = ("riemann", "weyl", "weyl_squared", "kretschmann", "ricci_squared", "invariant_identity")
EVERY = ("inverse", "christoffel", "riemann_down", "ricci", "ricci_scalar", "einstein") + PARALLEL


class FakeTerminal(io.StringIO):
    """A stream that says it is a terminal."""

    def isatty(self) -> bool:
        return True


# ---------------------------------------------------------------- the bench cases' physics
def test_kerr_newman_de_sitter_is_an_einstein_maxwell_solution_with_lambda():
    # Carter (1968), Commun. Math. Phys. 10, 280: G_ab + Lambda g_ab = 8 pi T_ab(Maxwell),
    # with R = 4 Lambda as the trace (traceless Maxwell tensor, common practice)
    m = heavy_cases.load("kerr_newman_de_sitter")
    cv = Curvature(m)
    src = claims.check_source(m, cv)
    assert (src.type, src.status) == ("electromagnetic", "proved")
    assert cv.ricci_scalar == 4 * m.parameter_symbols[3]


def test_myers_perry_5d_is_ricci_flat():
    # Myers & Perry (1986), Ann. Phys. 172, 304: a vacuum solution
    cv = Curvature(heavy_cases.load("myers_perry_5d"))
    assert all(cv.is_zero(x) for x in cv.ricci)


@pytest.mark.parametrize("n", [4, 6])
def test_tangherlini_kretschmann(n):
    # (n-1)(n-2)^2(n-3) mu^2 / r^(2(n-1)) (common practice, recalled; Tangherlini 1963):
    # 48 M^2/r^6 for n = 4 with mu = 2M (MTW 1973, ch. 31)
    m = heavy_cases.load(f"tangherlini_{n}d")
    cv = Curvature(m)
    (mu,), r = m.parameter_symbols, m.coordinate_symbols[1]
    assert cv.is_zero(cv.kretschmann - (n - 1) * (n - 2) ** 2 * (n - 3) * mu**2 / r ** (2 * (n - 1)))
    assert all(cv.is_zero(x) for x in cv.ricci)


def test_tangherlini_case_has_n_minus_two_angles():
    assert [c.name for c in heavy_cases.load("tangherlini_7d").coordinates] == \
        ["t", "r", "th1", "th2", "th3", "th4", "th5"]


# ---------------------------------------------------------------- worker processes
def test_model_pickles():
    m = heavy_cases.load("kerr_newman")
    assert pickle.loads(pickle.dumps(m)) == m


@pytest.mark.parametrize("case", ["kerr_newman", "myers_perry_5d"])
def test_parallel_components_equal_serial(case):
    m = heavy_cases.load(case)
    serial = Curvature(m)
    par = HeavyCurvature(m)
    assert par.compute_parallel(2) == []
    # the parallel stages came from the workers, not from the serial path afterwards
    assert set(PARALLEL) <= set(par._cache)
    assert par.worker_timings["riemann"] > 0
    assert "riemann" not in par.timings
    for name in EVERY:
        # Structurally identical: sympy's == compares the whole tree and every symbol with
        # its assumptions. (srepr is not compared: a symbol made as Symbol('M', positive=True)
        # in one process and as Symbol('M', positive=True, real=True) in another is the same
        # symbol, but srepr prints the keywords it was first made with.)
        assert getattr(par, name) == getattr(serial, name), name


def test_parallel_with_spawned_workers_equals_serial(monkeypatch):
    import texgen.engine.parallel as parallel

    monkeypatch.setattr(parallel.multiprocessing, "get_all_start_methods", lambda: ["spawn"])
    m = heavy_cases.load("schwarzschild")
    par = HeavyCurvature(m)
    assert par.compute_parallel(2) == []
    assert par.worker_timings["kretschmann"] > 0
    serial = Curvature(m)
    for name in PARALLEL:
        # Structurally identical: sympy's == compares the whole tree and every symbol with
        # its assumptions. (srepr is not compared: a symbol made as Symbol('M', positive=True)
        # in one process and as Symbol('M', positive=True, real=True) in another is the same
        # symbol, but srepr prints the keywords it was first made with.)
        assert getattr(par, name) == getattr(serial, name), name


def test_api_derive_with_jobs_fills_the_parallel_stages():
    cv = api.derive(heavy_cases.load("schwarzschild"), jobs=2)
    assert isinstance(cv, HeavyCurvature)
    assert set(PARALLEL) <= set(cv._cache)


def test_api_derive_without_new_options_is_the_plain_engine():
    assert type(api.derive(heavy_cases.load("schwarzschild"))) is Curvature


@pytest.mark.parametrize("jobs", [0, -1, 1.5, True])
def test_bad_jobs_is_a_derivation_error(jobs):
    with pytest.raises(DerivationError) as info:
        HeavyCurvature(heavy_cases.load("schwarzschild")).compute_parallel(jobs)
    assert info.value.message == f"Expected a positive number of jobs but received: {jobs!r}"


def test_parallel_budget_failure_is_kept():
    m = heavy_cases.load("kerr_newman")
    cv = HeavyCurvature(m, budget=Budget(max_terms=3))
    failures = cv.compute_parallel(2)
    assert len(failures) == 1
    with pytest.raises(BudgetExceeded) as info:
        cv.riemann
    assert info.value is failures[0]


# ---------------------------------------------------------------- progress bar
def test_progress_bar_silent_when_not_a_terminal():
    out = io.StringIO()
    bar = ProgressBar(out)
    bar("riemann_down", 3, 10)
    bar.close()
    assert (bar.active, out.getvalue()) == (False, "")


def test_progress_bar_silent_when_quiet():
    out = FakeTerminal()
    bar = ProgressBar(out, enabled=False)
    bar("riemann_down", 10, 10)
    assert out.getvalue() == ""


def test_progress_bar_drawn_on_a_terminal():
    out = FakeTerminal()
    bar = ProgressBar(out, width=10, label="kn.yaml")
    bar("riemann_down", 5, 10)
    assert out.getvalue() == "\r\x1b[2Kkn.yaml: riemann_down [#####.....] 5/10"
    bar.close()
    assert out.getvalue().endswith("5/10\r\x1b[2K")


def test_progress_bar_skips_redraws_within_the_interval_but_draws_the_last():
    out = FakeTerminal()
    bar = ProgressBar(out, width=4, interval=3600)
    bar("ricci", 1, 4)
    bar("ricci", 2, 4)
    bar("ricci", 4, 4)
    assert out.getvalue() == "\r\x1b[2Kricci [#...] 1/4\r\x1b[2Kricci [####] 4/4"


def test_progress_bar_fed_by_the_engine():
    out = FakeTerminal()
    cv = Curvature(heavy_cases.load("schwarzschild"), progress=ProgressBar(out, interval=0))
    cv.kretschmann
    text = out.getvalue()
    assert "riemann_down [" in text and "christoffel [" in text


def test_build_prints_no_bar_when_stderr_is_not_a_terminal(tmp_path, capsys):
    src = tmp_path / "s.yaml"
    src.write_text(heavy_cases.SCHWARZSCHILD)
    assert cli.main(["build", str(src), "-o", str(tmp_path / "s.md"), "--no-figures"]) == 0
    assert capsys.readouterr().err == ""


def test_build_draws_the_bar_on_a_terminal_and_not_with_quiet(tmp_path, monkeypatch):
    src = tmp_path / "s.yaml"
    src.write_text(heavy_cases.SCHWARZSCHILD)
    term = FakeTerminal()
    monkeypatch.setattr(sys, "stderr", term)
    assert cli.main(["build", str(src), "-o", str(tmp_path / "a.md"), "--no-figures"]) == 0
    assert "riemann_down [" in term.getvalue()
    quiet = FakeTerminal()
    monkeypatch.setattr(sys, "stderr", quiet)
    assert cli.main(["build", str(src), "-o", str(tmp_path / "b.md"), "--no-figures", "--quiet"]) == 0
    assert quiet.getvalue() == ""


# ---------------------------------------------------------------- budgets
def test_stage_over_budget_raises_the_same_error_again_at_once():
    cv = HeavyCurvature(heavy_cases.load("kerr_newman"), budget=Budget(max_terms=3))
    with pytest.raises(BudgetExceeded) as first:
        cv.kretschmann
    with pytest.raises(BudgetExceeded) as again:
        cv.kretschmann
    assert again.value is first.value
    assert cv.budget_failures == (first.value,)


def test_tiny_budget_on_a_heavy_case_still_writes_the_report(tmp_path, capsys):
    src = tmp_path / "kndS.yaml"
    src.write_text(heavy_cases.KERR_NEWMAN_DE_SITTER)
    out = tmp_path / "report" / "kndS.tex"
    assert cli.main(["build", str(src), "-o", str(out), "--budget", "1e-9", "--no-figures"]) == 0
    text = out.read_text()
    assert "Not computed" in text
    assert (r"\item inverse: stage 'inverse' went over its budget of 1e-09 s at component "
            r"g{\textasciicircum}[0, 3]") in text
    assert text.rstrip().endswith(r"\end{document}")
    assert sorted(p.name for p in out.parent.iterdir()) == ["kndS.tex"]  # no half-written leftovers
    err = capsys.readouterr().err
    assert f"warning: {src}: not computed: stage 'inverse' went over its budget of 1e-09 s at component g^[0, 3]" in err


def test_term_budget_names_stage_and_component_in_the_report(tmp_path):
    src = tmp_path / "kn.yaml"
    src.write_text(heavy_cases.KERR_NEWMAN)
    out = tmp_path / "kn.md"
    assert cli.main(["build", str(src), "-o", str(out), "--max-terms", "3", "--no-figures", "-q"]) == 0
    text = out.read_text()
    section = text[text.index("## Not computed"):]
    assert "- christoffel: stage 'christoffel\\_first': component Gamma\\_" in section
    assert "has more than 3 terms" in section


def test_budget_in_json_report_lists_missing(tmp_path):
    m = heavy_cases.load("kerr_newman")
    out = api.build_report(m, tmp_path / "kn.json", budget=Budget(max_terms=3))
    import json

    data = json.loads(out.read_text())
    assert {d["stage"] for d in data["missing"]} >= {"christoffel", "riemann", "invariants"}


@pytest.mark.parametrize("option,value", [("--budget", "0"), ("--budget", "-2"), ("--max-terms", "x"),
                                          ("--jobs", "0")])
def test_bad_heavy_option_is_a_usage_error(tmp_path, capsys, option, value):
    src = tmp_path / "s.yaml"
    src.write_text(heavy_cases.SCHWARZSCHILD)
    assert cli.main(["build", str(src), "-o", str(tmp_path / "s.md"), option, value]) == 2
    assert capsys.readouterr().err.splitlines()[-1] == \
        f"error: argument {option}: Expected a positive number but received: '{value}'"


def test_build_with_jobs_writes_the_serial_report(tmp_path):
    src = tmp_path / "kn.yaml"
    src.write_text(heavy_cases.KERR_NEWMAN)
    assert cli.main(["build", str(src), "-o", str(tmp_path / "a.md"), "--no-figures", "-q"]) == 0
    assert cli.main(["build", str(src), "-o", str(tmp_path / "b.md"), "--no-figures", "-q", "--jobs", "2"]) == 0
    assert (tmp_path / "a.md").read_text() == (tmp_path / "b.md").read_text()


# ---------------------------------------------------------------- many entries in workers

def _square_but_three_kills_its_worker(x: int) -> int:
    if x == 3:
        os.kill(os.getpid(), signal.SIGKILL)
    if x == 5:
        raise ValueError("five is bad")
    return x * x


def test_map_in_workers_loses_only_the_item_that_kills_its_worker():
    """A worker killed by SIGKILL breaks the pool and every unfinished item with it; the innocent
    ones are run again, the guilty one is found by giving each its own process."""
    seen, reruns = [], []
    got = map_in_workers(_square_but_three_kills_its_worker, list(range(7)), 2,
                         on_result=lambda item, value: seen.append(item),
                         on_lost=lambda item, why: f"{item}: {why}", reruns=reruns)
    assert got == [0, 1, 4, "3: its worker process died (killed, or out of memory?)", 16,
                   "5: worker failed (ValueError: five is bad)", 36]
    assert sorted(seen) == list(range(7))  # every item reported once
    assert len(reruns) == 2 and reruns[0] >= 1  # a fresh pool, then one process per item


def test_map_in_workers_without_deaths_runs_each_item_once():
    reruns = []
    assert map_in_workers(abs, [-2, -1, 0, 1], 2, reruns=reruns) == [2, 1, 0, 1]
    assert reruns == []
