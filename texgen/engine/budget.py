"""Budgets of a derivation: seconds per stage and terms per component, checked as components finish."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from ..errors import DerivationError


@dataclass(frozen=True)
class Budget:
    """Limits for one derivation, checked after every component."""

    seconds: float | None = None
    """Wall-clock seconds allowed to each stage (its own work, not its inputs)."""
    max_terms: int | None = None
    """Largest number of terms allowed in one component's numerator."""


def _budget(value: Any) -> Budget | None:
    if value is None or isinstance(value, Budget):
        return value
    if isinstance(value, (int, float)) and not isinstance(value, bool) and value > 0:
        return Budget(seconds=float(value))
    raise DerivationError(f"Expected a positive number of seconds or a Budget but received: {value!r}")
