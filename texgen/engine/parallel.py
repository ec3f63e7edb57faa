"""Heavy spacetimes: independent curvature stages in worker processes, budget failures kept.

After the Riemann tensor (all indices down), the Ricci tensor and the Ricci scalar
are known, the mixed Riemann tensor, the Weyl tensor and the invariants depend on
nothing but those; each group is computed by its own worker process.  On platforms
with ``fork`` the workers inherit the parent's computed stages; elsewhere each gets
the (picklable) model and starts from it.  Results come back as sympy objects and
are the ones a serial run gives (tests/test_heavy.py compares their ``srepr``).
"""
from __future__ import annotations

import multiprocessing
import signal
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from contextlib import contextmanager
from typing import Any

from ..errors import BudgetExceeded, DerivationError
from .curvature import Curvature

#: Public quantities worked out together in one worker (later ones reuse earlier ones).
GROUPS: tuple[tuple[str, ...], ...] = (
    ("riemann",),
    ("weyl", "weyl_squared"),
    ("kretschmann", "ricci_squared", "invariant_identity"),
)
_NEEDS_THREE = {"weyl", "weyl_squared", "invariant_identity"}

_inherited: Curvature | None = None  # the parent's curvature, seen by forked workers


class HeavyCurvature(Curvature):
    """A :class:`~texgen.engine.Curvature` for long derivations.

    A stage that went over its budget raises the same
    :class:`~texgen.errors.BudgetExceeded` again at once when asked again (the
    report asks for the Riemann tensor many times; each would spend the budget
    anew), and :meth:`compute_parallel` fills the independent stages from workers.
    """

    def __init__(self, *args: Any, **kw: Any):
        super().__init__(*args, **kw)
        self._over_budget: dict[str, BudgetExceeded] = {}
        self.worker_timings: dict[str, float] = {}
        """Wall seconds per stage spent in worker processes (not in :attr:`timings`)."""
        self.lost_workers: list[str] = []
        """What was left to this process because a worker died (killed, out of memory)."""

    @property
    def budget_failures(self) -> tuple[BudgetExceeded, ...]:
        """The distinct budget failures met so far, first first."""
        seen: dict[str, BudgetExceeded] = {}
        for exc in self._over_budget.values():
            seen.setdefault(exc.message, exc)
        return tuple(seen.values())

    def _stage(self, name: str, compute):
        if name in self._over_budget:
            raise self._over_budget[name]
        try:
            return super()._stage(name, compute)
        except BudgetExceeded as exc:
            self._over_budget[name] = exc
            raise

    def compute_parallel(self, jobs: int) -> list[BudgetExceeded]:
        """Compute the Riemann, Weyl and invariant stages in up to ``jobs`` workers.

        Returns the budget failures met (they are kept and raised again when the
        quantity is asked for); other errors are left for the serial path to raise.
        """
        if not isinstance(jobs, int) or isinstance(jobs, bool) or jobs < 1:
            raise DerivationError(f"Expected a positive number of jobs but received: {jobs!r}")
        groups = [tuple(q for q in grp if self.dimension >= 3 or q not in _NEEDS_THREE) for grp in GROUPS]
        groups = [g for g in groups if g and any(q not in self._cache for q in g)]
        if jobs == 1 or not groups:
            return []
        fork = "fork" in multiprocessing.get_all_start_methods()
        try:
            if fork:
                self.ricci_scalar  # the shared inputs, inherited by every worker
        except BudgetExceeded as exc:
            return [exc]
        except DerivationError:
            return []  # the serial path reports it where it is asked for
        global _inherited
        failures: list[BudgetExceeded] = []
        _inherited = self if fork else None
        try:
            self._run_pool(jobs, groups, fork, failures)
        except (BrokenProcessPool, OSError) as exc:
            # a worker died (killed, out of memory) or none could start: this process computes the rest
            left = [q for grp in groups for q in grp if q not in self._cache]
            why = "a worker process died" if isinstance(exc, BrokenProcessPool) else f"no worker could start ({exc})"
            self.lost_workers.append(f"{why}; computed here instead: {', '.join(left) or 'nothing'}")
        finally:
            _inherited = None
        return failures

    def _run_pool(self, jobs: int, groups: list, fork: bool, failures: list) -> None:
        ctx = multiprocessing.get_context("fork" if fork else "spawn")
        with _worker_pool(min(jobs, len(groups)), ctx) as pool:
            arg = None if fork else (self.spacetime, self.budget, self.backend)
            futures = {pool.submit(_work, grp, arg): grp for grp in groups}
            done = 0
            for fut in as_completed(futures):
                values, timings, failure = fut.result()
                for name, value in values.items():
                    self._cache.setdefault(name, value)
                for name, sec in timings.items():
                    self.worker_timings[name] = self.worker_timings.get(name, 0.0) + sec
                if failure is not None:
                    exc = BudgetExceeded(failure[0], stage=failure[1], component=failure[2])
                    self._over_budget.setdefault(failure[3], exc)
                    failures.append(exc)
                done += 1
                if self.progress is not None:
                    self.progress("parallel stages", done, len(groups))


