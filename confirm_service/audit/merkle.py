"""RFC 6962 Merkle tree: root, inclusion and consistency proofs, incremental accumulator.

Definitions (RFC 6962 section 2.1, unchanged in RFC 9162 section 2.1.1), with SHA-256:

* leaf hash ``SHA-256(0x00 || entry)``; interior node hash ``SHA-256(0x01 || left || right)``;
* the root of the empty list is ``SHA-256("")``;
* a list of ``n > 1`` leaves splits at ``k``, the largest power of two smaller than ``n``:
  ``MTH(D[n]) = node(MTH(D[0:k]), MTH(D[k:n]))``.

Functions taking ``leaf_hashes`` work on already hashed leaves (32-byte ``bytes`` each), so a
caller that stores leaf hashes never re-reads the entries. Proofs are lists of 32-byte hashes in
the order RFC 6962 defines (nearest the leaf first). Generators raise :class:`ValueError` on bad
sizes; verifiers never raise on untrusted proof data and return ``False`` instead.

A proof authenticates hashes, not sizes: the same proof can verify under another size whose
tree has the same shape along the path (leaf 0 of sizes 3 and 4, for instance). Take
``tree_size``, ``old_size`` and ``new_size`` from signed checkpoints, never from the proof's
supplier alone.
"""

from __future__ import annotations

import hashlib
import hmac
import re
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, TypeGuard

__all__ = [
    "EMPTY_ROOT",
    "HASH_SIZE",
    "MerkleAccumulator",
    "consistency_proof",
    "inclusion_proof",
    "leaf_hash",
    "node_hash",
    "root_from_leaf_hashes",
    "verify_consistency",
    "verify_inclusion",
]

HASH_SIZE = 32
"""Bytes in a SHA-256 digest."""

EMPTY_ROOT = hashlib.sha256(b"").digest()
"""Root hash of the empty tree, SHA-256 of the empty string (RFC 6962 section 2.1)."""

_HEX_HASH = re.compile(r"[0-9a-f]{64}")
_LEAF_PREFIX = b"\x00"
_NODE_PREFIX = b"\x01"
_sha256 = hashlib.sha256


def leaf_hash(entry: bytes) -> bytes:
    """RFC 6962 leaf hash of one log entry: SHA-256(0x00 || entry)."""
    if type(entry) is not bytes:
        if not isinstance(entry, bytes | bytearray | memoryview):
            raise TypeError(f"entry must be bytes, not {type(entry).__name__}")
        entry = bytes(entry)
    return _sha256(_LEAF_PREFIX + entry).digest()


def node_hash(left: bytes, right: bytes) -> bytes:
    """RFC 6962 interior node hash: SHA-256(0x01 || left || right)."""
    _require_hash(left, "left")
    _require_hash(right, "right")
    return _sha256(_NODE_PREFIX + left + right).digest()


def root_from_leaf_hashes(hashes: Sequence[bytes]) -> bytes:
    """Merkle Tree Hash of a list of leaf hashes, bottom-up in O(n) time.

    Pairing neighbours level by level and carrying an unpaired last node up unchanged builds
    exactly the RFC 6962 tree: its left subtrees are perfect, of power-of-two size.
    """
    _require_hashes(hashes)
    return _root_unchecked(hashes)


def inclusion_proof(leaf_hashes: Sequence[bytes], index: int, tree_size: int) -> list[bytes]:
    """Audit path (RFC 6962 section 2.1.1 PATH) of leaf ``index`` in the first ``tree_size``."""
    _require_size(tree_size, len(leaf_hashes), "tree_size")
    if not 0 <= index < tree_size:
        raise ValueError(f"index {index} is outside a tree of size {tree_size}")
    _require_hashes(leaf_hashes[:tree_size])
    siblings_from_root: list[bytes] = []
    start, end = 0, tree_size
    while end - start > 1:
        split = start + _largest_power_of_two_below(end - start)
        if index < split:
            siblings_from_root.append(_root_unchecked(leaf_hashes[split:end]))
            end = split
        else:
            siblings_from_root.append(_root_unchecked(leaf_hashes[start:split]))
            start = split
    siblings_from_root.reverse()
    return siblings_from_root


