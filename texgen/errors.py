"""Error classes: every failure texgen reports on purpose is one of these.

They carry no CLI knowledge; :mod:`texgen.cli` maps each class to an exit code.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Location:
    """Where in an input file a problem sits (1-based line and column)."""

    file: str
    line: int | None = None
    column: int | None = None
    path: str | None = None  #: key path such as ``metric.components[t,phi]``

    def __str__(self) -> str:
        out = self.file
        if self.line is not None:
            out += f":{self.line}"
            if self.column is not None:
                out += f":{self.column}"
        if self.path:
            out += f": {self.path}"
        return out


class TexgenError(Exception):
    """Base of texgen's own errors: a message and an optional location."""

    def __init__(self, message: str, location: Location | None = None, hint: str | None = None):
        super().__init__(message)
        self.message = message
        self.location = location
        self.hint = hint

    def format_message(self) -> str:
        text = f"{self.location}: {self.message}" if self.location else self.message
        if self.hint:
            text += f" ({self.hint})"
        return text

    def __str__(self) -> str:
        return self.format_message()


class ConfigError(TexgenError):
    """A spacetime file is malformed, unsafe or inconsistent."""


class ConfigErrors(ConfigError):
    """Several configuration errors, collected and raised once."""

    def __init__(self, errors: list[ConfigError]):
        self.errors = list(errors)
        super().__init__("\n".join(e.format_message() for e in self.errors))

    def format_message(self) -> str:
        return "\n".join(e.format_message() for e in self.errors)


class ExpressionError(ConfigError):
    """An expression in a spacetime file cannot be accepted."""


class DerivationError(TexgenError):
    """A derivation could not be carried out (budget exceeded, unsupported input)."""


class BudgetExceeded(DerivationError):
    """A stage went over its time or size budget."""

    def __init__(self, message: str, stage: str, component: str | None = None):
        super().__init__(message)
        self.stage = stage
        self.component = component


class RenderError(TexgenError):
    """A report could not be rendered or written."""


class ClaimFailed(TexgenError):
    """At least one claim in a spacetime file does not hold."""
