"""The coordinators' web pages: sign-in, the candidate list and each candidate's decision screen.

Plain HTML forms post back to the dashboard; each calls the same service function as the API,
inside one write transaction, so a refused form writes nothing. No JavaScript, no external assets.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from flask import (
    Blueprint,
    Response,
    abort,
    current_app,
    flash,
    g,
    redirect,
    render_template,
    request,
    url_for,
)
from flask.blueprints import BlueprintSetupState
from markupsafe import Markup
from pydantic import BaseModel, ValidationError
from sqlalchemy import func, select
from sqlalchemy.orm import Session
from werkzeug.exceptions import HTTPException

from confirm_service.actor import Actor
from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.db import Database
from confirm_service.dossier.plots import site_residual_panels
from confirm_service.errors import ServiceError
from confirm_service.models import Candidate, Target
from confirm_service.schemas.candidates import (
    CandidateOut,
    CommentIn,
    DecisionIn,
    HoldReleaseIn,
    SignOffIn,
)
from confirm_service.schemas.queries import CandidateQuery
from confirm_service.services import candidate_views
from confirm_service.services import decisions as decision_service
from confirm_service.services.protocols import protocol_of
from confirm_service.web import auth

bp = Blueprint(
    "dashboard",
    __name__,
    url_prefix="/dashboard",
    template_folder="templates",
    static_folder="static",
)

LIST_LIMIT = 50
STATES = ("open", "confirmed", "rejected", "withdrawn")
PUBLIC_ENDPOINTS = {"dashboard.sign_in", "dashboard.static"}


# --- set-up, guard, headers, errors ----------------------------------------------------------


@bp.record_once
def _configure(state: BlueprintSetupState) -> None:
    auth.configure_app(state.app)


def _database() -> Database:
    return current_app.extensions["confirm.db"]


@bp.before_request
def _require_sign_in() -> Any:
    if request.endpoint == "dashboard.static":
        return None
    if request.method == "POST":
        auth.check_csrf()
    if request.endpoint in PUBLIC_ENDPOINTS:
        return None
    if auth.load_signed_in_actor() is None:
        wanted = request.full_path.rstrip("?") if request.method == "GET" else None
        return redirect(url_for(".sign_in", next=auth.safe_next(wanted)))
    return None


@bp.after_request
def _no_store(response: Response) -> Response:
    if request.endpoint != "dashboard.static":
        response.headers["Cache-Control"] = "no-store"
    return response


@bp.context_processor
def _template_helpers() -> dict[str, Any]:
    return {
        "csrf_token": auth.csrf_token,
        "csrf_field": auth.CSRF_FIELD,
        "actor": _actor_or_none(),
        "caution": CANDIDATE_IS_NOT_A_DETECTION,
    }


def _actor_or_none() -> Actor | None:
    return g.get("actor")


@bp.errorhandler(HTTPException)
def _http_error(exc: HTTPException) -> Any:
    status = exc.code or 500
    return _error_page(status, exc.name, exc.description or "", [])


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


# --- sign-in ---------------------------------------------------------------------------------


@bp.route("/sign-in", methods=["GET", "POST"])
def sign_in() -> Any:
    """Paste an API token; its id is kept in the signed session cookie."""
    next_path = auth.safe_next(request.values.get("next"))
    if request.method == "GET":
        return render_template("sign_in.html", next_path=next_path, error=None)
    token = auth.sign_in(request.form.get("token", ""))
    if token is None:
        error = "This token is unknown or revoked. Paste the whole token, starting with cs1_."
        page = render_template("sign_in.html", next_path=next_path, error=error)
        return page, 422
    flash(f"Signed in as {token.name} (role {token.role}).", "success")
    return redirect(next_path or url_for(".candidates"))


@bp.post("/sign-out")
def sign_out() -> Any:
    auth.sign_out()
    flash("Signed out.", "success")
    return redirect(url_for(".sign_in"))


# --- the candidate list ----------------------------------------------------------------------


def _list_filters() -> dict[str, str]:
    """The state, stage and target filters of the query string that are set."""
    chosen = {name: request.args.get(name, "").strip() for name in ("state", "stage", "target")}
    return {name: value for name, value in chosen.items() if value}


def _state_counts(session: Session) -> dict[str, int]:
    rows = session.execute(select(Candidate.state, func.count()).group_by(Candidate.state)).all()
    counts = dict.fromkeys(STATES, 0)
    counts.update({state: int(number) for state, number in rows})
    return counts


def _known_stages(session: Session) -> list[str]:
    return list(
        session.execute(select(Candidate.stage).distinct().order_by(Candidate.stage)).scalars()
    )


def _known_targets(session: Session) -> list[str]:
    names = (
        select(Target.name)
        .join(Candidate, Candidate.target_id == Target.id)
        .distinct()
        .order_by(Target.name)
    )
    return list(session.execute(names).scalars())


@bp.get("/")
@bp.get("")
@auth.requires_role(*auth.READ_ROLES)
def candidates() -> Any:
    """Candidates, filtered by state, stage and target, with the number in each state."""
    filters = _list_filters()
    try:
        query = CandidateQuery.model_validate(
            {**filters, "after": request.args.get("after", "0"), "limit": LIST_LIMIT}
        )
    except ValidationError:
        abort(400, description="the page cursor 'after' must be a whole number, 0 or more")
    with _database().read() as session:
        rows = candidate_views.list_candidates(session, query, LIST_LIMIT + 1)
        shown = [candidate_views.summary(session, row) for row in rows[:LIST_LIMIT]]
        counts = _state_counts(session)
        stages = _known_stages(session)
        targets = _known_targets(session)
    next_url = None
    if len(rows) > LIST_LIMIT:
        next_url = url_for(".candidates", **filters, after=shown[-1].id)
    return render_template(
        "candidates.html",
        candidates=shown,
        counts=counts,
        total=sum(counts.values()),
        filters=filters,
        states=list(counts),
        stages=stages,
        targets=targets,
        next_url=next_url,
    )


# --- the decision screen ---------------------------------------------------------------------


@dataclass
class FormProblem:
    """Why a form was refused: a message per field, messages for the form, what was typed."""

    form: str
    detail: str
    fields: dict[str, str] = field(default_factory=dict)
    general: list[str] = field(default_factory=list)
    values: dict[str, str] = field(default_factory=dict)

    def add(self, name: str, message: str, field_names: tuple[str, ...]) -> None:
        if name in field_names and name not in self.fields:
            self.fields[name] = message
        else:
            self.general.append(f"{name}: {message}" if name not in ("", "body") else message)


FORM_FIELDS = {
    "signoff": ("verdict", "rationale"),
    "decision": ("decision", "rationale"),
    "hold": ("rationale",),
    "comment": ("text",),
}
LANDING = {"signoff": "signoffs", "decision": "summary", "hold": "summary", "comment": "comments"}
"""Where the page opens after each form succeeds: the section showing what was recorded."""
FORM_TITLES = {
    "signoff": "Sign-off",
    "decision": "Decision",
    "hold": "Release of the hold",
    "comment": "Comment",
}


@dataclass
class SignoffRequirement:
    """One sign-off rule of the current stage and the approvals recorded towards it."""

    role: str
    count: int
    approved_by: list[str]
    objected_by: list[str]


def _signoff_requirements(
    session: Session, candidate: Candidate, record: CandidateOut
) -> tuple[str, list[SignoffRequirement]]:
    """The stage's description and, per rule, the latest sign-off of each person since entry.

    Display only: the protocol machine decides; this mirrors its rule (distinct persons of the
    rule's role whose latest sign-off after the stage was entered approves).
    """
    protocol = protocol_of(session, candidate)
    stage = next((s for s in protocol.model.stages if s.name == candidate.stage), None)
    if stage is None:
        return "", []
    requirements = []
    for rule in stage.signoffs:
        latest: dict[str, bool] = {}
        for signoff in record.signoffs:
            relevant = signoff.stage == stage.name and signoff.role == rule.role
            if relevant and signoff.at >= candidate.stage_entered_at:
                latest[signoff.person] = signoff.approve
        requirements.append(
            SignoffRequirement(
                role=rule.role,
                count=rule.count,
                approved_by=sorted(p for p, ok in latest.items() if ok),
                objected_by=sorted(p for p, ok in latest.items() if not ok),
            )
        )
    return stage.description, requirements


@dataclass
class PlotSet:
    """Inline SVG panels per site and the observed-against-predicted rows behind them."""

    svg_by_site: dict[str, Markup]
    comparisons: list[dict[str, Any]]
    unavailable: str | None = None


def _site_panels(comparisons: list[dict[str, Any]]) -> dict[str, Markup]:
    return {site: Markup(svg) for site, svg in site_residual_panels(comparisons).items()}


def _observed_and_predicted(session: Session, candidate: Candidate) -> PlotSet:
    """Each linked detection against the frequency and drift predicted for its site and time.

    Read only: the dossier's track computation without the dossier's checkpoint. A failure here
    must not hide the rest of the decision screen: it is logged and named on the page.
    """
    from confirm_service.dossier.build import predicted_tracks

    try:
        _, comparisons = predicted_tracks(session, candidate)
        for row in comparisons:
            row["time_utc"] = datetime.fromisoformat(row["time"])
        panels = _site_panels(comparisons)
    except Exception as exc:  # shown on the page and logged
        current_app.logger.exception("plots of candidate %s failed", candidate.id)
        return PlotSet({}, [], f"the plots could not be drawn ({type(exc).__name__}: {exc})")
    return PlotSet(panels, comparisons)


def render_candidate(
    candidate_id: int, problem: FormProblem | None = None, status: int = 200
) -> Any:
    """The decision screen of one candidate, with a refused form's messages if any."""
    with _database().read() as session:
        record = candidate_views.detail(session, candidate_id)
        candidate = candidate_views.get_candidate(session, candidate_id)
        stage_description, requirements = _signoff_requirements(session, candidate, record)
        plots = _observed_and_predicted(session, candidate)
    actor = auth.current_actor()
    page = render_template(
        "candidate.html",
        c=record,
        stage_description=stage_description,
        requirements=requirements,
        plots=plots,
        problem=problem,
        form_titles=FORM_TITLES,
        can={
            "signoff": auth.may(actor, auth.SIGNOFF_ROLES),
            "decide": auth.may(actor, auth.DECISION_ROLES),
            "hold": auth.may(actor, auth.HOLD_ROLES),
            "comment": auth.may(actor, auth.COMMENT_ROLES),
        },
    )
    return page, status


@bp.get("/candidates/<int:candidate_id>")
@auth.requires_role(*auth.READ_ROLES)
def candidate(candidate_id: int) -> Any:
    return render_candidate(candidate_id)


def _typed(form: str) -> dict[str, str]:
    """The form's fields as typed, surrounding white space removed."""
    return {name: request.form.get(name, "").strip() for name in FORM_FIELDS[form]}


def _message_of(error: Any) -> str:
    kind = error["type"]
    if kind in ("missing", "string_too_short"):
        return "is required"
    if kind == "string_too_long":
        return f"must be at most {error['ctx']['max_length']:,} characters"
    return str(error["msg"])


def _validate(
    form: str,
    schema: type[BaseModel],
    data: dict[str, Any],
    typed: dict[str, str],
    refused: dict[str, str],
) -> BaseModel | FormProblem:
    """``data`` as ``schema``, or the problem naming each refused field (``refused`` too)."""
    problem = FormProblem(form, "", values=typed)
    for name, message in refused.items():
        problem.add(name, message, FORM_FIELDS[form])
    try:
        parsed = schema.model_validate({k: v for k, v in data.items() if v not in ("", None)})
    except ValidationError as exc:
        for error in exc.errors(include_url=False):
            name = str(error["loc"][0]) if error["loc"] else "body"
            problem.add(name, _message_of(error), FORM_FIELDS[form])
        parsed = None
    if parsed is None or problem.fields or problem.general:
        count = len(problem.fields) + len(problem.general)
        problem.detail = f"{count} field(s) refused; nothing was written"
        return problem
    return parsed


def _submit(
    candidate_id: int,
    form: str,
    validated: BaseModel | FormProblem,
    act: Callable[[Session, Actor, Any], str],
) -> Any:
    """Run ``act`` in one write transaction; on success flash its message and show the page."""
    if isinstance(validated, FormProblem):
        return render_candidate(candidate_id, validated, 422)
    try:
        with _database().write() as session:
            message = act(session, auth.current_actor(), validated)
    except ServiceError as exc:
        problem = FormProblem(form, f"{exc.detail}; nothing was written", values=_typed(form))
        for name, text in exc.errors:
            problem.add(name, text, FORM_FIELDS[form])
        return render_candidate(candidate_id, problem, exc.status)
    flash(message, "success")
    return redirect(url_for(".candidate", candidate_id=candidate_id, _anchor=LANDING[form]))


VERDICTS = {"approve": True, "object": False}


@bp.post("/candidates/<int:candidate_id>/signoffs")
@auth.requires_role(*auth.SIGNOFF_ROLES)
def signoff(candidate_id: int) -> Any:
    """Approve or object to the current stage, as the person the signed-in token stands for."""
    typed = _typed("signoff")
    refused = {} if typed["verdict"] in VERDICTS else {"verdict": "choose approve or object"}
    data = {"approve": VERDICTS.get(typed["verdict"]), "rationale": typed["rationale"]}
    validated = _validate("signoff", SignOffIn, data, typed, refused)

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
    typed = _typed("decision")
    validated = _validate("decision", DecisionIn, typed, typed, {})

    def act(session: Session, actor: Actor, body: DecisionIn) -> str:
        decision_service.decide(session, actor, candidate_id, body.decision, body.rationale)
        return f"The candidate is now {body.decision}."

    return _submit(candidate_id, "decision", validated, act)


@bp.post("/candidates/<int:candidate_id>/release-hold")
@auth.requires_role(*auth.HOLD_ROLES)
def release_hold(candidate_id: int) -> Any:
    """Let a held candidate continue after review of its holds."""
    typed = _typed("hold")
    validated = _validate("hold", HoldReleaseIn, typed, typed, {})

    def act(session: Session, actor: Actor, body: HoldReleaseIn) -> str:
        decision_service.release_hold(session, actor, candidate_id, body.rationale)
        return "The hold was released and the candidate re-evaluated."

    return _submit(candidate_id, "hold", validated, act)


@bp.post("/candidates/<int:candidate_id>/comments")
@auth.requires_role(*auth.COMMENT_ROLES)
def comment(candidate_id: int) -> Any:
    typed = _typed("comment")
    validated = _validate("comment", CommentIn, typed, typed, {})

    def act(session: Session, actor: Actor, body: CommentIn) -> str:
        decision_service.add_comment(session, actor, candidate_id, body.text)
        return "Your comment was added."

    return _submit(candidate_id, "comment", validated, act)


@bp.get("/candidates/<int:candidate_id>/dossier.json")
@auth.requires_role(*auth.READ_ROLES)
def dossier(candidate_id: int) -> Response:
    """The candidate's dossier (as the API gives it), as a file to keep."""
    from confirm_service.dossier.build import build_dossier

    settings = current_app.extensions["confirm.settings"]
    with _database().write() as session:  # the dossier takes a signed checkpoint
        document = build_dossier(session, settings, candidate_id)
    text = json.dumps(document, indent=1, sort_keys=True, allow_nan=False)
    response = Response(text, mimetype="application/json")
    filename = f"candidate-{candidate_id}-dossier.json"
    response.headers["Content-Disposition"] = f'attachment; filename="{filename}"'
    return response
