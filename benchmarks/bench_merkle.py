"""Time the RFC 6962 Merkle core on a large log and print figures and ratios.

Usage: python benchmarks/bench_merkle.py [--leaves N] [--repeats R]

Figures are wall-clock best-of-R seconds on this machine. The baseline is the cost of the leaf
hashes alone (one SHA-256 per entry); a tree of n leaves needs n - 1 further node hashes, so a
ratio near 1 means the tree code adds little beyond the hashing itself.
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Callable

from confirm_service.audit.canonical import canonical_json
from confirm_service.audit.merkle import (
    MerkleAccumulator,
    consistency_proof,
    inclusion_proof,
    leaf_hash,
    root_from_leaf_hashes,
    verify_consistency,
    verify_inclusion,
)


def best_of(repeats: int, action: Callable[[], object]) -> tuple[float, object]:
    best, result = float("inf"), None
    for _ in range(repeats):
        start = time.perf_counter()
        result = action()
        best = min(best, time.perf_counter() - start)
    return best, result


def accumulate(hashes: list[bytes]) -> bytes:
    accumulator = MerkleAccumulator()
    accumulator.extend(hashes)
    return accumulator.root()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--leaves", type=int, default=1_000_000)
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    n, repeats = args.leaves, args.repeats

    entries = [
        canonical_json({"seq": i + 1, "action": "invented.change", "subject": f"cand-{i}"})
        for i in range(n)
    ]
    t_leaves, hashes = best_of(repeats, lambda: [leaf_hash(e) for e in entries])
    t_root, root = best_of(repeats, lambda: root_from_leaf_hashes(hashes))
    t_accumulate, accumulated_root = best_of(repeats, lambda: accumulate(hashes))
    assert accumulated_root == root

    index, old_size = n // 3, n // 2 + 1
    t_inclusion, path = best_of(repeats, lambda: inclusion_proof(hashes, index, n))
    t_consistency, proof = best_of(repeats, lambda: consistency_proof(hashes, old_size, n))
    old_root = root_from_leaf_hashes(hashes[:old_size])
    t_verify, ok = best_of(repeats, lambda: verify_inclusion(hashes[index], index, n, path, root))
    assert ok
    assert verify_consistency(old_size, n, old_root, root, proof)

    print(f"leaves                              {n:>12,d}")
    print(f"leaf hashes (baseline)              {t_leaves:12.3f} s")
    print(f"root_from_leaf_hashes               {t_root:12.3f} s   ratio {t_root / t_leaves:5.2f}")
    print(
        f"MerkleAccumulator.append x n + root {t_accumulate:12.3f} s   "
        f"ratio {t_accumulate / t_leaves:5.2f}"
    )
    print(f"inclusion_proof                     {t_inclusion:12.3f} s   {len(path)} hashes")
    print(f"consistency_proof                   {t_consistency:12.3f} s   {len(proof)} hashes")
    print(f"verify_inclusion                    {t_verify * 1e6:12.1f} us")
    print(f"per-append cost                     {t_accumulate / n * 1e6:12.2f} us")
    print(f"root                                {root.hex()}")


if __name__ == "__main__":
    main()
