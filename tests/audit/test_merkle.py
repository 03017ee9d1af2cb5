"""RFC 6962 Merkle tree checks.

The reference throughout is the text of RFC 6962 section 2.1 (Merkle Tree Hash, 2.1.1 audit
paths, 2.1.2 consistency proofs). The ``ref_*`` functions below are a second implementation,
written recursively and plainly from those definitions, sharing no code with the library. The
library's verifiers follow the iterative algorithms of RFC 9162 sections 2.1.3.2 and 2.1.4.2;
they are checked against reference verifiers that rebuild the roots by the RFC 6962 recursion.
"""

from __future__ import annotations

import hashlib
import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from confirm_service.audit.canonical import canonical_json
from confirm_service.audit.merkle import (
    EMPTY_ROOT,
    MerkleAccumulator,
    consistency_proof,
    inclusion_proof,
    leaf_hash,
    node_hash,
    root_from_leaf_hashes,
    verify_consistency,
    verify_inclusion,
)

# --- Reference implementation, straight from RFC 6962 section 2.1 ------------------------------


def ref_leaf(entry: bytes) -> bytes:
    """MTH({d(0)}) = SHA-256(0x00 || d(0))."""
    return hashlib.sha256(b"\x00" + entry).digest()


def ref_node(left: bytes, right: bytes) -> bytes:
    """SHA-256(0x01 || left || right)."""
    return hashlib.sha256(b"\x01" + left + right).digest()


def ref_split(n: int) -> int:
    """k, the largest power of two smaller than n (n > 1)."""
    k = 1
    while k * 2 < n:
        k *= 2
    return k


def ref_mth(entries: list[bytes]) -> bytes:
    """MTH(D[n]) by the RFC 6962 recursion."""
    n = len(entries)
    if n == 0:
        return hashlib.sha256(b"").digest()
    if n == 1:
        return ref_leaf(entries[0])
    k = ref_split(n)
    return ref_node(ref_mth(entries[:k]), ref_mth(entries[k:]))


def ref_path(m: int, entries: list[bytes]) -> list[bytes]:
    """PATH(m, D[n]) of RFC 6962 section 2.1.1."""
    n = len(entries)
    if n == 1:
        return []
    k = ref_split(n)
    if m < k:
        return ref_path(m, entries[:k]) + [ref_mth(entries[k:])]
    return ref_path(m - k, entries[k:]) + [ref_mth(entries[:k])]


def ref_subproof(m: int, entries: list[bytes], b: bool) -> list[bytes]:
    """SUBPROOF(m, D[n], b) of RFC 6962 section 2.1.2."""
    n = len(entries)
    if m == n:
        return [] if b else [ref_mth(entries)]
    k = ref_split(n)
    if m <= k:
        return ref_subproof(m, entries[:k], b) + [ref_mth(entries[k:])]
    return ref_subproof(m - k, entries[k:], False) + [ref_mth(entries[:k])]


def ref_proof(m: int, entries: list[bytes]) -> list[bytes]:
    """PROOF(m, D[n]) = SUBPROOF(m, D[n], true)."""
    return ref_subproof(m, entries, True)


def ref_root_from_path(leaf: bytes, m: int, n: int, path: list[bytes]) -> bytes | None:
    """Undo the PATH recursion: the root a path leads to, or None if its length is wrong."""
    if n == 1:
        return leaf if not path else None
    if not path:
        return None
    k = ref_split(n)
    *inner, sibling = path
    if m < k:
        sub = ref_root_from_path(leaf, m, k, inner)
        return None if sub is None else ref_node(sub, sibling)
    sub = ref_root_from_path(leaf, m - k, n - k, inner)
    return None if sub is None else ref_node(sibling, sub)


def ref_accepts_inclusion(leaf: bytes, m: int, n: int, path: list[bytes], root: bytes) -> bool:
    return 0 <= m < n and ref_root_from_path(leaf, m, n, path) == root


