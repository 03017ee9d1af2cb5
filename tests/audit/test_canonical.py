"""Canonical JSON checks against RFC 8785, ECMAScript and independent JSON parsers."""

from __future__ import annotations

import datetime as dt
import hashlib
import json
import math
import random
import re
import shutil
import struct
import subprocess
from decimal import Decimal

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from confirm_service.audit.canonical import MAX_SAFE_INTEGER, canonical_json, sha256_hex


def test_sha256_hex_known_digests():
    # FIPS 180-2 appendix B.1 ("abc") and SHA-256 of the empty string; from memory, and the
    # standard library computes the same.
    abc = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    empty = "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"
    assert sha256_hex(b"abc") == abc == hashlib.sha256(b"abc").hexdigest()
    assert sha256_hex(b"") == empty == hashlib.sha256(b"").hexdigest()


def test_no_whitespace_sorted_keys_and_literals():
    # RFC 8785 section 3.2.1 (no whitespace) and 3.2.3 (sorted members).
    value = {"b": [1, 2.5, None, True, False], "a": "x", "c": {}, "d": []}
    assert canonical_json(value) == b'{"a":"x","b":[1,2.5,null,true,false],"c":{},"d":[]}'


def test_key_order_independence():
    # RFC 8785 section 3.2.3: member order in the input does not matter.
    forward = {"target": "invented-7", "site": {"name": "Site A", "elevation_m": 812.5}, "n": 3}
    backward = {"n": 3, "site": {"elevation_m": 812.5, "name": "Site A"}, "target": "invented-7"}
    assert canonical_json(forward) == canonical_json(backward)
    assert canonical_json(forward) == (
        b'{"n":3,"site":{"elevation_m":812.5,"name":"Site A"},"target":"invented-7"}'
    )


def test_rfc_8785_primitive_types_example():
    # RFC 8785 section 3.2.2 example, input and output from memory.
    source = r"""{
      "numbers": [333333333.33333329, 1E30, 4.50, 2e-3, 0.000000000000000000000000001],
      "string": "\u20ac$\u000F\u000aA'\u0042\u0022\u005c\\\"\/",
      "literals": [null, true, false]
    }"""
    expected = (
        r'{"literals":[null,true,false],'
        r'"numbers":[333333333.3333333,1e+30,4.5,0.002,1e-27],'
        r""""string":"€$\u000f\nA'B\"\\\\\"/"}"""
    )
    assert canonical_json(json.loads(source)) == expected.encode("utf-8")


def test_rfc_8785_sorting_example_uses_utf16_code_units():
    # RFC 8785 section 3.2.3 example, from memory: U+1F600 (surrogates D83D DE00) sorts before
    # U+FB33 because names compare as UTF-16 code units, not code points.
    source = r"""{
      "\u20ac": "Euro Sign",
      "\r": "Carriage Return",
      "\ufb33": "Hebrew Letter Dalet With Dagesh",
      "1": "One",
      "\ud83d\ude00": "Emoji: Grinning Face",
      "\u0080": "Control",
      "\u00f6": "Latin Small Letter O With Diaeresis"
    }"""
    canonical = json.loads(canonical_json(json.loads(source)))
    assert list(canonical.values()) == [
        "Carriage Return",
        "One",
        "Control",
        "Latin Small Letter O With Diaeresis",
        "Euro Sign",
        "Emoji: Grinning Face",
        "Hebrew Letter Dalet With Dagesh",
    ]


# RFC 8785 appendix B: IEEE 754 bit patterns and their canonical text. From memory.
RFC_8785_NUMBERS = [
    ("0000000000000000", "0"),
    ("8000000000000000", "0"),
    ("0000000000000001", "5e-324"),
    ("8000000000000001", "-5e-324"),
    ("7fefffffffffffff", "1.7976931348623157e+308"),
    ("ffefffffffffffff", "-1.7976931348623157e+308"),
    ("4340000000000000", "9007199254740992"),
    ("c340000000000000", "-9007199254740992"),
    ("4430000000000000", "295147905179352830000"),
    ("44b52d02c7e14af5", "9.999999999999997e+22"),
    ("44b52d02c7e14af6", "1e+23"),
    ("44b52d02c7e14af7", "1.0000000000000001e+23"),
    ("444b1ae4d6e2ef4e", "999999999999999700000"),
    ("444b1ae4d6e2ef4f", "999999999999999900000"),
    ("444b1ae4d6e2ef50", "1e+21"),
    ("3eb0c6f7a0b5ed8c", "9.999999999999997e-7"),
    ("3eb0c6f7a0b5ed8d", "0.000001"),
    ("41b3de4355555553", "333333333.3333332"),
    ("41b3de4355555554", "333333333.33333325"),
    ("41b3de4355555555", "333333333.3333333"),
    ("41b3de4355555556", "333333333.3333334"),
    ("41b3de4355555557", "333333333.33333343"),
    ("becbf647612f3696", "-0.0000033333333333333333"),
    ("43143ff3c1cb0959", "1424953923781206.2"),
]


