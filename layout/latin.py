"""Latin squares drawn uniformly from all Latin squares of an order.

Method: the Markov chain of Jacobson, M. T. & Matthews, P. (1996), "Generating uniformly
distributed random Latin squares", Journal of Combinatorial Designs 4(6): 405-437. A
square is an n × n × n 0/1 "incidence cube" with exactly one 1 on every line; the chain
also visits "improper" cubes with a single -1 cell. Each move picks a ±1 change on a
2 × 2 × 2 sub-cube that keeps every line sum at 1; its stationary distribution is uniform
over the proper cubes, that is over the Latin squares.

The chain starts from the cyclic square (i + j) mod n and runs until it has visited
`steps(n)` proper squares, and the last one is taken. (Stopping at the first proper square
after a fixed number of moves is biased: measured at order 4, 91% of squares came from the
432-square class instead of 75%.) Then rows, columns and symbols are permuted by Fisher-Yates.
Those permutations map the set of Latin squares onto itself, so they keep the uniform
distribution and, by themselves, already make the draw uniform within each isotopy
class; the chain supplies the choice of class. steps(n) = n^3 + 100 is a rule of thumb
(common practice, no source); tests/test_designs.py draws 20,000 squares of order 4 and
finds all 576, equally often by Pearson's chi-square.

The stream is used in this order: the chain's draws (a cell per proper move, drawn again
while it is not empty of the square's symbol; three two-way choices per improper move),
then the row, column and symbol shuffles.
"""

from __future__ import annotations

from layout.rng import Stream


def steps(n: int) -> int:
    """How many moves the chain makes for order n."""
    return n**3 + 100


class _Cube:
    """The incidence cube, with the square's lines kept for quick look-ups."""

    def __init__(self, n: int) -> None:
        self.n = n
        self.m = [0] * (n * n * n)
        for r in range(n):
            for c in range(n):
                self.m[self._i(r, c, (r + c) % n)] = 1

    def _i(self, r: int, c: int, s: int) -> int:
        return (r * self.n + c) * self.n + s

    def get(self, r: int, c: int, s: int) -> int:
        return self.m[self._i(r, c, s)]

    def add(self, r: int, c: int, s: int, d: int) -> None:
        self.m[self._i(r, c, s)] += d

    def symbols_at(self, r: int, c: int) -> list[int]:
        return [s for s in range(self.n) if self.m[self._i(r, c, s)] == 1]

    def rows_with(self, c: int, s: int) -> list[int]:
        return [r for r in range(self.n) if self.m[self._i(r, c, s)] == 1]

    def cols_with(self, r: int, s: int) -> list[int]:
        return [c for c in range(self.n) if self.m[self._i(r, c, s)] == 1]

    def move(self, r: int, c: int, s: int, r1: int, c1: int, s1: int) -> None:
        """The ±1 change on the sub-cube spanned by (r, c, s) and (r1, c1, s1)."""
        for dr, dc, ds, d in (
            (r, c, s, 1),
            (r, c1, s1, 1),
            (r1, c, s1, 1),
            (r1, c1, s, 1),
            (r, c, s1, -1),
            (r, c1, s, -1),
            (r1, c, s, -1),
            (r1, c1, s1, -1),
        ):
            self.add(dr, dc, ds, d)


def _chain(n: int, stream: Stream) -> list[list[int]]:
    """The square after the chain's moves, as rows of symbol numbers."""
    cube = _Cube(n)
    improper: tuple[int, int, int] | None = None
    done = 0
    while done < steps(n):
        if improper is None:
            while True:
                r, c, s = stream.below(n), stream.below(n), stream.below(n)
                if cube.get(r, c, s) == 0:
                    break
            s1 = cube.symbols_at(r, c)[0]
            r1 = cube.rows_with(c, s)[0]
            c1 = cube.cols_with(r, s)[0]
        else:
            r, c, s = improper
            s1 = cube.symbols_at(r, c)[stream.below(2)]
            r1 = cube.rows_with(c, s)[stream.below(2)]
            c1 = cube.cols_with(r, s)[stream.below(2)]
        cube.move(r, c, s, r1, c1, s1)
        improper = (r1, c1, s1) if cube.get(r1, c1, s1) < 0 else None
        # count proper squares, not moves: stopping at the first proper square after a fixed number
        # of moves favours squares reached by long improper excursions (an inspection-paradox bias)
        done += improper is None
    return [[cube.symbols_at(r, c)[0] for c in range(n)] for r in range(n)]


def random_latin_square(n: int, stream: Stream) -> list[list[int]]:
    """A Latin square of order n (rows of symbols 0..n-1), uniform over all Latin squares of that order."""
    square = _chain(n, stream) if n > 1 else [[0]]
    rows = stream.shuffle(range(n))
    cols = stream.shuffle(range(n))
    symbols = stream.shuffle(range(n))
    return [[symbols[square[rows[i]][cols[j]]] for j in range(n)] for i in range(n)]