def ref_roots_from_subproof(
    m: int, n: int, b: bool, proof: list[bytes], old_root: bytes
) -> tuple[bytes, bytes] | None:
    """Undo the SUBPROOF recursion: (old subtree hash, new subtree hash), or None."""
    if m == n:
        if b:
            return (old_root, old_root) if not proof else None
        return (proof[0], proof[0]) if len(proof) == 1 else None
    if not proof:
        return None
    k = ref_split(n)
    *inner, last = proof
    if m <= k:
        sub = ref_roots_from_subproof(m, k, b, inner, old_root)
        return None if sub is None else (sub[0], ref_node(sub[1], last))
    sub = ref_roots_from_subproof(m - k, n - k, False, inner, old_root)
    return None if sub is None else (ref_node(last, sub[0]), ref_node(last, sub[1]))


def ref_accepts_consistency(
    m: int, n: int, old_root: bytes, new_root: bytes, proof: list[bytes]
) -> bool:
    if not 0 < m <= n:
        return False
    return ref_roots_from_subproof(m, n, True, proof, old_root) == (old_root, new_root)


# --- Fixtures ----------------------------------------------------------------------------------

ENTRIES = [f"invented entry {i}".encode() for i in range(2100)]
LEAF_HASHES = [ref_leaf(entry) for entry in ENTRIES]
SMALL = 64


def flip_bit(data: bytes, byte: int = 0) -> bytes:
    return data[:byte] + bytes([data[byte] ^ 0x01]) + data[byte + 1 :]


# --- Tree hash ---------------------------------------------------------------------------------


def test_empty_tree_root_is_sha256_of_empty_string():
    # RFC 6962 section 2.1: MTH({}) = SHA-256(). Digest from memory; also computed by hashlib.
    expected = bytes.fromhex("e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855")
    assert hashlib.sha256(b"").digest() == expected
    assert root_from_leaf_hashes([]) == expected
    assert expected == EMPTY_ROOT
    assert MerkleAccumulator().root() == expected


def test_leaf_and_node_hash_follow_rfc_6962_prefixes():
    # RFC 6962 section 2.1: 0x00 prefix for leaves, 0x01 for interior nodes.
    for entry in [b"", b"\x00", b"invented signal record", bytes(range(256))]:
        assert leaf_hash(entry) == ref_leaf(entry)
        assert leaf_hash(entry) != hashlib.sha256(entry).digest()
    left, right = ref_leaf(b"a"), ref_leaf(b"b")
    assert node_hash(left, right) == ref_node(left, right)
    assert node_hash(left, right) != node_hash(right, left)


@pytest.mark.parametrize("bad", [b"", b"\x00" * 31, b"\x00" * 33, "00" * 32])
def test_node_hash_refuses_non_sha256_inputs(bad):
    with pytest.raises(ValueError):
        node_hash(bad, LEAF_HASHES[0])


@pytest.mark.parametrize("n", [*range(0, 301), 511, 512, 513, 1000, 1023, 1024, 1025, 2049])
def test_root_matches_recursive_reference(n):
    # Reference: ref_mth, the RFC 6962 section 2.1 recursion.
    assert root_from_leaf_hashes(LEAF_HASHES[:n]) == ref_mth(ENTRIES[:n])


def test_root_refuses_wrong_sized_leaf_hash():
    with pytest.raises(ValueError):
        root_from_leaf_hashes([LEAF_HASHES[0], b"short"])


