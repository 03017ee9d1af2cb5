"""Many RFC 6962 inclusion proofs over one tree, sharing subtree hashes.

``merkle.inclusion_proof`` rehashes the tree per proof; a dossier needs dozens of proofs of the
same tree and partners ask for many proofs against the same checkpoint, so subtree roots
MTH(D[start:end]) are memoised here (the recursion is RFC 6962 section 2.1.1's PATH, unchanged).
:func:`builder_for_checkpoint` keeps the builders of the last few checkpoints in memory.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from collections.abc import Callable, Sequence
from functools import cache

from confirm_service.audit.merkle import node_hash, root_from_leaf_hashes


def _split(n: int) -> int:
    """The largest power of two smaller than n (n > 1)."""
    k = 1
    while k * 2 < n:
        k *= 2
    return k


class ProofBuilder:
    def __init__(self, leaf_hashes: Sequence[bytes]) -> None:
        self.leaves = list(leaf_hashes)

        @cache
        def subtree(start: int, end: int) -> bytes:
            if end - start == 1:
                return self.leaves[start]
            k = _split(end - start)
            return node_hash(subtree(start, start + k), subtree(start + k, end))

        self._subtree = subtree

    def root(self) -> bytes:
        if not self.leaves:
            return root_from_leaf_hashes([])
        return self._subtree(0, len(self.leaves))

    def path(self, index: int) -> list[bytes]:
        """PATH(index, D[0:n]) of RFC 6962 section 2.1.1, leaf side first."""
        start, end = 0, len(self.leaves)
        if not 0 <= index < end:
            raise ValueError("index outside the tree")
        siblings: list[bytes] = []
        while end - start > 1:
            k = _split(end - start)
            if index < start + k:
                siblings.append(self._subtree(start + k, end))
                end = start + k
            else:
                siblings.append(self._subtree(start, start + k))
                start = start + k
        return list(reversed(siblings))


_CACHE_SIZE = 4
_cache: OrderedDict[tuple[int, str], ProofBuilder] = OrderedDict()
_cache_lock = threading.Lock()


def builder_for_checkpoint(
    tree_size: int, root_hash_hex: str, load: Callable[[], Sequence[bytes]]
) -> ProofBuilder:
    """The builder of the tree a checkpoint signed; ``load`` reads its leaf hashes if needed.

    A freshly loaded tree is cached only if its root is the signed one, so proofs from the
    cache are always proofs of the signed tree.
    """
    key = (tree_size, root_hash_hex)
    with _cache_lock:
        if key in _cache:
            _cache.move_to_end(key)
            return _cache[key]
    builder = ProofBuilder(load())
    if builder.root().hex() == root_hash_hex:
        with _cache_lock:
            _cache[key] = builder
            while len(_cache) > _CACHE_SIZE:
                _cache.popitem(last=False)
    return builder
