"""Structured logs: one JSON object per line, with the request id when there is one.

Used by gunicorn (``logconfig_dict`` in service/gunicorn_conf.py) and by the job worker. Each
line has ``time`` (UTC, ISO 8601), ``level``, ``logger``, ``message`` and any ``extra`` fields
the caller passed (the request log adds ``request_id``, ``method``, ``path``, ``status``,
``duration_ms``, ``key_id``). Headers are never logged, so API keys cannot reach the logs;
keys are identified by their public id only.
"""

from __future__ import annotations

import json
import logging
import time
from typing import Any

#: Attributes every LogRecord has; anything else was passed as ``extra`` and is logged.
_STANDARD = set(vars(logging.LogRecord("", 0, "", 0, "", None, None))) | {"message", "asctime", "taskName"}


class JsonFormatter(logging.Formatter):
    """Format a record as one JSON line."""

    def format(self, record: logging.LogRecord) -> str:
        entry: dict[str, Any] = {
            "time": time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(record.created)) + f".{int(record.msecs):03d}Z",
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        entry.update({k: v for k, v in vars(record).items() if k not in _STANDARD and not k.startswith("_")})
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return json.dumps(entry, default=str)


def logging_config(level: str = "INFO", json_format: bool = True) -> dict[str, Any]:
    """A ``logging.config.dictConfig`` dict sending everything to stderr (JSON or plain text)."""
    formatter = {"()": JsonFormatter} if json_format else {"format": "%(asctime)s %(levelname)s %(name)s %(message)s"}
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "formatters": {"main": formatter},
        "handlers": {"stderr": {"class": "logging.StreamHandler", "formatter": "main", "stream": "ext://sys.stderr"}},
        "root": {"level": level, "handlers": ["stderr"]},
        "loggers": {
            "gunicorn.error": {"level": level, "handlers": ["stderr"], "propagate": False},
            "gunicorn.access": {"level": level, "handlers": ["stderr"], "propagate": False},
        },
    }
