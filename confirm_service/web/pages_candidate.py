"""One candidate's decision screen: checklist, history, scans and hits, follow-ups and reports,
pictures, comments, and the sign-off and decision forms (each calls the API's service)."""

from __future__ import annotations

import json
from typing import Any

from flask import Response, current_app, render_template, url_for
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.schemas.candidates import (
    CommentIn,
    DecisionIn,
    HoldReleaseIn,
    ReopenIn,
    SignOffIn,
)
from confirm_service.services import attention, candidate_views, observing_views
from confirm_service.services import decisions as decision_service
from confirm_service.timeutil import utc_now
from confirm_service.web import auth, plots
from confirm_service.web.blueprint import bp, database, settings
from confirm_service.web.forms import FormProblem, submit, typed, validate

FORM_FIELDS = {
    "signoff": ("verdict", "rationale"),
    "decision": ("decision", "rationale"),
    "hold": ("rationale",),
    "comment": ("text",),
    "reopen": ("rationale",),
    "retract": ("rationale",),
}
LANDING = {
    "signoff": "signoffs",
    "decision": "summary",
    "hold": "summary",
    "comment": "comments",
    "reopen": "summary",
    "retract": "summary",
}
"""Where the page opens after each form succeeds: the section showing what was recorded."""
FORM_TITLES = {
    "signoff": "Sign-off",
    "decision": "Decision",
    "hold": "Release of the hold",
    "comment": "Comment",
    "reopen": "Reopening",
    "retract": "Retraction",
}
VERDICTS = {"approve": True, "object": False}
PLOT_NAMES = ("frequency", "drift", "elevation")
SVG_POLICY = "default-src 'none'; style-src 'unsafe-inline'"
"""matplotlib's SVG styles its own elements inline; the picture loads nothing else."""


def _scans(record: Any) -> list[dict[str, Any]]:
    """The linked scans, each with its hits, in time order."""
    scans: dict[int, dict[str, Any]] = {}
    for d in record.detections:
        scan = scans.setdefault(
            d.observation,
            {
                "id": d.observation,
                "site": d.site,
                "start": d.start,
                "on_source": d.on_source,
                "hits": [],
            },
        )
        scan["hits"].append(d)
    return sorted(scans.values(), key=lambda s: s["start"])


def _tracks_or_problem(session: Session, candidate_id: int) -> tuple[Any, str | None]:
    """The hits against their predictions, or why they could not be computed (logged)."""
    try:
        return observing_views.candidate_tracks(session, candidate_id), None
    except Exception as exc:  # shown on the page and logged; the rest of the page stands
        current_app.logger.exception("tracks of candidate %s failed", candidate_id)
        return None, f"the predictions could not be computed ({type(exc).__name__}: {exc})"


def render_candidate(
    candidate_id: int, problem: FormProblem | None = None, status: int = 200
) -> Any:
    """The decision screen of one candidate, with a refused form's messages if any."""
    with database().read() as session:
        record = candidate_views.detail(session, candidate_id)
        candidate = candidate_views.get_candidate(session, candidate_id)
        progress = attention.stage_progress(session, candidate)
        tracks, unavailable = _tracks_or_problem(session, candidate_id)
    actor = auth.current_actor()
    signed_this_stage = any(
        s.stage == record.stage and s.person == actor.name for s in record.signoffs
    )
    page = render_template(
        "candidate.html",
        c=record,
        progress=progress,
        scans=_scans(record),
        tracks=tracks,
        unavailable=unavailable,
        problem=problem,
        form_titles=FORM_TITLES,
        signed_this_stage=signed_this_stage,
        now=utc_now(),
        plot_urls={
            name: url_for(".candidate_plot", candidate_id=candidate_id, name=name)
            for name in PLOT_NAMES
        },
        can={
            "signoff": auth.may(actor, auth.SIGNOFF_ROLES) and actor.token_id is not None,
            "decide": auth.may(actor, auth.DECISION_ROLES),
            "hold": auth.may(actor, auth.HOLD_ROLES),
            "comment": auth.may(actor, auth.COMMENT_ROLES),
            "reopen": auth.may(actor, auth.REOPEN_ROLES),
        },
        reopening=_reopening(record),
    )
    return page, status


def _reopening(record: Any) -> str | None:
    """Which way a closed candidate can be opened again: ``reopen`` a rejection, ``retract`` a
    person's withdrawal; None when open or passed (the service holds the rule and refuses)."""
    if record.state == "rejected":
        return "reopen"
    if record.state == "withdrawn" and record.reason_class == "person":
        return "retract"
    return None


@bp.get("/candidates/<int:candidate_id>")
@auth.requires_role(*auth.READ_ROLES)
def candidate(candidate_id: int) -> Any:
    return render_candidate(candidate_id)


@bp.get("/candidates/<int:candidate_id>/plots/<name>.svg")
@auth.requires_role(*auth.READ_ROLES)
def candidate_plot(candidate_id: int, name: str) -> Response:
    """One picture of the candidate as SVG: ``frequency``, ``drift`` or ``elevation``."""
    from werkzeug.exceptions import NotFound

    if name not in PLOT_NAMES:
        raise NotFound(f"there is no picture called {name!r}")
    with database().read() as session:
        if name == "elevation":
            record = candidate_views.detail(session, candidate_id)
            if record.target is None:
                raise NotFound("the candidate has no target")
            tracks = observing_views.elevation_tracks(session, record.target, utc_now())
            svg = plots.elevation_at_sites(record.target, tracks)
        else:
            data = observing_views.candidate_tracks(session, candidate_id)
            draw = (
                plots.frequency_against_time if name == "frequency" else plots.drift_against_earth
            )
            svg = draw(data)
    response = Response(svg, mimetype="image/svg+xml")
    response.headers["Content-Security-Policy"] = SVG_POLICY
    response.headers["Cache-Control"] = "private, max-age=300"
    return response


