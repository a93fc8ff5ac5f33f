"""The seeded random stream behind every plan.

Only the raw 64-bit output of numpy's PCG64 (seeded through numpy's SeedSequence) is
taken from numpy; both are fixed by their published algorithms and guarded by numpy's
own reference vectors. Bounded integers and shuffles are our own code, so a plan made
today comes out the same on any platform and any later numpy:

- ``below(n)``: draw a raw 64-bit word x, reject it while x >= 2**64 - (2**64 mod n),
  return x mod n. Every residue is then equally likely (no modulo bias).
- ``shuffle(items)``: Fisher–Yates, for i from len-1 down to 1, swap item i with item
  ``below(i + 1)``.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Final, TypeVar

import numpy as np

T = TypeVar("T")

ALGORITHM: Final = {
    "name": "layout-stream",
    "version": 2,
    "bit_generator": "PCG64 (numpy random_raw, seeded by numpy SeedSequence)",
    "integers": "rejection: reject x >= 2^64 - (2^64 mod n), return x mod n",
    "shuffle": "Fisher-Yates, i from n-1 down to 1, j = below(i+1)",
    "latin_square": "Jacobson-Matthews (1996) chain, n^3+100 moves from the cyclic square, then rows, columns, symbols shuffled",
    "salt": "below(23), drawn after every other use of the stream",
}
_TWO_64: Final = 1 << 64
_BATCH: Final = 512


class Stream:
    """A reproducible stream of bounded integers and shuffles from one seed."""

    def __init__(self, seed: int) -> None:
        if seed < 0:
            raise ValueError(f"seed must be a non-negative integer, got {seed}")
        self.seed = seed
        self._bits = np.random.PCG64(seed)
        self._buffer: list[int] = []

    def raw(self) -> int:
        """The next raw 64-bit word of PCG64 (taken in batches: the same words as one call each)."""
        if not self._buffer:
            self._buffer = self._bits.random_raw(_BATCH).tolist()[::-1]
        return self._buffer.pop()

    def below(self, n: int) -> int:
        """A uniform integer in 0..n-1."""
        if n < 1:
            raise ValueError(f"bound must be at least 1, got {n}")
        limit = _TWO_64 - (_TWO_64 % n)
        while True:
            x = self.raw()
            if x < limit:
                return x % n

    def shuffle(self, items: Sequence[T]) -> list[T]:
        """A shuffled copy of items (Fisher–Yates)."""
        out = list(items)
        for i in range(len(out) - 1, 0, -1):
            j = self.below(i + 1)
            out[i], out[j] = out[j], out[i]
        return out
