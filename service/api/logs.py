"""Structured (JSON) logs for the running service, one object per line on stderr."""

from __future__ import annotations

import logging
import sys
from datetime import UTC, datetime

import orjson

__all__ = ["JsonFormatter", "configure_logging"]


class JsonFormatter(logging.Formatter):
    """``{"time", "level", "logger", "message"}`` plus ``exception`` when there is one."""

    def format(self, record: logging.LogRecord) -> str:
        entry = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return orjson.dumps(entry).decode()


def configure_logging(level: str) -> None:
    """Send every log record (uvicorn's included) to stderr as JSON at ``level``."""
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(JsonFormatter())
    root = logging.getLogger()
    root.handlers[:] = [handler]
    root.setLevel(level.upper())
    for name in ("uvicorn", "uvicorn.error", "uvicorn.access"):
        logger = logging.getLogger(name)
        logger.handlers[:] = []
        logger.propagate = True
