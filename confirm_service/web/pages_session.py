"""Sign-in (a person's name and password, or a machine's API token) and sign-out."""

from __future__ import annotations

from typing import Any

from flask import flash, redirect, render_template, request, url_for

from confirm_service.web import auth
from confirm_service.web.blueprint import bp

LOCKED = (
    "This account is locked after repeated wrong passwords. Wait 15 minutes or ask an "
    "administrator (confirm-service user unlock NAME)."
)
WRONG = "The user name or the password is wrong."
BAD_TOKEN = "This token is unknown or revoked. Paste the whole token, starting with cs1_."
NOTHING = "Give your user name and password, or paste an API token."


def _page(next_path: str | None, error: str | None, field: str, status: int) -> Any:
    username = request.form.get("username", "") if error else ""
    page = render_template(
        "sign_in.html", next_path=next_path, error=error, error_field=field, username=username
    )
    return page, status


@bp.route("/sign-in", methods=["GET", "POST"])
def sign_in() -> Any:
    """A person signs in with a name and password; a machine may paste its API token."""
    next_path = auth.safe_next(request.values.get("next"))
    if request.method == "GET":
        return _page(next_path, None, "", 200)
    secret = request.form.get("token", "").strip()
    username = request.form.get("username", "").strip()
    password = request.form.get("password", "")
    if secret:
        actor = auth.sign_in(secret)
        if actor is None:
            return _page(next_path, BAD_TOKEN, "token", 422)
    elif username and password:
        result = auth.sign_in_person(username, password)
        if result.actor is None:
            return _page(next_path, LOCKED if result.locked else WRONG, "password", 422)
        actor = result.actor
    else:
        return _page(next_path, NOTHING, "username", 422)
    flash(f"Signed in as {actor.name} (role {actor.role}).", "success")
    return redirect(next_path or url_for(".candidates"))


@bp.post("/sign-out")
def sign_out() -> Any:
    auth.sign_out()
    flash("Signed out.", "success")
    return redirect(url_for(".sign_in"))
