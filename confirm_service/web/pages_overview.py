"""The first page: what needs a person now, counts by state and stage, search and the list."""

from __future__ import annotations

import csv
import io
from typing import Any

from flask import Response, abort, render_template, request, url_for
from pydantic import ValidationError

from confirm_service.schemas.queries import CandidateQuery
from confirm_service.services import attention, candidate_views
from confirm_service.services import sites as site_service
from confirm_service.states import CandidateState
from confirm_service.timeutil import mjd_utc, utc_now
from confirm_service.web import auth
from confirm_service.web.blueprint import bp, database

LIST_LIMIT = 50
EXPORT_LIMIT = 1000
STATES = tuple(state.value for state in CandidateState)
FILTERS = ("q", "state", "stage", "target", "site", "frequency_hz", "tolerance_hz")


def chosen_filters() -> dict[str, str]:
    """The filters and search terms of the query string that are set."""
    chosen = {name: request.args.get(name, "").strip() for name in FILTERS}
    return {name: value for name, value in chosen.items() if value}


def _query(filters: dict[str, str], limit: int) -> CandidateQuery:
    try:
        return CandidateQuery.model_validate(
            {**filters, "after": request.args.get("after", "0"), "limit": limit}
        )
    except ValidationError as exc:
        where = ", ".join(f"{e['loc'][0]}: {e['msg']}" for e in exc.errors(include_url=False))
        abort(400, description=f"the search was refused ({where})")


def _as_values(filters: dict[str, str]) -> dict[str, Any]:
    return dict(filters)


def _state_counts(by_state_stage: dict[tuple[str, str], int]) -> dict[str, int]:
    counts = dict.fromkeys(STATES, 0)
    for (state, _stage), number in by_state_stage.items():
        counts[state] = counts.get(state, 0) + number
    return counts


@bp.get("/")
@bp.get("")
@auth.requires_role(*auth.READ_ROLES)
def candidates() -> Any:
    """Attention first; then counts, the search form and the matching candidates."""
    filters = chosen_filters()
    query = _query(filters, LIST_LIMIT)
    with database().read() as session:
        needs = attention.attention_for(session, auth.current_actor(), utc_now())
        rows = candidate_views.list_candidates(session, query, LIST_LIMIT + 1)
        shown = [candidate_views.summary(session, row) for row in rows[:LIST_LIMIT]]
        by_state_stage = candidate_views.counts_by_state_and_stage(session)
        targets = candidate_views.targets_with_candidates(session)
        sites = [s.code for s in site_service.all_sites(session)]
    counts = _state_counts(by_state_stage)
    next_url = None
    if len(rows) > LIST_LIMIT:
        paged: dict[str, Any] = {**filters, "after": shown[-1].id}
        next_url = url_for(".candidates", **paged)
    stages = sorted({stage for _state, stage in by_state_stage})
    return render_template(
        "overview.html",
        needs=needs,
        candidates=shown,
        counts=counts,
        total=sum(counts.values()),
        by_state_stage=by_state_stage,
        filters=filters,
        states=list(counts),
        stages=stages,
        targets=targets,
        sites=sites,
        next_url=next_url,
        first_page=query.after == 0,
        export_url=url_for(".candidates_csv", **_as_values(filters)),
    )


CSV_COLUMNS = (
    "candidate_id",
    "state",
    "stage",
    "held",
    "target",
    "site",
    "barycentric_frequency_hz",
    "residual_drift_hz_s",
    "reference_time_utc",
    "reference_time_mjd",
    "reason_class",
    "updated_utc",
)


def _text_cell(value: str) -> str:
    """Text a spreadsheet would not run as a formula (OWASP "CSV Injection")."""
    return "'" + value if value[:1] in ("=", "+", "-", "@", "\t", "\r") else value


@bp.get("/candidates.csv")
@auth.requires_role(*auth.READ_ROLES)
def candidates_csv() -> Response:
    """The candidates matching the page's filters, as a CSV file (at most 1,000 rows)."""
    query = _query(chosen_filters(), EXPORT_LIMIT)
    with database().read() as session:
        rows = candidate_views.list_candidates(session, query, EXPORT_LIMIT)
        shown = [candidate_views.summary(session, row) for row in rows]
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")  # RFC 4180 line breaks
    writer.writerow(CSV_COLUMNS)
    for c in shown:
        writer.writerow(
            [
                c.id,
                c.state,
                _text_cell(c.stage),
                "yes" if c.held else "no",
                _text_cell(c.target or ""),
                _text_cell(c.site),
                repr(c.barycentric_frequency_hz),
                repr(c.residual_drift_hz_s),
                c.reference_time.isoformat(),
                f"{mjd_utc(c.reference_time):.6f}",
                _text_cell(c.reason_class or ""),
                c.updated_at.isoformat(),
            ]
        )
    response = Response(buffer.getvalue(), mimetype="text/csv")
    response.headers["Content-Disposition"] = 'attachment; filename="candidates.csv"'
    return response
