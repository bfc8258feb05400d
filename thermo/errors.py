"""One exception hierarchy for the numerical core.

Input errors also subclass :class:`ValueError` so plain Python callers can
catch them generically. Every message says what was wrong and what is allowed.
"""

from __future__ import annotations

from typing import Any


class HeatpathError(Exception):
    """Base class of every error raised by :mod:`thermo`."""


class InputError(HeatpathError, ValueError):
    """A caller-supplied value is invalid.

    Parameters
    ----------
    field : str
        Dotted path of the offending input (e.g. ``"composition.oxides.SiO2"``).
    message : str
        What was wrong and what is allowed.
    """

    def __init__(self, field: str, message: str) -> None:
        super().__init__(f"{field}: {message}")
        self.field = field
        self.message = message


class OutOfDomainError(InputError):
    """A pressure, temperature or composition lies outside the dataset's validity domain."""


class CompositionError(InputError):
    """A bulk composition cannot be represented or is malformed."""


class DatasetError(HeatpathError):
    """A data file is missing, malformed or inconsistent (names file, row and field)."""


class ConvergenceError(HeatpathError):
    """A solver failed to converge; ``diagnostics`` holds what it saw."""

    def __init__(self, message: str, diagnostics: dict[str, Any] | None = None) -> None:
        super().__init__(message)
        self.diagnostics = diagnostics or {}
