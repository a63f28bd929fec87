"""The service app for the subprocess tests: the real app from ``UPSHOT_*`` settings."""

from __future__ import annotations

from typing import Any

from loop_world import _include_loop_routes

from service.api.app import app_from_env


def app() -> Any:
    """``uvicorn --factory loop_app:app``."""
    application = app_from_env()
    _include_loop_routes(application)
    return application
