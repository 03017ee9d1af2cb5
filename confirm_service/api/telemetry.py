"""Per-request telemetry: a request id, one JSON log line per request, request metrics, and the
Prometheus text endpoint.

The log line names the token (name, role, id) but never a secret: the ``Authorization`` header,
cookies, bodies and query strings are not logged (a query string may hold anything a client put
there).
"""

from __future__ import annotations

import json
import logging
import re
import sys
import time
import uuid
from typing import Any

from flask import Blueprint, Flask, Response, g, request

from confirm_service import metrics
from confirm_service.api.common import roles
from confirm_service.api.spec import documented
from confirm_service.timeutil import utc_now

REQUEST_ID_HEADER = "X-Request-Id"
REQUEST_LOGGER = "confirm_service.requests"
_CLIENT_REQUEST_ID = re.compile(r"^[A-Za-z0-9._:-]{1,64}$")
UNMATCHED_ROUTE = "(unmatched)"
"""The route label of requests no rule matched (404s), so that a scan of random paths cannot
create one metric series per path."""

bp = Blueprint("telemetry", __name__, url_prefix="/api/v1")
log = logging.getLogger(REQUEST_LOGGER)


def request_id_of(header: str | None) -> str:
    """The client's ``X-Request-Id`` when it is a short plain token, else a new random one."""
    if header and _CLIENT_REQUEST_ID.match(header):
        return header
    return uuid.uuid4().hex


def route_template() -> str:
    """The matched route's template (``/api/v1/candidates/<int:candidate_id>``), not the path."""
    rule = request.url_rule
    return rule.rule if rule is not None else UNMATCHED_ROUTE


def request_record(response: Response, duration_s: float) -> dict[str, Any]:
    """The fields of one request's log line."""
    actor = g.get("actor")
    return {
        "time": utc_now().isoformat(),
        "request_id": g.request_id,
        "method": request.method,
        "route": route_template(),
        "path": request.path,
        "status": response.status_code,
        "duration_ms": round(duration_s * 1000.0, 3),
        "token_name": getattr(actor, "name", None),
        "token_role": getattr(actor, "role", None),
        "token_id": getattr(actor, "token_id", None),
        "remote_addr": request.remote_addr,
    }


class _StdoutHandler(logging.StreamHandler):
    """Writes to whatever ``sys.stdout`` is when a line is written (it may be replaced)."""

    def __init__(self) -> None:
        super().__init__(sys.stdout)
        self.setFormatter(logging.Formatter("%(message)s"))

    @property
    def stream(self) -> Any:
        return sys.stdout

    @stream.setter
    def stream(self, _value: Any) -> None:
        pass


def configure_request_log(enabled: bool) -> None:
    """One JSON object per line on stdout (journald under systemd), or nothing when disabled.

    A handler is added only if the logger has none, so an operator's logging configuration (or
    a test's handler) takes precedence."""
    log.setLevel(logging.INFO if enabled else logging.CRITICAL + 1)
    log.propagate = False
    if enabled and not log.handlers:
        log.addHandler(_StdoutHandler())


def install_telemetry(app: Flask, request_log: bool) -> None:
    """Request id, timing, the log line and the request metrics for every request of ``app``.

    Registered before any other ``before_request`` hook, so a request refused by
    authentication is timed and logged too."""
    configure_request_log(request_log)

    def _start() -> None:
        g.request_started = time.perf_counter()
        g.request_id = request_id_of(request.headers.get(REQUEST_ID_HEADER))

    app.before_request_funcs.setdefault(None, []).insert(0, _start)

    @app.after_request
    def _finish(response: Response) -> Response:
        started = g.get("request_started")
        if started is None:  # a failure before the first hook ran
            return response
        duration_s = time.perf_counter() - started
        response.headers[REQUEST_ID_HEADER] = g.request_id
        route = route_template()
        metrics.REQUESTS.labels(request.method, route, str(response.status_code)).inc()
        metrics.REQUEST_SECONDS.labels(request.method, route).observe(duration_s)
        if log.isEnabledFor(logging.INFO):
            log.info(json.dumps(request_record(response, duration_s), separators=(",", ":")))
        return response


@bp.get("/metrics")
@documented(
    "Counters and latency histograms in the Prometheus text exposition format",
    error_statuses=(401, 403),
    tag="service",
)
@roles("viewer", "coordinator")
def prometheus_metrics() -> Response:
    body, content_type = metrics.exposition()
    return Response(body, status=200, content_type=content_type)
