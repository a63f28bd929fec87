"""The one exception hierarchy of upshot.

Every message is a sentence that names the offending value and says how to fix it.
The API maps these classes to HTTP statuses in ``service/api/errors.py``.
"""

from __future__ import annotations

__all__ = [
    "UpshotError",
    "DataError",
    "NotFittedError",
    "BundleError",
    "RegistryError",
    "NotFoundError",
    "ConflictError",
    "PolicyError",
    "ConfigError",
    "DecisionLogError",
    "OverlapWarning",
]


class UpshotError(Exception):
    """Base class of every error upshot raises on purpose."""


class DataError(UpshotError, ValueError):
    """Training or scoring input is unusable (a column, a label, a value)."""


class NotFittedError(UpshotError, AttributeError):
    """An estimator was used before ``fit``."""


class BundleError(UpshotError):
    """A model bundle is missing, incomplete, or fails verification."""


class RegistryError(UpshotError):
    """A registry operation (promote, rollback) cannot be carried out."""


class NotFoundError(UpshotError, LookupError):
    """A named model, version, campaign or decision does not exist."""


class ConflictError(UpshotError):
    """A write contradicts what is already recorded (e.g. a different outcome)."""


class PolicyError(UpshotError, ValueError):
    """A campaign policy file is invalid."""


class ConfigError(UpshotError, ValueError):
    """A setting is missing or unsafe."""


class DecisionLogError(UpshotError):
    """The decision log cannot be written or read; nothing was acknowledged."""


class OverlapWarning(UserWarning):
    """Estimated or given propensities come close to 0 or 1 for many rows.

    Inverse-propensity terms then explode and effect estimates become unreliable.
    """
