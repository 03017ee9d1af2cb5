"""``confirm-service candidates list|show|reopen|retract``: tables and decisions."""

from __future__ import annotations

import click

from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.cli import main
from confirm_service.cli.context import open_database
from confirm_service.schemas.queries import CandidateQuery
from confirm_service.services import candidate_views as views
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_and_mjd


def _value(value: float | None, unit: str | None) -> str:
    if value is None:
        return "—"
    text = f"{value:,.3f}" if abs(value) >= 1e5 else f"{value:.6g}"
    return f"{text} {unit}" if unit else text


@main.group("candidates")
def candidates_group() -> None:
    """Candidates under confirmation."""


@candidates_group.command("list")
@click.option("--state", default=None, type=click.Choice([state.value for state in CandidateState]))
@click.option("--stage", default=None)
@click.option("--target", default=None, help="Exact target name.")
@click.option("--site", default=None, help="A site code where the candidate has hits.")
@click.option(
    "--search", "q", default=None, help="A candidate id, part of a target name, or a site code."
)
@click.option(
    "--frequency-hz", type=float, default=None, help="Barycentric or any linked hit's frequency."
)
@click.option(
    "--tolerance-hz", type=float, default=None, help="± around --frequency-hz (default 1000)."
)
@click.option("--after", default=0, type=click.IntRange(0), help="Only candidates after this id.")
@click.option("--limit", default=100, show_default=True, type=click.IntRange(1, 1000))
def list_candidates(**filters: object) -> None:
    """One line per candidate (the same filters and search as the web page and the API)."""
    from confirm_service.cli.context import validated
    from confirm_service.timeutil import mjd_utc

    query = validated(CandidateQuery, filters, writes=False)
    database = open_database()
    with database.read() as session:
        rows = [
            views.summary(session, c) for c in views.list_candidates(session, query, query.limit)
        ]
    click.echo(
        f"{'id':>5}  {'state':<10} {'stage':<18} {'target':<14} {'site':<6} "
        f"{'barycentric Hz':>20} {'residual Hz/s':>14}  {'reference UTC':<19} {'MJD':>11}  reason"
    )
    for c in rows:
        click.echo(
            f"{c.id:>5}  {c.state:<10} {c.stage:<18} {c.target or '—':<14} {c.site:<6} "
            f"{c.barycentric_frequency_hz:>20,.3f} {c.residual_drift_hz_s:>+14.5f}  "
            f"{c.reference_time:%Y-%m-%d %H:%M:%S} {mjd_utc(c.reference_time):>11.5f}  "
            f"{c.reason_class or ''}"
        )
    if len(rows) == query.limit:
        click.echo(f"more may follow: add --after {rows[-1].id}", err=True)


@candidates_group.command("show")
@click.argument("candidate_id", type=int)
def show(candidate_id: int) -> None:
    """Everything about one candidate: checks with measured and expected values, history.

    A read: the caution is shown where a decision is made (reopen, retract, the decision screen,
    the dossier), not here."""
    database = open_database()
    with database.read() as session:
        c = views.detail(session, candidate_id)
    click.echo(
        f"candidate {c.id}: {c.state} at stage {c.stage!r}; target {c.target}, "
        f"found at {c.site} {utc_and_mjd(c.reference_time)}"
    )
    click.echo(f"protocol {c.protocol.name} sha256 {c.protocol.sha256}")
    click.echo(
        f"barycentric frequency {c.barycentric_frequency_hz:,.3f} Hz, residual drift "
        f"{c.residual_drift_hz_s:+.6f} Hz/s"
    )
    if c.held:
        click.echo(f"HELD: {c.hold_reason}")
    if c.reason:
        click.echo(f"reason: {c.reason}")
    click.echo("")
    click.echo(
        f"{'check':<20} {'outcome':<15} {'measured':>22} {'expected':>22} {'tolerance':>16}  reason"
    )
    for k in c.checks:
        click.echo(
            f"{k.kind:<20} {k.outcome:<15} {_value(k.measured, k.unit):>22} "
            f"{_value(k.expected, k.unit):>22} {_value(k.tolerance, k.unit):>16}  "
            f"{k.reason}"
        )
    click.echo("")
    click.echo("linked detections:")
    for d in c.detections:
        click.echo(
            f"  {d.id:>8} {d.site:<6} {utc_and_mjd(d.start)} {d.frequency_hz:>20,.3f} Hz "
            f"{d.drift_hz_s:+.5f} Hz/s SNR {d.snr:.1f} ({d.role})"
        )
    click.echo("history:")
    for h in c.history:
        click.echo(
            f"  {utc_and_mjd(h.at)} {h.from_stage or '—'} → {h.to_stage} "
            f"[{h.to_state}] by {h.actor}: {h.reason}"
        )
    for s in c.signoffs:
        click.echo(
            f"  sign-off {s.stage}: {s.person} ({s.role}) "
            f"{'approves' if s.approve else 'objects'}: {s.rationale}"
        )


def _reopen_command(verb: str, candidate_id: int, rationale: str) -> None:
    """``reopen`` or ``retract``, as the API does; prints the state the re-evaluation left."""
    from confirm_service.cli.context import cli_actor, validated
    from confirm_service.schemas.candidates import ReopenIn
    from confirm_service.services import decisions

    data = validated(ReopenIn, {"rationale": rationale})
    database = open_database()
    act = decisions.reopen if verb == "reopen" else decisions.retract
    with database.write() as session:
        act(session, cli_actor("coordinator"), candidate_id, data.rationale)
    with database.read() as session:
        c = views.detail(session, candidate_id)
    click.echo(f"candidate {c.id}: {c.state} at stage {c.stage!r}")
    if c.held:
        click.echo(f"HELD: {c.hold_reason}")
    click.echo("CAUTION: " + CANDIDATE_IS_NOT_A_DETECTION)


@candidates_group.command("reopen")
@click.argument("candidate_id", type=int)
@click.option("--rationale", required=True, help="Why the rejection is reopened (audited).")
def reopen(candidate_id: int, rationale: str) -> None:
    """Reopen a rejected candidate; it is re-evaluated, its failed checks then hold it."""
    _reopen_command("reopen", candidate_id, rationale)


@candidates_group.command("retract")
@click.argument("candidate_id", type=int)
@click.option("--rationale", required=True, help="Why the decision is retracted (audited).")
def retract(candidate_id: int, rationale: str) -> None:
    """Retract a person's decision (rejected or withdrawn); the candidate is re-evaluated."""
    _reopen_command("retract", candidate_id, rationale)
