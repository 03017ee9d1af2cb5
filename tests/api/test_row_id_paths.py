"""An id beyond the id columns names nothing, whatever the method: 404, never 405 (found by
schemathesis: POST to a route whose GET twin exists answered 405)."""

from __future__ import annotations

import re

from hypothesis import given
from hypothesis import strategies as st

from confirm_service.api.converters import decimal_at_most
from confirm_service.schemas.bounds import ROW_ID_MAX


def test_out_of_range_ids_are_404_for_every_method(client, auth):
    for number in (ROW_ID_MAX + 1, 2893286789364, 9223372036854775808):
        for method in ("GET", "POST"):
            answer = client.open(
                f"/api/v1/observations/{number}/detections",
                method=method,
                json={"detections": []},
                headers=auth("admin"),
            )
            assert answer.status_code == 404, (method, number)
            assert answer.mimetype == "application/problem+json"


@given(st.integers(min_value=0, max_value=10**12), st.integers(min_value=0, max_value=10**10))
def test_the_pattern_matches_exactly_the_numbers_up_to_the_limit(number, limit):
    matches = re.fullmatch(decimal_at_most(limit), str(number)) is not None
    assert matches == (number <= limit)