# Certificate Transparency reference tree (RFC 6962 reference code's test data): eight leaves and
# the root of every prefix. From memory; verified by the independent implementation in this file.
CT_LEAVES = [
    bytes.fromhex(h)
    for h in [
        "",
        "00",
        "10",
        "2021",
        "3031",
        "40414243",
        "5051525354555657",
        "606162636465666768696a6b6c6d6e6f",
    ]
]
CT_ROOTS = {
    1: "6e340b9cffb37a989ca544e6bb780a2c78901d3fb33738768511a30617afa01d",
    2: "fac54203e7cc696cf0dfcb42c92a1d9dbaf70ad9e621f4bd8d98662f00e3c125",
    3: "aeb6bcfe274b70a14fb067a5e5578264db0fa9b51af5e0ba159158f329e06e77",
    4: "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7",
    5: "4e3bbb1f7b478dcfe71fb631631519a3bca12c9aefca1612bfce4c13a86264d4",
    6: "76e67dadbcdf1e10e1b74ddc608abd2f98dfb16fbce75277b5232a127f2087ef",
    7: "ddb89be403809e325750d3d263cd78929c2942b7942a34b77e122c9594a74c8c",
    8: "5dc9da79a70659a9ad559cb701ded9a2ab9d823aad2f4960cfe370eff4604328",
}


@pytest.mark.parametrize("size", sorted(CT_ROOTS))
def test_certificate_transparency_reference_roots(size):
    expected = bytes.fromhex(CT_ROOTS[size])
    assert ref_mth(CT_LEAVES[:size]) == expected
    assert root_from_leaf_hashes([leaf_hash(x) for x in CT_LEAVES[:size]]) == expected


def test_certificate_transparency_reference_proofs():
    # From memory (same CT test data); verified by the independent implementation in this file.
    hashes = [leaf_hash(x) for x in CT_LEAVES]
    path_0_of_8 = [
        "96a296d224f285c67bee93c30f8a309157f0daa35dc5b87e410b78630a09cfc7",
        "5f083f0a1a33ca076a95279832580db3e0ef4584bdff1f54c8a360f50de3031e",
        "6b47aaf29ee3c2af9af889bc1fb9254dabd31177f16232dd6aab035ca39bf6e4",
    ]
    consistency_6_to_8 = [
        "0ebc5d3437fbe2db158b9f126a1d118e308181031d0a949f8dededebc558ef6a",
        "ca854ea128ed050b41b35ffc1b87b8eb2bde461e9e3b5596ece6b9d5975a0ae0",
        "d37ee418976dd95753c1c73862b9398fa2a2cf9b4ff0fdfe8b30cd95209614b7",
    ]
    consistency_2_to_5 = [
        "5f083f0a1a33ca076a95279832580db3e0ef4584bdff1f54c8a360f50de3031e",
        "bc1a0643b12e4d2d7c77918f44e0f4f79a838b6cf9ec5b5c283e1f4d88599e6b",
    ]
    assert [p.hex() for p in ref_path(0, CT_LEAVES)] == path_0_of_8
    assert [p.hex() for p in inclusion_proof(hashes, 0, 8)] == path_0_of_8
    assert [p.hex() for p in ref_proof(1, CT_LEAVES)] == path_0_of_8
    assert [p.hex() for p in consistency_proof(hashes, 1, 8)] == path_0_of_8
    assert [p.hex() for p in ref_proof(6, CT_LEAVES)] == consistency_6_to_8
    assert [p.hex() for p in consistency_proof(hashes, 6, 8)] == consistency_6_to_8
    assert [p.hex() for p in ref_proof(2, CT_LEAVES[:5])] == consistency_2_to_5
    assert [p.hex() for p in consistency_proof(hashes, 2, 5)] == consistency_2_to_5


# --- Inclusion proofs --------------------------------------------------------------------------

ALL_SMALL_PAIRS = [(index, size) for size in range(1, SMALL + 1) for index in range(size)]


@pytest.mark.parametrize("size", range(1, SMALL + 1))
def test_inclusion_proofs_match_rfc_6962_path_and_verify(size):
    root = ref_mth(ENTRIES[:size])
    for index in range(size):
        proof = inclusion_proof(LEAF_HASHES, index, size)
        assert proof == ref_path(index, ENTRIES[:size])  # RFC 6962 2.1.1 PATH
        assert verify_inclusion(LEAF_HASHES[index], index, size, proof, root)


