"""The dashboard blueprint: sign-in guard, security headers, error pages, template helpers.

Every page module (``web/pages_*.py``) adds its routes to :data:`bp`. Under ``/dashboard``
every error is an HTML page, never JSON: routing errors (a mistyped address, a wrong method)
are caught before dispatch, everything else by the blueprint's handlers.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from flask import (
    Blueprint,
    Response,
    current_app,
    g,
    redirect,
    render_template,
    request,
    url_for,
)
from flask.blueprints import BlueprintSetupState
from werkzeug.exceptions import HTTPException

from confirm_service.actor import Actor
from confirm_service.cautions import SITE_SAFETY
from confirm_service.db import Database
from confirm_service.errors import ServiceError
from confirm_service.timeutil import mjd_utc
from confirm_service.web import auth

bp = Blueprint(
    "dashboard",
    __name__,
    url_prefix="/dashboard",
    template_folder="templates",
    static_folder="static",
)

PREFIX = "/dashboard"
PUBLIC_ENDPOINTS = {"dashboard.sign_in", "dashboard.static"}
PAGES = (
    ("dashboard.candidates", "Attention and candidates"),
    ("dashboard.sites", "Sites"),
    ("dashboard.followups", "Follow-ups"),
    ("dashboard.screening", "Screening"),
    ("dashboard.audit", "Audit"),
)
"""The main navigation: endpoint and link text."""


def database() -> Database:
    return current_app.extensions["confirm.db"]


def settings() -> Any:
    return current_app.extensions["confirm.settings"]


@bp.record_once
def _configure(state: BlueprintSetupState) -> None:
    auth.configure_app(state.app)  # type: ignore[arg-type]  # a Flask app, typed as sansio App
    state.app.before_request(_routing_error_as_page)


def _routing_error_as_page() -> Any:
    """A mistyped dashboard address or a wrong method: an HTML page, not the API's JSON."""
    failure = request.routing_exception
    if failure is None or not request.path.startswith(PREFIX):
        return None
    if isinstance(failure, HTTPException):
        auth.load_signed_in_actor()
        response = _error_page(failure.code or 404, failure.name, _routing_hint(failure), [])
        return _with_headers(current_app.make_response(response))
    return None


def _routing_hint(failure: HTTPException) -> str:
    if failure.code == 405:
        return "this address does not take that kind of request; use the page's own links"
    return f"there is no page at {request.path}; the pages are listed below"


@bp.before_request
def _require_sign_in() -> Any:
    if request.endpoint == "dashboard.static":
        return None
    if request.method == "POST":
        auth.check_csrf()
    if request.endpoint in PUBLIC_ENDPOINTS:
        auth.load_signed_in_actor()
        return None
    if auth.load_signed_in_actor() is None:
        wanted = request.full_path.rstrip("?") if request.method == "GET" else None
        return redirect(url_for("dashboard.sign_in", next=auth.safe_next(wanted)))
    return None


def _with_headers(response: Response) -> Response:
    """Pages are not cached; the security headers come from the app-wide hook in app.py."""
    if request.endpoint != "dashboard.static":
        response.headers.setdefault("Cache-Control", "no-store")
    return response


@bp.after_request
def _security_headers(response: Response) -> Response:
    return _with_headers(response)


def actor_or_none() -> Actor | None:
    return g.get("actor")


@bp.app_context_processor
def _template_helpers() -> dict[str, Any]:
    if not request.path.startswith(PREFIX):
        return {}
    return {
        "csrf_token": auth.csrf_token,
        "csrf_field": auth.CSRF_FIELD,
        "actor": actor_or_none(),
        "site_safety": SITE_SAFETY,
        "main_pages": PAGES,
    }


@bp.errorhandler(HTTPException)
def _http_error(exc: HTTPException) -> Any:
    return _error_page(exc.code or 500, exc.name, exc.description or "", [])


@bp.errorhandler(ServiceError)
def _service_error(exc: ServiceError) -> Any:
    return _error_page(exc.status, exc.title, exc.detail, exc.errors)


@bp.errorhandler(Exception)
def _unexpected(exc: Exception) -> Any:
    current_app.logger.exception("unhandled error on a dashboard page")
    return _error_page(500, "Internal server error", "the error was logged", [])


def _error_page(status: int, title: str, detail: str, errors: list[tuple[str, str]]) -> Any:
    page = render_template("error.html", status=status, title=title, detail=detail, errors=errors)
    return page, status


# --- template filters (units stay in the column headings) ------------------------------------


@bp.app_template_filter("utc_time")
def format_utc(value: datetime | None) -> str:
    """``2031-04-02 17:05:09 UTC``; refuses naive times."""
    if value is None:
        return "—"
    if value.tzinfo is None:
        raise ValueError("naive datetime refused")
    return value.astimezone(UTC).strftime("%Y-%m-%d %H:%M:%S UTC")


@bp.app_template_filter("mjd")
def format_mjd(value: datetime | None) -> str:
    """The Modified Julian Date (UTC) to 1 s (five decimals)."""
    return "—" if value is None else f"MJD {mjd_utc(value):.5f}"


@bp.app_template_filter("utc_from_unix")
def utc_from_unix(value: float) -> datetime:
    """POSIX seconds as an aware UTC datetime."""
    return datetime.fromtimestamp(value, UTC)


@bp.app_template_filter("quantity")
def format_quantity(value: float | None) -> str:
    """Large values (frequencies in Hz) to the millihertz with separators, others to 6 digits."""
    if value is None:
        return "—"
    if abs(value) >= 1e5:
        return f"{value:,.3f}"
    return f"{value:.6g}"


@bp.app_template_filter("drift_rate")
def format_drift(value: float | None) -> str:
    """A drift rate in Hz/s with its sign, to the micro-hertz per second."""
    return "—" if value is None else f"{value:+.6f}"