def verify_inclusion(
    leaf_hash: bytes, index: int, tree_size: int, proof: Sequence[bytes], root: bytes
) -> bool:
    """Check an inclusion proof with the algorithm of RFC 9162 section 2.1.3.2."""
    if not (_is_hash(leaf_hash) and _is_hash(root) and all(_is_hash(p) for p in proof)):
        return False
    if not (_is_int(index) and _is_int(tree_size)) or not 0 <= index < tree_size:
        return False
    fn, sn = index, tree_size - 1
    r = leaf_hash
    for p in proof:
        if sn == 0:
            return False
        if fn & 1 or fn == sn:
            r = _sha256(_NODE_PREFIX + p + r).digest()
            while not fn & 1 and fn != 0:
                fn >>= 1
                sn >>= 1
        else:
            r = _sha256(_NODE_PREFIX + r + p).digest()
        fn >>= 1
        sn >>= 1
    return sn == 0 and hmac.compare_digest(r, root)


def consistency_proof(leaf_hashes: Sequence[bytes], old_size: int, new_size: int) -> list[bytes]:
    """Consistency proof (RFC 6962 section 2.1.2 PROOF/SUBPROOF) from ``old_size`` to ``new_size``.

    Empty when ``old_size`` is 0 or equals ``new_size``: nothing needs proving then.
    """
    _require_size(new_size, len(leaf_hashes), "new_size")
    _require_size(old_size, new_size, "old_size")
    _require_hashes(leaf_hashes[:new_size])
    if old_size in (0, new_size):
        return []
    nodes_from_root: list[bytes] = []
    start, end = 0, new_size
    old_is_whole_left_subtree = True  # the SUBPROOF flag "b"
    while old_size - start != end - start:
        split = start + _largest_power_of_two_below(end - start)
        if old_size <= split:
            nodes_from_root.append(_root_unchecked(leaf_hashes[split:end]))
            end = split
        else:
            nodes_from_root.append(_root_unchecked(leaf_hashes[start:split]))
            start = split
            old_is_whole_left_subtree = False
    if not old_is_whole_left_subtree:
        nodes_from_root.append(_root_unchecked(leaf_hashes[start:end]))
    nodes_from_root.reverse()
    return nodes_from_root


def verify_consistency(
    old_size: int, new_size: int, old_root: bytes, new_root: bytes, proof: Sequence[bytes]
) -> bool:
    """Check a consistency proof with the algorithm of RFC 9162 section 2.1.4.2.

    Equal sizes need an empty proof and equal roots. An ``old_size`` of 0 needs an empty proof
    and ``old_root == EMPTY_ROOT`` (the empty tree is a prefix of every tree).
    """
    if not (_is_hash(old_root) and _is_hash(new_root) and all(_is_hash(p) for p in proof)):
        return False
    if not (_is_int(old_size) and _is_int(new_size)) or not 0 <= old_size <= new_size:
        return False
    if old_size == new_size:
        return len(proof) == 0 and hmac.compare_digest(old_root, new_root)
    if old_size == 0:
        return len(proof) == 0 and hmac.compare_digest(old_root, EMPTY_ROOT)
    if len(proof) == 0:
        return False
    path = list(proof)
    if old_size & (old_size - 1) == 0:
        path.insert(0, old_root)
    fn, sn = old_size - 1, new_size - 1
    while fn & 1:
        fn >>= 1
        sn >>= 1
    fr = sr = path[0]
    for c in path[1:]:
        if sn == 0:
            return False
        if fn & 1 or fn == sn:
            fr = _sha256(_NODE_PREFIX + c + fr).digest()
            sr = _sha256(_NODE_PREFIX + c + sr).digest()
            while not fn & 1 and fn != 0:
                fn >>= 1
                sn >>= 1
        else:
            sr = _sha256(_NODE_PREFIX + sr + c).digest()
        fn >>= 1
        sn >>= 1
    return sn == 0 and hmac.compare_digest(fr, old_root) and hmac.compare_digest(sr, new_root)


