"""The seeded stream: numpy's published PCG64 vectors, our bounded integers and shuffles."""

from __future__ import annotations

from collections import Counter
from pathlib import Path

import pytest
from scipy import stats

from layout.rng import Stream

REFERENCE = Path(__file__).parent / "reference" / "pcg64"


def _read_vectors(name: str) -> tuple[int, list[int]]:
    lines = (REFERENCE / name).read_text().splitlines()
    seed = int(lines[0].split(",")[1].strip(), 0)
    return seed, [int(line.split(",")[-1].strip(), 0) for line in lines[1:]]


class TestRaw:
    @pytest.mark.parametrize("name", ["pcg64-testset-1.csv", "pcg64-testset-2.csv"])
    def test_matches_numpy_reference_vectors(self, name: str) -> None:
        """The raw stream equals numpy's published PCG64 test vectors (numpy/random/tests/data)."""
        seed, expected = _read_vectors(name)
        assert len(expected) == 1000
        stream = Stream(seed)
        assert [stream.raw() for _ in expected] == expected


class TestBelow:
    def test_stays_in_range(self) -> None:
        """below(n) is always in 0..n-1."""
        stream = Stream(3)
        for n in (1, 2, 3, 7, 10, 1000, 2**63 + 5):
            assert all(0 <= stream.below(n) < n for _ in range(200))

    def test_rejects_biased_words(self) -> None:
        """For n = 2**63 + 1 the words above the largest multiple of n are rejected, not folded."""
        # With n just over 2**63 nearly half of all words fall in the rejected zone; a plain
        # modulo would make 0..2**63-2 twice as likely as the rest.
        n = 2**63 + 1
        limit = 2**64 - (2**64 % n)
        seed, raw = _read_vectors("pcg64-testset-1.csv")
        expected = [x % n for x in raw if x < limit][:50]
        stream = Stream(seed)
        assert [stream.below(n) for _ in range(50)] == expected

    def test_uniform_chi_square(self) -> None:
        """below(6) is uniform: chi-square over 60,000 draws, p above 0.001."""
        stream = Stream(12345)
        counts = Counter(stream.below(6) for _ in range(60_000))
        assert stats.chisquare([counts[i] for i in range(6)]).pvalue > 0.001

    def test_bad_bound(self) -> None:
        """A bound below 1 is refused."""
        with pytest.raises(ValueError):
            Stream(1).below(0)


class TestShuffle:
    def test_fisher_yates_from_raw_words(self) -> None:
        """The shuffle is Fisher–Yates from the top, j = below(i+1), computed here from the raw vector."""
        seed, raw = _read_vectors("pcg64-testset-2.csv")
        words = iter(raw)
        items = list(range(10))
        for i in range(9, 0, -1):
            n = i + 1
            limit = 2**64 - (2**64 % n)
            while (x := next(words)) >= limit:
                pass
            j = x % n
            items[i], items[j] = items[j], items[i]
        assert Stream(seed).shuffle(range(10)) == items

    def test_is_a_permutation(self) -> None:
        """A shuffle keeps every item once and leaves the input alone."""
        source = list("abcdefgh")
        out = Stream(9).shuffle(source)
        assert sorted(out) == sorted(source) and source == list("abcdefgh")

    def test_negative_seed(self) -> None:
        """A negative seed is refused."""
        with pytest.raises(ValueError):
            Stream(-1)
