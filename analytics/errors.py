"""Exceptions raised by the thermoelectric physics functions.

Every one derives from :class:`PhysicsError`, itself a :class:`ValueError`, so a
caller that only wants to know "the numbers were unusable" can catch one class.
"""

from __future__ import annotations


class PhysicsError(ValueError):
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