class MerkleAccumulator:
    """Append-only Merkle tree state in O(log n) memory: the roots of its right-edge subtrees.

    A tree of ``size`` leaves is a run of perfect subtrees, one per set bit of ``size``, largest
    (leftmost) first. Appending merges equal-sized subtrees like a binary counter carries; the
    root folds the subtrees from the right, which is the RFC 6962 split rule. ``to_state`` and
    ``from_state`` give a JSON-ready form to store beside a checkpoint.
    """

    __slots__ = ("_size", "_subtree_roots")

    def __init__(self) -> None:
        self._size = 0
        self._subtree_roots: list[bytes] = []

    @property
    def size(self) -> int:
        """Number of leaves appended so far."""
        return self._size

    @property
    def subtree_roots(self) -> tuple[bytes, ...]:
        """Roots of the perfect subtrees along the right edge, leftmost (largest) first."""
        return tuple(self._subtree_roots)

    def append(self, leaf_hash: bytes) -> None:
        """Add one leaf by its RFC 6962 leaf hash."""
        _require_hash(leaf_hash, "leaf_hash")
        node = bytes(leaf_hash)
        carry = self._size
        while carry & 1:
            node = _sha256(_NODE_PREFIX + self._subtree_roots.pop() + node).digest()
            carry >>= 1
        self._subtree_roots.append(node)
        self._size += 1

    def append_entry(self, entry: bytes) -> bytes:
        """Add one leaf by its entry bytes; returns the leaf hash."""
        hashed = leaf_hash(entry)
        self.append(hashed)
        return hashed

    def extend(self, leaf_hashes: Iterable[bytes]) -> None:
        """Add several leaves by their leaf hashes, in order."""
        for hashed in leaf_hashes:
            self.append(hashed)

    def root(self) -> bytes:
        """Merkle Tree Hash of all leaves so far (``EMPTY_ROOT`` when empty)."""
        if not self._subtree_roots:
            return EMPTY_ROOT
        node = self._subtree_roots[-1]
        for left in reversed(self._subtree_roots[:-1]):
            node = _sha256(_NODE_PREFIX + left + node).digest()
        return node

    def root_hex(self) -> str:
        """``root()`` as lowercase hex."""
        return self.root().hex()

    def copy(self) -> MerkleAccumulator:
        """An independent accumulator in the same state."""
        clone = MerkleAccumulator()
        clone._size = self._size
        clone._subtree_roots = list(self._subtree_roots)
        return clone

    def to_state(self) -> dict[str, Any]:
        """``{"tree_size": int, "subtree_roots_hex": [hex, ...]}``, leftmost subtree first."""
        return {
            "tree_size": self._size,
            "subtree_roots_hex": [node.hex() for node in self._subtree_roots],
        }

    @classmethod
    def from_state(cls, state: Mapping[str, Any]) -> MerkleAccumulator:
        """Rebuild from ``to_state`` output; refuses a malformed or inconsistent state."""
        size = state.get("tree_size")
        roots_hex = state.get("subtree_roots_hex")
        if not _is_int(size) or size < 0:
            raise ValueError(f"tree_size must be a non-negative integer, got {size!r}")
        if not isinstance(roots_hex, list | tuple):
            raise ValueError("subtree_roots_hex must be a list of hex strings")
        if len(roots_hex) != size.bit_count():
            raise ValueError(
                f"a tree of {size} leaves has {size.bit_count()} right-edge subtrees, "
                f"state lists {len(roots_hex)}"
            )
        accumulator = cls()
        accumulator._size = size
        accumulator._subtree_roots = [_hash_from_hex(text) for text in roots_hex]
        return accumulator

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, MerkleAccumulator):
            return NotImplemented
        return self._size == other._size and self._subtree_roots == other._subtree_roots

    def __repr__(self) -> str:
        return f"MerkleAccumulator(size={self._size}, root={self.root_hex()})"


def _root_unchecked(hashes: Sequence[bytes]) -> bytes:
    if len(hashes) == 0:
        return EMPTY_ROOT
    level = list(hashes)
    sha256 = _sha256
    prefix = _NODE_PREFIX
    while len(level) > 1:
        paired = [
            sha256(prefix + left + right).digest()
            for left, right in zip(level[0::2], level[1::2], strict=False)
        ]
        if len(level) & 1:
            paired.append(level[-1])
        level = paired
    return bytes(level[0])


def _largest_power_of_two_below(n: int) -> int:
    """Largest power of two strictly smaller than ``n`` (``n >= 2``)."""
    return 1 << ((n - 1).bit_length() - 1)


def _is_hash(value: object) -> bool:
    return isinstance(value, bytes) and len(value) == HASH_SIZE


def _is_int(value: object) -> TypeGuard[int]:
    return isinstance(value, int) and not isinstance(value, bool)


def _require_hash(value: object, name: str) -> None:
    if not _is_hash(value):
        raise ValueError(f"{name} must be {HASH_SIZE} bytes")


def _require_hashes(hashes: Sequence[bytes]) -> None:
    for position, value in enumerate(hashes):
        if not _is_hash(value):
            raise ValueError(f"leaf hash {position} is not {HASH_SIZE} bytes")


def _require_size(size: int, limit: int, name: str) -> None:
    if not _is_int(size) or not 0 <= size <= limit:
        raise ValueError(f"{name} {size!r} must be an integer in [0, {limit}]")


def _hash_from_hex(text: object) -> bytes:
    if not isinstance(text, str) or _HEX_HASH.fullmatch(text) is None:
        raise ValueError(f"{text!r} is not {2 * HASH_SIZE} lowercase hex digits")
    return bytes.fromhex(text)
