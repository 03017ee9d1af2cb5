"""Doppler predictions and visibility windows over HTTP."""

from __future__ import annotations

from flask import Blueprint, Response

from confirm_service.api.common import READ_ROLES, database, json_response, parse_query, roles
from confirm_service.api.spec import documented
from confirm_service.schemas.predictions import NextWindows, PredictionResult, VisibilityResult
from confirm_service.schemas.sky import PredictionQuery, VisibilityQuery
from confirm_service.services import sky

bp = Blueprint("physics", __name__, url_prefix="/api/v1")


@bp.get("/predictions")
@documented(
    "Doppler quantities of a detection; with to_site/to_time, the signal expected there",
    query=PredictionQuery,
    response=PredictionResult,
    error_statuses=(401, 403, 404, 422),
    tag="physics",
)
@roles(*READ_ROLES)
def predictions() -> Response:
    q = parse_query(PredictionQuery)
    with database().read() as session:
        site = sky.resolve_site(session, q.site, q.site_lat, q.site_lon, q.site_height)
        target = sky.resolve_target(session, q.target, q.ra, q.dec)
        to_site = None
        if q.to_site or q.to_site_lat is not None:
            to_site = sky.resolve_site(
                session, q.to_site, q.to_site_lat, q.to_site_lon, q.to_site_height, "to_site"
            )
    result = sky.predict(
        site,
        target,
        q.time,
        q.observed_frequency_hz,
        q.observed_drift_hz_s,
        q.drift_uncertainty_hz_s,
        to_site,
        q.to_time,
    )
    return json_response(result)


@bp.get("/visibility")
@documented(
    "Windows when a target is above the site's minimum elevation and clear of the Sun; "
    "without a site, the next windows at every registered site",
    query=VisibilityQuery,
    response=VisibilityResult | NextWindows,
    error_statuses=(401, 403, 404, 422),
    tag="physics",
)
@roles(*READ_ROLES)
def visibility() -> Response:
    q = parse_query(VisibilityQuery)
    with database().read() as session:
        target = sky.resolve_target(session, q.target, q.ra, q.dec)
        if not q.site and q.site_lat is None:
            return json_response(sky.next_windows_everywhere(session, target, q.from_, q.count))
        site = sky.resolve_site(session, q.site, q.site_lat, q.site_lon, q.site_height)
    return json_response(
        sky.visibility(site, target, q.from_, q.days, q.min_elevation_deg, q.sun_avoidance_deg)
    )