@pytest.mark.parametrize(("bits", "text"), RFC_8785_NUMBERS)
def test_rfc_8785_number_serialisation(bits, text):
    number = struct.unpack(">d", bytes.fromhex(bits))[0]
    assert canonical_json(number) == text.encode("ascii")
    assert float(text) == number or (number == 0.0 and float(text) == 0.0)


@pytest.mark.parametrize(
    ("value", "text"),
    [
        (1.0, "1"),
        (-0.0, "0"),
        (100.0, "100"),
        (1e21, "1e+21"),
        (1e20, "100000000000000000000"),
        (1e-7, "1e-7"),
        (1.5e-7, "1.5e-7"),
        (0.1, "0.1"),
        (1420.405751768e6, "1420405751.768"),
    ],
)
def test_ecmascript_number_layout(value, text):
    # ECMA-262 Number::toString layout, as RFC 8785 section 3.2.2.3 requires; values from memory
    # of that algorithm, cross-checked against a JavaScript engine in the test below.
    assert canonical_json(value) == text.encode("ascii")


def test_strings_escape_like_ecmascript_and_stay_utf8():
    # RFC 8785 section 3.2.2.2: short escapes for \b \t \n \f \r " \, \u00xx lowercase for the
    # other controls, everything else raw UTF-8 (U+007F included).
    value = '\x00\x08\t\n\x0b\x0c\r\x1f\x7f"\\/é€\U0001f600'
    expected = '"\\u0000\\b\\t\\n\\u000b\\f\\r\\u001f\x7f\\"\\\\/é€\U0001f600"'
    assert canonical_json(value) == expected.encode("utf-8")


def test_large_safe_integers_and_iso_strings_accepted():
    # I-JSON (RFC 7493 section 2.2): integers within +/-(2**53 - 1) are exact.
    assert MAX_SAFE_INTEGER == 9007199254740991
    assert canonical_json([MAX_SAFE_INTEGER, -MAX_SAFE_INTEGER]) == (
        b"[9007199254740991,-9007199254740991]"
    )
    # Beyond that, only integers whose digits are already canonical double text (RFC 8785
    # appendix B lists 2**53 as 9007199254740992 and 2**68 as 295147905179352830000).
    assert canonical_json([2**53, -(2**53)]) == b"[9007199254740992,-9007199254740992]"
    assert canonical_json(295147905179352830000) == b"295147905179352830000"
    at = dt.datetime(2031, 4, 5, 6, 7, 8, tzinfo=dt.UTC)
    assert canonical_json({"at": at.isoformat()}) == b'{"at":"2031-04-05T06:07:08+00:00"}'


class _Opaque:
    pass


@pytest.mark.parametrize(
    "value",
    [
        dt.datetime(2031, 4, 5, tzinfo=dt.UTC),
        dt.date(2031, 4, 5),
        Decimal("1.5"),
        b"raw",
        {1, 2},
        {1: "integer key"},
        {None: "null key"},
        {("a", "b"): "tuple key"},
        _Opaque(),
        {"nested": [1, {"deeper": dt.datetime(2031, 4, 5, tzinfo=dt.UTC)}]},
    ],
)
def test_non_json_types_refused(value):
    with pytest.raises(TypeError):
        canonical_json(value)


def _cyclic_list():
    items: list[object] = []
    items.append(items)
    return items


def _cyclic_dict():
    mapping: dict[str, object] = {}
    mapping["self"] = {"again": mapping}
    return mapping


@pytest.mark.parametrize(
    "value",
    [
        math.nan,
        math.inf,
        -math.inf,
        [1.0, {"x": math.nan}],
        MAX_SAFE_INTEGER + 2,
        -(MAX_SAFE_INTEGER + 2),
        2**64,
        10**21,
        10**400,
        "lone \ud800 surrogate",
        {"\udfff": "lone surrogate in a key"},
        _cyclic_list(),
        _cyclic_dict(),
    ],
)
def test_values_outside_i_json_refused(value):
    # RFC 8785 section 3.2.2.3 (no NaN/Infinity) and I-JSON, RFC 7493 (exact integers, no lone
    # surrogates); cycles cannot be written at all.
    with pytest.raises(ValueError):
        canonical_json(value)


