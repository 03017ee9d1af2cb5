"""Property-based fuzzing of the API from its own OpenAPI document (schemathesis).

Every operation of the document gets generated requests, valid ones and invalid ones, sent with
an admin token and without any token. Each answer must not be a server error (5xx), must have a
status the document lists for the operation, and must match the documented schema for that
status (schemathesis's ``not_a_server_error``, ``status_code_conformance`` and
``response_schema_conformance`` checks).

The CI run is bounded: ``CONFIRM_FUZZ_EXAMPLES`` cases per operation, mode and caller (default
2), derandomised so that every run sends the same cases. A longer, random run on demand:

    CONFIRM_FUZZ_EXAMPLES=100 CONFIRM_FUZZ_RANDOM=1 .venv/bin/python -m pytest tests/fuzz -q
"""

from __future__ import annotations

import os

import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from hypothesis.errors import Unsatisfiable
from schemathesis import GenerationMode
from schemathesis.checks import (
    not_a_server_error,
    response_schema_conformance,
    status_code_conformance,
)
from schemathesis.core.failures import FailureGroup

from tests.factories import setup_log

EXAMPLES = int(os.environ.get("CONFIRM_FUZZ_EXAMPLES", "2"))
RANDOM = os.environ.get("CONFIRM_FUZZ_RANDOM") == "1"
CHECKS = [not_a_server_error, status_code_conformance, response_schema_conformance]


def summary(failure: BaseException) -> str:
    """The failure's kinds and its first lines (schemathesis prints whole schemas)."""
    exceptions = getattr(failure, "exceptions", [failure])
    return "; ".join(" ".join(str(e).split("\n")[:3])[:300] for e in exceptions)


def fuzz(app, document, headers: dict[str, str], sent: list[str]) -> list[str]:
    """Run every operation of the app's document; the failures, one line each."""
    schema = schemathesis.openapi.from_dict(document)
    schema.app = app
    failures: list[str] = []
    for result in schema.get_all_operations():
        operation = result.ok()
        for mode in (GenerationMode.POSITIVE, GenerationMode.NEGATIVE):

            @given(case=operation.as_strategy(generation_mode=mode))
            @settings(
                max_examples=EXAMPLES,
                derandomize=not RANDOM,
                deadline=None,
                database=None,
                suppress_health_check=list(HealthCheck),
            )
            def run(case):
                sent.append(case.operation.label)
                case.call_and_validate(headers=headers, checks=CHECKS)

            try:
                run()
            except Unsatisfiable:
                continue  # no invalid request exists for an operation without any input
            except (Exception, FailureGroup) as failure:  # note it, go on to the next one
                failures.append(f"{operation.label} ({mode.value}): {summary(failure)}")
    return failures


@pytest.mark.parametrize("caller", ["admin", "no-token"])
def test_every_answer_is_documented(app, client, auth, caller):
    setup_log(client, auth)
    document = client.get("/api/v1/openapi.json", headers=auth("admin")).get_json()
    headers = auth("admin") if caller == "admin" else {}
    sent: list[str] = []
    failures = fuzz(app, document, headers, sent)
    assert len(sent) >= 100, "the run is too small to mean much"
    assert failures == [], "\n\n".join(failures)
