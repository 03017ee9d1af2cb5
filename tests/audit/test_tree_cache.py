"""Cached proof builders serve only the tree a checkpoint signed (reference: RFC 6962 2.1)."""

from __future__ import annotations

from confirm_service.audit.merkle import leaf_hash, root_from_leaf_hashes
from confirm_service.audit.tree_cache import builder_for_checkpoint


def test_cache_keeps_only_the_signed_tree():
    leaves = [leaf_hash(bytes([i])) for i in range(37)]
    root = root_from_leaf_hashes(leaves).hex()
    loads = []

    def load(values):
        def run():
            loads.append(1)
            return values

        return run

    first = builder_for_checkpoint(37, root, load(leaves))
    second = builder_for_checkpoint(37, root, load(leaves))
    assert first is second and len(loads) == 1
    assert first.root().hex() == root
    tampered = [*leaves[:-1], leaf_hash(b"other")]
    other_root = "00" * 32
    builder_for_checkpoint(37, other_root, load(tampered))
    builder_for_checkpoint(37, other_root, load(tampered))
    assert len(loads) == 3  # a tree whose root is not the signed one is never cached
