"""The production server (waitress) with the service's own error bodies and connection limits.

waitress answers some requests itself before the app sees them (a body over
``max_request_body_size``, headers over ``max_request_header_size``, a malformed request line);
:func:`create_server` makes those answers RFC 9457 problem documents like every other error.
Connection limits come from ``config/server.toml``: ``channel_timeout`` closes a connection idle
(or trickling a request) that long, ``connection_limit`` bounds open connections.
"""

from __future__ import annotations

import json

from waitress import create_server as _waitress_server
from waitress.channel import HTTPChannel
from waitress.task import ErrorTask

__all__ = ["ProblemChannel", "create_server"]


class _ProblemErrorTask(ErrorTask):
    """waitress' own error answers as ``application/problem+json``."""

    def execute(self):
        error = self.request.error
        body = json.dumps({"type": "about:blank", "title": error.reason, "status": error.code,
                           "detail": str(error.body)[:300] or error.reason}).encode("utf-8")
        self.status = f"{error.code} {error.reason}"
        self.response_headers.append(("Content-Type", "application/problem+json"))
        self.set_close_on_finish()
        self.content_length = len(body)
        self.write(body)


class ProblemChannel(HTTPChannel):
    error_task_class = _ProblemErrorTask


def create_server(app, **settings):
    """A waitress server for ``app`` (``settings`` are waitress arguments) whose own error
    answers are problem documents."""
    server = _waitress_server(app, **settings)
    servers = getattr(server, "effective_listen", None) and getattr(server, "servers", None)
    for one in servers or [server]:
        one.channel_class = ProblemChannel
    return server
