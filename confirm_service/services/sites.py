"""Sites and targets of the log."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

from sqlalchemy import select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, NotFound
from confirm_service.models import Site, Target

if TYPE_CHECKING:  # the request schemas are only types here; listing stays light to import
    from confirm_service.schemas.log import SiteIn, SiteUpdate, TargetIn, TargetUpdate


def _audit_values(model: Any) -> dict[str, Any]:
    return model.model_dump(mode="json", exclude_unset=True)


def create_site(session: Session, actor: Actor, data: SiteIn) -> Site:
    if session.execute(select(Site.id).where(Site.code == data.code)).first():
        raise Conflict(
            f"site {data.code!r} exists", [("code", "a site with this code exists")]
        ) from None
    values = data.model_dump(exclude={"receiver_bands_hz"})
    site = Site(**values, receiver_bands=[list(b) for b in data.receiver_bands_hz])
    session.add(site)
    try:
        session.flush()
    except IntegrityError:
        raise Conflict(
            f"site {data.code!r} exists", [("code", "a site with this code exists")]
        ) from None
    record(session, actor, "site.created", f"site:{site.code}", _audit_values(data))
    return site


def site_by_code(session: Session, code: str, field: str = "site") -> Site:
    site = session.execute(select(Site).where(Site.code == code)).scalar_one_or_none()
    if site is None:
        raise NotFound(f"no site {code!r}", [(field, f"unknown site {code!r}")])
    return site


def update_site(session: Session, actor: Actor, code: str, data: SiteUpdate) -> Site:
    site = site_by_code(session, code, "code")
    changes = data.model_dump(exclude_unset=True)
    if "receiver_bands_hz" in changes:
        site.receiver_bands = [list(b) for b in changes.pop("receiver_bands_hz") or []]
    for key, value in changes.items():
        setattr(site, key, value)
    session.flush()
    record(session, actor, "site.updated", f"site:{site.code}", _audit_values(data))
    return site


def list_sites(session: Session, after_id: int, limit: int) -> list[Site]:
    query = select(Site).where(Site.id > after_id).order_by(Site.id).limit(limit)
    return list(session.execute(query).scalars())


def all_sites(session: Session) -> list[Site]:
    return list(session.execute(select(Site).order_by(Site.id)).scalars())


def create_target(session: Session, actor: Actor, data: TargetIn) -> Target:
    if session.execute(select(Target.id).where(Target.name == data.name)).first():
        raise Conflict(
            f"target {data.name!r} exists", [("name", "a target with this name exists")]
        ) from None
    target = Target(**data.model_dump())
    session.add(target)
    try:
        session.flush()
    except IntegrityError:
        raise Conflict(
            f"target {data.name!r} exists", [("name", "a target with this name exists")]
        ) from None
    record(session, actor, "target.created", f"target:{target.name}", _audit_values(data))
    return target


def target_by_name(session: Session, name: str, field: str = "target") -> Target:
    target = session.execute(select(Target).where(Target.name == name)).scalar_one_or_none()
    if target is None:
        raise NotFound(f"no target {name!r}", [(field, f"unknown target {name!r}")])
    return target


def update_target(session: Session, actor: Actor, name: str, data: TargetUpdate) -> Target:
    target = target_by_name(session, name, "name")
    for key, value in data.model_dump(exclude_unset=True).items():
        setattr(target, key, value)
    session.flush()
    record(session, actor, "target.updated", f"target:{target.name}", _audit_values(data))
    return target


def list_targets(session: Session, after_id: int, limit: int) -> list[Target]:
    query = select(Target).where(Target.id > after_id).order_by(Target.id).limit(limit)
    return list(session.execute(query).scalars())
