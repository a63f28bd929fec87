"""The JSON response class of the service, rendered by orjson."""

from __future__ import annotations

from typing import Any

import orjson
from starlette.responses import Response

__all__ = ["OrjsonResponse"]

_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


class OrjsonResponse(Response):
    """``application/json`` rendered by orjson (numpy arrays and scalars included)."""

    media_type = "application/json"

    def render(self, content: Any) -> bytes:
        return orjson.dumps(content, option=_OPTIONS)
