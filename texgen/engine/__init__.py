"""The curvature engine: exact tensors and invariants of a frozen spacetime model.

``curvature`` holds the lazy, memoised :class:`Curvature` (its element stages in
``components``), running on the exact field of ``field`` (generators in
``generators``, polynomial backends in ``polys``, the choice and the expression
fallback in ``algebra``); ``budget`` limits a derivation, ``parallel`` runs stages
or whole entries in worker processes.  Pure computation: no printing, no files.
"""
from __future__ import annotations

from typing import Callable

from ..spec.model import Spacetime
from .budget import Budget
from .curvature import QUANTITIES, Curvature, compute_all

__all__ = ["Budget", "Curvature", "QUANTITIES", "compute_all", "derive"]


def derive(spacetime: Spacetime, *, budget=None, progress: Callable | None = None, jobs: int | None = None):
    """A lazy :class:`Curvature` for ``spacetime``.

    Parameters
    ----------
    spacetime:
        The model.
    budget:
        Seconds per stage or a :class:`Budget`; a stage over it raises
        :class:`~texgen.errors.BudgetExceeded`, and raises it again at once when asked again.
    progress:
        ``progress(stage, done, total)``, e.g. a :class:`texgen.cli.progress.ProgressBar`.
    jobs:
        More than 1: compute the Riemann, Weyl and invariant stages now, in that
        many worker processes (see :mod:`texgen.engine.parallel`).
    """
    if budget is None and (jobs is None or jobs == 1):
        return Curvature(spacetime, budget=budget, progress=progress)
    from .parallel import HeavyCurvature

    cv = HeavyCurvature(spacetime, budget=budget, progress=progress)
    if jobs is not None:
        cv.compute_parallel(jobs)
    return cv
