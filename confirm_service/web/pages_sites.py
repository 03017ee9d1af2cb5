"""Sites: where they are, their limits, and whether open candidates' targets are up now."""

from __future__ import annotations

from typing import Any

from flask import current_app, render_template

from confirm_service.services import observing_views
from confirm_service.services import sites as site_service
from confirm_service.timeutil import utc_now
from confirm_service.web import auth
from confirm_service.web.blueprint import bp, database


def _visibility(session: Any, now: Any, code: str | None) -> tuple[list[Any], str | None]:
    try:
        return observing_views.visibility_now(session, now, code), None
    except Exception as exc:  # the rest of the page stands; the failure is logged and named
        current_app.logger.exception("visibility for the sites page failed")
        return [], f"visibility could not be computed ({type(exc).__name__}: {exc})"


@bp.get("/sites")
@auth.requires_role(*auth.READ_ROLES)
def sites() -> Any:
    """Every site with its position and limits, and what is observable from it now."""
    now = utc_now()
    with database().read() as session:
        rows = site_service.all_sites(session)
        visibility, unavailable = _visibility(session, now, None)
    return render_template(
        "sites.html", sites=rows, visibility=visibility, unavailable=unavailable, now=now
    )


@bp.get("/sites/<code>")
@auth.requires_role(*auth.READ_ROLES)
def site(code: str) -> Any:
    """One site: position, limits, contacts and open candidates' targets now and next."""
    now = utc_now()
    with database().read() as session:
        row = site_service.site_by_code(session, code, "code")
        visibility, unavailable = _visibility(session, now, code)
    return render_template(
        "site.html", site=row, visibility=visibility, unavailable=unavailable, now=now
    )