@pytest.mark.parametrize("size", range(1, SMALL + 1))
def test_inclusion_tampering_rejected(size):
    root = ref_mth(ENTRIES[:size])
    other = ref_leaf(b"not in the log")
    for index in range(size):
        leaf = LEAF_HASHES[index]
        proof = inclusion_proof(LEAF_HASHES, index, size)
        assert not verify_inclusion(flip_bit(leaf), index, size, proof, root)
        assert not verify_inclusion(other, index, size, proof, root)
        assert not verify_inclusion(leaf, index, size, proof, flip_bit(root, 31))
        for position in range(len(proof)):
            changed = list(proof)
            changed[position] = flip_bit(changed[position], 7)
            assert not verify_inclusion(leaf, index, size, changed, root)
        if proof:
            assert not verify_inclusion(leaf, index, size, proof[:-1], root)
            assert not verify_inclusion(leaf, index, size, proof[1:], root)
        if len(proof) > 1:
            assert not verify_inclusion(leaf, index, size, proof[::-1], root)
        assert not verify_inclusion(leaf, index, size, [*proof, other], root)
        for wrong_index in [*range(size), size, size + 1, -1]:
            if wrong_index != index:
                assert not verify_inclusion(leaf, wrong_index, size, proof, root)


@pytest.mark.parametrize("size", range(1, SMALL + 1))
def test_inclusion_with_wrong_size_agrees_with_rfc_6962_reference(size):
    # The RFC 9162 verifier only knows (index, size); where another size gives the same path
    # shape (e.g. leaf 0 in sizes 3 and 4) it must accept exactly when the RFC 6962 recursion
    # rebuilds the same root, and reject otherwise.
    root = ref_mth(ENTRIES[:size])
    rejected = 0
    for index in range(size):
        leaf = LEAF_HASHES[index]
        proof = inclusion_proof(LEAF_HASHES, index, size)
        for wrong_size in range(0, SMALL + 8):
            if wrong_size == size:
                continue
            expected = ref_accepts_inclusion(leaf, index, wrong_size, proof, root)
            got = verify_inclusion(leaf, index, wrong_size, proof, root)
            assert got == expected, (index, size, wrong_size)
            rejected += not got
    assert rejected > 0


def test_inclusion_rejects_malformed_inputs():
    proof = inclusion_proof(LEAF_HASHES, 3, 10)
    root = ref_mth(ENTRIES[:10])
    assert verify_inclusion(LEAF_HASHES[3], 3, 10, proof, root)
    assert not verify_inclusion(LEAF_HASHES[3][:31], 3, 10, proof, root)
    assert not verify_inclusion(LEAF_HASHES[3], 3, 10, [p.hex() for p in proof], root)
    assert not verify_inclusion(LEAF_HASHES[3], 3, 10, [proof[0][:16], *proof[1:]], root)
    assert not verify_inclusion(LEAF_HASHES[3], 3, 10, proof, root.hex())
    assert not verify_inclusion(LEAF_HASHES[3], 3, 0, [], root)
    assert not verify_inclusion(LEAF_HASHES[3], True, 10, proof, root)


@pytest.mark.parametrize(("index", "size"), [(0, 0), (5, 5), (-1, 5), (0, len(LEAF_HASHES) + 1)])
def test_inclusion_proof_refuses_bad_arguments(index, size):
    with pytest.raises(ValueError):
        inclusion_proof(LEAF_HASHES, index, size)


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 2048).flatmap(lambda n: st.tuples(st.integers(0, n - 1), st.just(n))))
def test_inclusion_larger_trees_match_reference(index_and_size):
    index, size = index_and_size
    proof = inclusion_proof(LEAF_HASHES, index, size)
    assert proof == ref_path(index, ENTRIES[:size])
    assert verify_inclusion(LEAF_HASHES[index], index, size, proof, ref_mth(ENTRIES[:size]))


# --- Consistency proofs ------------------------------------------------------------------------


