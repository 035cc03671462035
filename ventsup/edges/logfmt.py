"""Log output for the daemon: plain text lines or one JSON object a line.

The daemon logs through :mod:`logging` only; :func:`configure_logging` sets the
root handler once, at start. JSON lines carry ``time`` (ISO 8601, UTC),
``level``, ``logger`` and ``message``, any ``extra`` fields given to the log
call, and ``exception`` with the traceback text when there is one, so that a
journal or a log shipper can filter on them.
"""

from __future__ import annotations

import json
import logging
import sys
from datetime import UTC, datetime
from typing import Any, Literal, TextIO

__all__ = ["JsonLineFormatter", "configure_logging"]

LogFormat = Literal["text", "json"]

# Attributes every LogRecord has; anything else on a record came from ``extra``.
_STANDARD = frozenset(vars(logging.makeLogRecord({}))) | {"message", "asctime", "taskName"}
_TEXT_FORMAT = "%(asctime)s %(levelname)-7s %(name)s: %(message)s"


class JsonLineFormatter(logging.Formatter):
    """Formats a record as one JSON object on one line."""

    def format(self, record: logging.LogRecord) -> str:
        entry: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        for key, value in vars(record).items():
            if key not in _STANDARD and not key.startswith("_"):
                entry[key] = value
        if record.exc_info:
            entry["exception"] = self.formatException(record.exc_info)
        return json.dumps(entry, default=str, ensure_ascii=False)


def configure_logging(
    fmt: LogFormat = "text", level: int = logging.INFO, stream: TextIO | None = None
) -> logging.Handler:
    """Send every log record at ``level`` and above to ``stream`` (stderr) as ``fmt``.

    Replaces the handlers of the root logger; returns the new handler.
    """
    handler = logging.StreamHandler(stream if stream is not None else sys.stderr)
    if fmt == "json":
        handler.setFormatter(JsonLineFormatter())
    elif fmt == "text":
        handler.setFormatter(logging.Formatter(_TEXT_FORMAT))
    else:
        raise ValueError(f"got log format {fmt!r}, expected 'text' or 'json'")
    root = logging.getLogger()
    for old in list(root.handlers):
        root.removeHandler(old)
    root.addHandler(handler)
    root.setLevel(level)
    # paho's own debug chatter is only useful when debugging the connection.
    logging.getLogger("ventsup.mqtt.paho").setLevel(max(level, logging.WARNING))
    return handler
