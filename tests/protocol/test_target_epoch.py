"""One rule for a target's epoch: its position and proper motion refer to the catalogue epoch
it was registered with (J2000.0 when none); the protocol's checks, the API's predictions and the
demo all follow it, and the API document says so."""

from __future__ import annotations

from datetime import UTC, datetime

from astropy.time import Time

from confirm_service.models import Target
from confirm_service.protocol import TargetFact, default_physics_context, target_coord_of
from confirm_service.services.facts import target_fact

EPOCH = datetime(2016, 1, 1, tzinfo=UTC)


def test_checks_move_the_target_from_its_registered_epoch():
    row = Target(
        name="Kestrel-7",
        ra_deg=201.365,
        dec_deg=-4.42,
        pm_ra_mas_yr=-12.5,
        pm_dec_mas_yr=4.1,
        parallax_mas=38.2,
        epoch=EPOCH,
    )
    fact = target_fact(row)
    assert fact.epoch == EPOCH
    coord = default_physics_context().target(fact)
    # J2000.0 is JD 2451545.0 TT (IAU 1976 / 2000 definition of the standard epoch)
    assert abs((coord.obstime - Time(EPOCH)).to_value("s")) < 1e-3
    default = target_coord_of(TargetFact("Lumen", 84.71, 31.05, 1.0, 2.0, 10.0))
    assert abs(default.obstime.tt.jd - 2451545.0) < 1e-9


def test_a_target_with_a_distance_and_no_parallax_is_usable_by_the_checks():
    fact = TargetFact("Harrow", 312.02, -48.3, 3.0, -1.0, None, distance_pc=40.0)
    assert target_coord_of(fact).distance.to_value("pc") == 40.0


def test_the_api_document_states_the_epoch_rule(client, auth):
    document = client.get("/api/v1/openapi.json", headers=auth("viewer")).get_json()
    epoch = document["components"]["schemas"]["TargetIn"]["properties"]["epoch"]
    text = " ".join(str(part) for part in epoch.get("anyOf", [epoch]))
    text += epoch.get("description", "")
    assert "J2000.0" in text and "proper motion" in text


def test_the_demo_registers_the_epoch_its_signals_were_made_with():
    from confirm_service.demo import TARGETS, _coord

    for target in TARGETS:
        if target.get("pm_ra_mas_yr") is not None:
            assert datetime.fromisoformat(target["epoch"]) == EPOCH
            assert abs((_coord(target).obstime - Time(EPOCH)).to_value("s")) < 1e-3