@pytest.mark.parametrize("new_size", range(1, SMALL + 1))
def test_consistency_proofs_match_rfc_6962_proof_and_verify(new_size):
    new_root = ref_mth(ENTRIES[:new_size])
    for old_size in range(1, new_size + 1):
        proof = consistency_proof(LEAF_HASHES, old_size, new_size)
        assert proof == ref_proof(old_size, ENTRIES[:new_size])  # RFC 6962 2.1.2 PROOF
        old_root = ref_mth(ENTRIES[:old_size])
        assert verify_consistency(old_size, new_size, old_root, new_root, proof)


@pytest.mark.parametrize("new_size", range(1, SMALL + 1))
def test_consistency_tampering_rejected(new_size):
    new_root = ref_mth(ENTRIES[:new_size])
    stranger = ref_leaf(b"not in the log")
    for old_size in range(1, new_size + 1):
        old_root = ref_mth(ENTRIES[:old_size])
        proof = consistency_proof(LEAF_HASHES, old_size, new_size)
        assert not verify_consistency(old_size, new_size, flip_bit(old_root), new_root, proof)
        assert not verify_consistency(old_size, new_size, old_root, flip_bit(new_root), proof)
        assert not verify_consistency(old_size, new_size, old_root, new_root, [*proof, stranger])
        for position in range(len(proof)):
            changed = list(proof)
            changed[position] = flip_bit(changed[position], 5)
            assert not verify_consistency(old_size, new_size, old_root, new_root, changed)
        if proof:
            assert not verify_consistency(old_size, new_size, old_root, new_root, proof[:-1])
            assert not verify_consistency(old_size, new_size, old_root, new_root, proof[1:])
        if old_size < new_size:
            assert not verify_consistency(old_size, new_size, new_root, old_root, proof)
            # A rewritten history: same sizes, one earlier entry replaced.
            forged = list(ENTRIES[:new_size])
            forged[old_size - 1] = b"rewritten entry"
            assert not verify_consistency(old_size, new_size, old_root, ref_mth(forged), proof)


@pytest.mark.parametrize("new_size", range(1, SMALL + 1))
def test_consistency_with_wrong_sizes_agrees_with_rfc_6962_reference(new_size):
    new_root = ref_mth(ENTRIES[:new_size])
    rejected = 0
    for old_size in range(1, new_size + 1):
        old_root = ref_mth(ENTRIES[:old_size])
        proof = consistency_proof(LEAF_HASHES, old_size, new_size)
        for claimed_old in range(max(1, old_size - 3), old_size + 4):
            for claimed_new in range(max(1, new_size - 3), new_size + 4):
                if (claimed_old, claimed_new) == (old_size, new_size):
                    continue
                expected = ref_accepts_consistency(
                    claimed_old, claimed_new, old_root, new_root, proof
                )
                got = verify_consistency(claimed_old, claimed_new, old_root, new_root, proof)
                assert got == expected, (old_size, new_size, claimed_old, claimed_new)
                rejected += not got
    assert rejected > 0


def test_consistency_edge_sizes():
    root_5 = ref_mth(ENTRIES[:5])
    assert consistency_proof(LEAF_HASHES, 5, 5) == []
    assert verify_consistency(5, 5, root_5, root_5, [])
    assert not verify_consistency(5, 5, root_5, ref_mth(ENTRIES[:4]), [])
    assert not verify_consistency(5, 5, root_5, root_5, [root_5])
    assert consistency_proof(LEAF_HASHES, 0, 5) == []
    assert verify_consistency(0, 5, EMPTY_ROOT, root_5, [])
    assert not verify_consistency(0, 5, root_5, root_5, [])
    assert not verify_consistency(0, 5, EMPTY_ROOT, root_5, [root_5])
    assert not verify_consistency(6, 5, root_5, root_5, [])
    assert not verify_consistency(2, 5, ref_mth(ENTRIES[:2]), root_5, [])
    with pytest.raises(ValueError):
        consistency_proof(LEAF_HASHES, 6, 5)
    with pytest.raises(ValueError):
        consistency_proof(LEAF_HASHES, -1, 5)
    with pytest.raises(ValueError):
        consistency_proof(LEAF_HASHES, 1, len(LEAF_HASHES) + 1)


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 2048).flatmap(lambda n: st.tuples(st.integers(1, n), st.just(n))))
def test_consistency_larger_trees_match_reference(sizes):
    old_size, new_size = sizes
    proof = consistency_proof(LEAF_HASHES, old_size, new_size)
    assert proof == ref_proof(old_size, ENTRIES[:new_size])
    old_root, new_root = ref_mth(ENTRIES[:old_size]), ref_mth(ENTRIES[:new_size])
    assert verify_consistency(old_size, new_size, old_root, new_root, proof)
    assert not verify_consistency(old_size, new_size, old_root, flip_bit(new_root), proof)


