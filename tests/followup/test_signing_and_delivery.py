"""Signing (HMAC-SHA256, RFC 2104) and one try of delivery against real loopback servers."""

from __future__ import annotations

import random
import time

import pytest
from cryptography.hazmat.primitives import hashes
from cryptography.hazmat.primitives.hmac import HMAC

from confirm_service.followup import delivery, signing
from tests.followup.loopback import Recorder


def openssl_hmac_hex(key: bytes, data: bytes) -> str:
    """HMAC-SHA256 by the cryptography package (OpenSSL), independent of Python's hmac."""
    mac = HMAC(key, hashes.SHA256())
    mac.update(data)
    return mac.finalize().hex()


def test_openssl_reference_matches_rfc_4231():
    # RFC 4231, test case 2: key "Jefe", data "what do ya want for nothing?".
    assert openssl_hmac_hex(b"Jefe", b"what do ya want for nothing?") == (
        "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
    )


def test_signature_is_hmac_sha256_over_timestamp_id_and_body():
    body = b'{"kind":"followup.request"}'
    text = b"1764000000\nmsg-1\n" + body
    expected = "v1=" + openssl_hmac_hex(b"s3cret", text)
    assert signing.signature("s3cret", 1764000000, "msg-1", body) == expected


def test_receiver_refuses_bad_signature_and_stale_timestamps():
    body = b'{"a":1}'
    now = time.time()
    headers = signing.signed_headers("k", "PRA", "m-1", body, now)
    envelope = signing.envelope_of(headers)
    signing.verify("k", envelope, body, now + 299)  # within five minutes: accepted
    with pytest.raises(signing.SignatureRefused) as stale:
        signing.verify("k", envelope, body, now + 301)
    assert stale.value.field == signing.TIMESTAMP_HEADER
    for secret, changed in (("other", body), ("k", b'{"a":2}')):
        with pytest.raises(signing.SignatureRefused) as bad:
            signing.verify(secret, envelope, changed, now)
        assert bad.value.field == signing.SIGNATURE_HEADER
    moved = signing.envelope_of({**headers, signing.MESSAGE_ID_HEADER: "m-2"})
    with pytest.raises(signing.SignatureRefused):
        signing.verify("k", moved, body, now)  # the id is signed too: no re-labelled replay
    with pytest.raises(signing.SignatureRefused):
        signing.envelope_of({k: v for k, v in headers.items() if k != signing.SIGNATURE_HEADER})


def test_one_try_against_real_servers():
    servers = (
        Recorder(200, {"request_id": 9}),
        Recorder(500),
        Recorder(hang=True),
        Recorder(422),
        Recorder(409),
    )
    ok, failing, silent, refusing, seen = servers
    for server in servers:
        server.__enter__()
    try:
        delivered = delivery.post_json(ok.url, b"{}", {"Content-Type": "application/json"}, 5)
        assert delivered.delivered and delivered.response == {"request_id": 9}
        error = delivery.post_json(failing.url, b"{}", {}, 5)
        assert (error.delivered, error.status_code, error.retry) == (False, 500, True)
        timeout = delivery.post_json(silent.url, b"{}", {}, 0.5)
        assert not timeout.delivered and timeout.retry and "no answer" in timeout.error
        permanent = delivery.post_json(refusing.url, b"{}", {}, 5)
        assert not permanent.delivered and not permanent.retry
        assert delivery.post_json(seen.url, b"{}", {}, 5).delivered  # already received
    finally:
        for server in servers:
            server.__exit__(None, None, None)
    closed = delivery.post_json(ok.url, b"{}", {}, 1)
    assert not closed.delivered and closed.retry and "connection" in closed.error


def test_backoff_grows_exponentially_with_jitter_and_a_cap():
    rng = random.Random(7)
    for attempt in range(1, 10):
        ceiling = min(600.0, 10.0 * 2 ** (attempt - 1))
        delays = [delivery.retry_delay_s(attempt, 10.0, 600.0, rng) for _ in range(200)]
        assert all(0.5 * ceiling <= d < ceiling for d in delays)
        assert len({round(d, 6) for d in delays}) > 150  # jittered, not one fixed delay