def _submit(candidate_id: int, form: str, validated: Any, act: Any) -> Any:
    return submit(
        form,
        FORM_FIELDS[form],
        validated,
        act,
        lambda problem, status: render_candidate(candidate_id, problem, status),
        url_for(".candidate", candidate_id=candidate_id, _anchor=LANDING[form]),
    )


@bp.post("/candidates/<int:candidate_id>/signoffs")
@auth.requires_role(*auth.SIGNOFF_ROLES)
def signoff(candidate_id: int) -> Any:
    """Approve or object to the current stage, as the person signed in."""
    values = typed(FORM_FIELDS["signoff"])
    refused = {} if values["verdict"] in VERDICTS else {"verdict": "choose approve or object"}
    data = {"approve": VERDICTS.get(values["verdict"]), "rationale": values["rationale"]}
    validated = validate("signoff", FORM_FIELDS["signoff"], SignOffIn, data, values, refused)

    def act(session: Session, actor: Actor, body: SignOffIn) -> str:
        row = decision_service.add_signoff(
            session, actor, candidate_id, body.approve, body.rationale
        )
        verdict = "approval" if row.approve else "objection"
        return f"Your {verdict} of stage {row.stage!r} was recorded as {row.person}."

    return _submit(candidate_id, "signoff", validated, act)


@bp.post("/candidates/<int:candidate_id>/decision")
@auth.requires_role(*auth.DECISION_ROLES)
def decision(candidate_id: int) -> Any:
    """Reject or withdraw the candidate, with a rationale."""
    values = typed(FORM_FIELDS["decision"])
    validated = validate("decision", FORM_FIELDS["decision"], DecisionIn, values, values, {})

    def act(session: Session, actor: Actor, body: DecisionIn) -> str:
        decision_service.decide(session, actor, candidate_id, body.decision, body.rationale)
        return f"The candidate is now {body.decision}."

    return _submit(candidate_id, "decision", validated, act)


@bp.post("/candidates/<int:candidate_id>/release-hold")
@auth.requires_role(*auth.HOLD_ROLES)
def release_hold(candidate_id: int) -> Any:
    """Let a held candidate continue after review of its holds."""
    values = typed(FORM_FIELDS["hold"])
    validated = validate("hold", FORM_FIELDS["hold"], HoldReleaseIn, values, values, {})

    def act(session: Session, actor: Actor, body: HoldReleaseIn) -> str:
        decision_service.release_hold(session, actor, candidate_id, body.rationale)
        return "The hold was released and the candidate re-evaluated."

    return _submit(candidate_id, "hold", validated, act)


@bp.post("/candidates/<int:candidate_id>/reopen")
@auth.requires_role(*auth.REOPEN_ROLES)
def reopen(candidate_id: int) -> Any:
    """Reopen a rejected candidate with a rationale; it is re-evaluated at once."""
    values = typed(FORM_FIELDS["reopen"])
    validated = validate("reopen", FORM_FIELDS["reopen"], ReopenIn, values, values, {})

    def act(session: Session, actor: Actor, body: ReopenIn) -> str:
        candidate = decision_service.reopen(session, actor, candidate_id, body.rationale)
        return f"The candidate was reopened and re-evaluated: it is {candidate.state}."

    return _submit(candidate_id, "reopen", validated, act)


@bp.post("/candidates/<int:candidate_id>/retract")
@auth.requires_role(*auth.REOPEN_ROLES)
def retract(candidate_id: int) -> Any:
    """Retract a person's decision with a rationale; the candidate is re-evaluated at once."""
    values = typed(FORM_FIELDS["retract"])
    validated = validate("retract", FORM_FIELDS["retract"], ReopenIn, values, values, {})

    def act(session: Session, actor: Actor, body: ReopenIn) -> str:
        candidate = decision_service.retract(session, actor, candidate_id, body.rationale)
        return (
            f"The decision was retracted and the candidate re-evaluated: it is {candidate.state}."
        )

    return _submit(candidate_id, "retract", validated, act)


@bp.post("/candidates/<int:candidate_id>/comments")
@auth.requires_role(*auth.COMMENT_ROLES)
def comment(candidate_id: int) -> Any:
    values = typed(FORM_FIELDS["comment"])
    validated = validate("comment", FORM_FIELDS["comment"], CommentIn, values, values, {})

    def act(session: Session, actor: Actor, body: CommentIn) -> str:
        decision_service.add_comment(session, actor, candidate_id, body.text)
        return "Your comment was added."

    return _submit(candidate_id, "comment", validated, act)


@bp.get("/candidates/<int:candidate_id>/dossier.json")
@auth.requires_role(*auth.READ_ROLES)
def dossier(candidate_id: int) -> Response:
    """The candidate's dossier (as the API gives it), as a file to keep."""
    from confirm_service.dossier.build import build_dossier

    with database().write() as session:  # the dossier takes a signed checkpoint
        document = build_dossier(session, settings(), candidate_id)
    text = json.dumps(document, indent=1, sort_keys=True, allow_nan=False)
    response = Response(text, mimetype="application/json")
    filename = f"candidate-{candidate_id}-dossier.json"
    response.headers["Content-Disposition"] = f'attachment; filename="{filename}"'
    return response