# --- Accumulator -------------------------------------------------------------------------------


def test_accumulator_root_equals_batch_root_at_every_size():
    accumulator = MerkleAccumulator()
    for size in range(0, 1100):
        if size:
            accumulator.append(LEAF_HASHES[size - 1])
        assert accumulator.size == size
        assert accumulator.root() == root_from_leaf_hashes(LEAF_HASHES[:size])


def test_accumulator_matches_reference_and_holds_log_n_subtrees():
    accumulator = MerkleAccumulator()
    for size in range(1, 301):
        accumulator.append_entry(ENTRIES[size - 1])
        assert accumulator.root() == ref_mth(ENTRIES[:size])  # RFC 6962 recursion
        # The right-edge subtrees are the perfect subtrees given by the binary digits of size.
        expected, start = [], 0
        for bit in reversed(range(size.bit_length())):
            if size >> bit & 1:
                expected.append(ref_mth(ENTRIES[start : start + (1 << bit)]))
                start += 1 << bit
        assert list(accumulator.subtree_roots) == expected


def test_accumulator_state_round_trip_at_every_size():
    accumulator = MerkleAccumulator()
    for size in range(0, 300):
        state = accumulator.to_state()
        stored = json.loads(canonical_json(state))  # as a database column would hold it
        restored = MerkleAccumulator.from_state(stored)
        assert restored == accumulator
        assert restored.root() == accumulator.root()
        assert len(stored["subtree_roots_hex"]) == bin(size).count("1")
        restored.extend(LEAF_HASHES[size : size + 37])
        assert restored.root() == ref_mth(ENTRIES[: size + 37])
        accumulator.append(LEAF_HASHES[size])


def test_accumulator_copy_is_independent():
    accumulator = MerkleAccumulator()
    accumulator.extend(LEAF_HASHES[:5])
    clone = accumulator.copy()
    clone.append(LEAF_HASHES[5])
    assert accumulator.size == 5 and clone.size == 6
    assert accumulator.root() == ref_mth(ENTRIES[:5])
    assert clone.root() == ref_mth(ENTRIES[:6])


@pytest.mark.parametrize(
    "state",
    [
        {"tree_size": 3, "subtree_roots_hex": ["00" * 32]},
        {"tree_size": 1, "subtree_roots_hex": ["00" * 32, "11" * 32]},
        {"tree_size": 1, "subtree_roots_hex": ["AB" * 32]},
        {"tree_size": 1, "subtree_roots_hex": ["zz" * 32]},
        {"tree_size": 1, "subtree_roots_hex": ["00" * 31]},
        {"tree_size": 1, "subtree_roots_hex": ["00 " * 21 + "0"]},
        {"tree_size": -1, "subtree_roots_hex": []},
        {"tree_size": True, "subtree_roots_hex": ["00" * 32]},
        {"tree_size": "1", "subtree_roots_hex": ["00" * 32]},
        {"tree_size": 1, "subtree_roots_hex": "00" * 32},
        {"subtree_roots_hex": []},
    ],
)
def test_accumulator_refuses_malformed_state(state):
    with pytest.raises(ValueError):
        MerkleAccumulator.from_state(state)


def test_accumulator_refuses_bad_leaf_hash():
    accumulator = MerkleAccumulator()
    with pytest.raises(ValueError):
        accumulator.append(b"\x00" * 31)
    assert accumulator.size == 0
