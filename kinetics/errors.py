"""Errors raised by the :mod:`kinetics` package.

Every failure the package can foresee is one of these classes, so callers (the
HTTP service, scripts) can catch :class:`KineticsError` and show its message to
a chemist. Messages repeat the offending value and say what would be valid.

Hierarchy::

    KineticsError                 base of everything raised on purpose
    ├── InputError (ValueError)   an argument is invalid: bad value, shape, name
    │   ├── UnitError             an unknown or inconsistent unit
    │   └── DataError             the data cannot support the requested fit
    │                             (too few points, no decline, negative values)
    └── FitError                  a fit ran but its result cannot be used
        ├── ConvergenceError      the optimiser did not converge
        └── IdentifiabilityError  the data cannot characterise a parameter
"""

from __future__ import annotations

__all__ = [
    "KineticsError",
    "InputError",
    "UnitError",
    "DataError",
    "FitError",
    "ConvergenceError",
    "IdentifiabilityError",
]


class KineticsError(Exception):
    """Base class of all errors raised on purpose by :mod:`kinetics`."""


class InputError(KineticsError, ValueError):
    """An argument is invalid (value out of range, wrong shape, unknown choice)."""


class UnitError(InputError):
    """A unit is unknown or inconsistent with the quantity it qualifies."""


class DataError(InputError):
    """The data cannot support the requested fit or calculation."""


class FitError(KineticsError):
    """A fit ran but its result cannot be used."""


class ConvergenceError(FitError):
    """The optimiser failed to converge to a usable minimum."""


class IdentifiabilityError(FitError):
    """The data cannot characterise one or more parameters of the model."""