def test_shared_subobjects_are_not_mistaken_for_cycles():
    shared = {"frequency_hz": 1420405751.768}
    assert canonical_json([shared, shared]) == (
        b'[{"frequency_hz":1420405751.768},{"frequency_hz":1420405751.768}]'
    )


_scalars = (
    st.none()
    | st.booleans()
    | st.integers(-MAX_SAFE_INTEGER, MAX_SAFE_INTEGER)
    | st.floats(allow_nan=False, allow_infinity=False)
    | st.text(max_size=12)
)
_json_values = st.recursive(
    _scalars,
    lambda children: (
        st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=6), children, max_size=4)
    ),
    max_leaves=24,
)


@settings(max_examples=300, deadline=None)
@given(_json_values)
def test_round_trip_through_standard_library_parser(value):
    # Python's json module as an independent parser. Read as RFC 8785 reads numbers (IEEE 754
    # doubles) the canonical bytes give back an equal value; read with Python's own int/float
    # split and canonicalised again they give the same bytes (a fixed point).
    text = canonical_json(value)
    assert json.loads(text, parse_int=float) == value
    assert canonical_json(json.loads(text)) == text
    outside_strings = re.sub(rb'"(?:[^"\\]|\\.)*"', b'""', text)
    assert b"\n" not in outside_strings and b" " not in outside_strings  # no insignificant space


def _random_double(rng: random.Random) -> float:
    while True:
        number = struct.unpack(">d", rng.getrandbits(64).to_bytes(8, "big"))[0]
        if math.isfinite(number):
            return number


_KEY_CHARS = [
    "a",
    "B",
    "1",
    "\r",
    "\x00",
    "é",
    "\u20ac",
    "\ufb33",
    "\uffee",
    "\U0001f600",
    "\U00010000",
]


def _random_value(rng: random.Random, depth: int = 0) -> object:
    kind = rng.randrange(8 if depth < 3 else 5)
    if kind == 0:
        return _random_double(rng)
    if kind == 1:
        return rng.choice(
            [rng.uniform(-1e6, 1e6), rng.randint(-1000, 1000) / 1000, 1e-7 * rng.random()]
        )
    if kind == 2:
        return rng.randint(-MAX_SAFE_INTEGER, MAX_SAFE_INTEGER)
    if kind == 3:
        return "".join(rng.choice(_KEY_CHARS + ["\x1f", "\\", '"', "\x7f", " "]) for _ in range(5))
    if kind == 4:
        return rng.choice([None, True, False])
    if kind == 5:
        return [_random_value(rng, depth + 1) for _ in range(rng.randrange(4))]
    return {
        "".join(rng.choice(_KEY_CHARS) for _ in range(rng.randrange(1, 4))): _random_value(
            rng, depth + 1
        )
        for _ in range(rng.randrange(5))
    }


_JS_CANONICALISER = """
const canon = v => Array.isArray(v) ? '[' + v.map(canon).join(',') + ']'
  : (v !== null && typeof v === 'object')
    ? '{' + Object.keys(v).sort().map(k => JSON.stringify(k) + ':' + canon(v[k])).join(',') + '}'
    : JSON.stringify(v);
const input = JSON.parse(require('fs').readFileSync(0, 'utf8'));
process.stdout.write(JSON.stringify(input.map(canon)));
"""


@pytest.mark.skipif(shutil.which("node") is None, reason="needs a JavaScript engine (node)")
def test_agrees_with_javascript_engine():
    # Reference: a JavaScript engine. RFC 8785 defines numbers and strings by ECMAScript
    # JSON.stringify and member order by UTF-16 code units, which is what Array.prototype.sort
    # compares by default. Exact byte equality, no tolerance.
    rng = random.Random(6962)
    values = [_random_double(rng) for _ in range(5000)]
    values += [_random_value(rng) for _ in range(400)]
    result = subprocess.run(
        ["node", "-e", _JS_CANONICALISER],
        input=json.dumps(values),
        capture_output=True,
        text=True,
        encoding="utf-8",
        check=True,
        timeout=60,
    )
    expected = json.loads(result.stdout)
    assert len(expected) == len(values)
    for value, javascript_text in zip(values, expected, strict=True):
        assert canonical_json(value).decode("utf-8") == javascript_text
