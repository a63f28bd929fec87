"""The JSON response class of the service, rendered by orjson."""

from __future__ import annotations

from typing import Any

import orjson
from starlette.responses import JSONResponse

__all__ = ["OrjsonResponse"]

_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


class OrjsonResponse(JSONResponse):
    """``application/json`` rendered by orjson (numpy arrays and scalars included).

    It subclasses :class:`~starlette.responses.JSONResponse` so that FastAPI declares each
    route's response model in the OpenAPI document (for any other class it declares a
    string).
    """

    def render(self, content: Any) -> bytes:
        return orjson.dumps(content, option=_OPTIONS)
