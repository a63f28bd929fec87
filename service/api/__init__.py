"""The HTTP layer of the scoring service (FastAPI on uvicorn).

``create_app(settings)`` builds the app; routes live in ``routes/<resource>.py``, request
and response bodies in ``schemas.py``, the one error shape in ``errors.py``, API keys in
``auth.py`` and Prometheus metrics in ``metrics.py``. The scoring itself is HTTP-free, in
:mod:`service.scoring`.
"""

from __future__ import annotations

from service.api.app import API_VERSION, app_from_env, create_app
from service.api.auth import KeyRing, Principal, hash_key, new_key
from service.api.errors import ApiError, error_body
from service.api.metrics import Metrics
from service.api.state import ServiceState

__all__ = [
    "API_VERSION",
    "ApiError",
    "KeyRing",
    "Metrics",
    "Principal",
    "ServiceState",
    "app_from_env",
    "create_app",
    "error_body",
    "hash_key",
    "new_key",
]
