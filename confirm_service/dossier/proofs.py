"""Many RFC 6962 inclusion proofs over one tree, sharing subtree hashes.

``merkle.inclusion_proof`` rehashes the tree per proof; a dossier needs dozens of proofs of the
same tree, so subtree roots MTH(D[start:end]) are memoised here (the recursion is RFC 6962
section 2.1.1's PATH, unchanged).
"""

from __future__ import annotations

from collections.abc import Sequence
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
