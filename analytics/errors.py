"""Exceptions of the analytics stage: physics, fits and alert rules.

Every physics error derives from :class:`PhysicsError`, which is both a
:class:`~tecfleet.ingest.errors.TecfleetError` (the project's one root) and a :class:`ValueError`,
so a caller that only wants to know "the numbers were unusable" can catch one class.
"""

from __future__ import annotations

from tecfleet.ingest.errors import TecfleetError

__all__ = [
    "AlertError",
    "EstimationError",
    "InconsistentRatingsError",
    "InsufficientDataError",
    "NoConvergenceError",
    "OutOfDomainError",
    "PhysicsError",
]


class PhysicsError(TecfleetError, ValueError):
    """Base class: the inputs or the result lie outside what the physics can answer."""


class OutOfDomainError(PhysicsError):
    """An input (or a solved result) is outside the documented valid domain.

    Examples: a negative resistance, a temperature below absolute zero or
    outside the -60..150 °C range the module model is stated for.
    """


class InconsistentRatingsError(PhysicsError):
    """Module ratings that cannot come from one module of the standard model.

    ``rating`` names the rating (``"i_max"``, ``"v_max"``, ``"dt_max"`` or
    ``"q_max"``) whose single smallest change would reconcile the set.
    """

    def __init__(self, message: str, rating: str) -> None:
        super().__init__(message)
        self.rating = rating


class NoConvergenceError(PhysicsError):
    """A numerical solver or fit did not converge; no result is returned."""


class EstimationError(PhysicsError):
    """Parameters could not be estimated from the readings given."""


class InsufficientDataError(EstimationError):
    """Too few usable readings, or readings that do not vary enough, to estimate a parameter.

    ``reason`` says what was missing in words a person can act on.
    """

    def __init__(self, message: str, reason: str | None = None) -> None:
        super().__init__(message)
        self.reason = reason or message


class AlertError(TecfleetError):
    """An alert rule, threshold override or maintenance window is invalid."""