@contextmanager
def _worker_pool(jobs: int, ctx=None):
    """A process pool whose workers are stopped at once when the ``with`` body raises (Ctrl-C,
    SIGTERM, a dead worker) rather than waited for, and shut down when it ends."""
    before = set(multiprocessing.active_children())
    pool = ProcessPoolExecutor(max_workers=max(1, jobs), mp_context=ctx, initializer=_worker_init)
    try:
        yield pool
    except BaseException:
        for proc in set(multiprocessing.active_children()) - before:
            proc.terminate()
        raise
    finally:
        pool.shutdown(wait=True, cancel_futures=True)


def _worker_init() -> None:
    """Workers leave interruptions to the parent: Ctrl-C (sent to the whole process group) is
    ignored, SIGTERM (the parent's way of stopping them) ends them without a traceback."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)


def _work(names: tuple[str, ...], arg) -> tuple[dict, dict, tuple | None]:
    """In a worker: (values by name, wall seconds by stage, budget failure or None)."""
    if arg is None:
        cv = _inherited
        before = dict(cv.timings)
    else:
        spacetime, budget, backend = arg
        cv = Curvature(spacetime, budget=budget, backend=backend)
        before = {}
    cv.progress = None  # only the parent draws
    values: dict[str, Any] = {}
    failure = None
    for name in names:
        try:
            values[name] = getattr(cv, name)
        except BudgetExceeded as exc:
            # exceptions with extra fields do not survive pickling: send the parts
            failure = (exc.message, exc.stage, exc.component, name)
            break
        except DerivationError:
            break  # the parent's serial path raises it where it is asked for
    timings = {k: v - before.get(k, 0.0) for k, v in cv.timings.items() if v - before.get(k, 0.0) > 0}
    return values, timings, failure


# ------------------------------------------------------------------ many entries in worker processes

def map_in_workers(fn, items: list, jobs: int, *, on_result=None, on_lost=None, reruns: list | None = None) -> list:
    """``[fn(x) for x in items]`` in up to ``jobs`` worker processes, robust to workers that die.

    A worker killed (by a signal, the out-of-memory killer) breaks the whole pool
    and fails every unfinished item with it, guilty or not.  Those are run again
    in a fresh pool; if that breaks as well, each remaining item gets a process
    of its own, so the one that kills its worker is found and only it is lost:
    its result is ``on_lost(item, reason)``, as for an item whose call raised
    (the exception cannot come back through the pool as itself).
    ``on_result(item, result)`` is called as results arrive; ``reruns`` (a list)
    gets the number of items run again after each death.  Ctrl-C and SIGTERM stop
    the workers at once (they leave both signals to this process, see
    :func:`_worker_init`).
    """
    results: dict[int, Any] = {}
    pending = list(range(len(items)))
    for again in range(3):  # the pool, a fresh pool, then one process per item
        if not pending:
            break
        if again and reruns is not None:
            reruns.append(len(pending))
        if again == 2:
            for i in pending:  # a death now names its item
                _pool_round(fn, items, [i], 1, results, on_result, on_lost)
        else:
            _pool_round(fn, items, pending, jobs, results, on_result, on_lost)
        pending = [i for i in pending if i not in results]
    for i in pending:
        _settle(items, i, _lost(on_lost, items[i], "its worker process died (killed, or out of memory?)"),
                results, on_result)
    return [results[i] for i in range(len(items))]


def _lost(on_lost, item, reason: str):
    return on_lost(item, reason) if on_lost is not None else None


def _settle(items: list, i: int, value, results: dict, on_result) -> None:
    results[i] = value
    if on_result is not None:
        on_result(items[i], value)


def _pool_round(fn, items: list, indices: list[int], jobs: int, results: dict, on_result, on_lost) -> None:
    """Run ``fn`` on ``items[i]`` for ``i`` in ``indices`` in one pool; the items a broken pool
    took down are left out of ``results`` for the next round."""
    with _worker_pool(min(jobs, len(indices))) as pool:
        futures = {pool.submit(fn, items[i]): i for i in indices}
        for fut in as_completed(futures):
            i = futures[fut]
            try:
                value = fut.result()
            except BrokenProcessPool:
                continue  # unfinished when a worker died: the next round runs it again
            except Exception as exc:  # noqa: BLE001 - one item's failure must not stop the others
                value = _lost(on_lost, items[i], f"worker failed ({type(exc).__name__}: {exc})")
            _settle(items, i, value, results, on_result)
