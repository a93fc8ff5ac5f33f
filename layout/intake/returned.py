"""What every returned row says about every planned slot and round: clean rows in arrays, the rest merged.

A slot-round named by one clean row only (nearly all of them) stays in its CleanBlock; its
merged state is that row: every value, no reason, note or finding. Every other slot-round is
merged from its Entries by layout.intake.merge, as always. Places are numbered
round × slots + slot, so the two kinds meet in plain arrays.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property

import numpy as np

from layout.intake.cleanrows import CleanBlock
from layout.intake.findings import Finding
from layout.intake.merge import Key, Merged, merge_entries
from layout.intake.rows import Entry, PlanIndex
from layout.plan import Plan

ROWS = 1 << 32  # a row number's share of a place-in-the-returns number: file place × ROWS + row


@dataclass
class Returned:
    """Every slot-round the returns name: clean ones in blocks, the others in special (as merge_entries makes)."""

    idx: PlanIndex
    special: dict[Key, Merged]
    blocks: list[CleanBlock] = field(default_factory=list)
    places: dict[str, int] = field(default_factory=dict)  # file → its place among the returned files

    @property
    def plan(self) -> Plan:
        return self.idx.plan

    def place_of(self, key: Key) -> int:
        """round × slots + slot: the slot-round's place in the arrays."""
        return self.idx.round_number[key[1]] * len(self.plan.slots) + self.idx.slot_number[key[0]]

    def clean_places(self, block: CleanBlock) -> np.ndarray:
        return block.rounds * len(self.plan.slots) + block.slots

    def present(self) -> np.ndarray:
        """Per place, whether some row names the slot-round."""
        out = np.zeros(len(self.plan.slots) * len(self.plan.rounds), dtype=bool)
        for b in self.blocks:
            out[self.clean_places(b)] = True
        for key in self.special:
            out[self.place_of(key)] = True
        return out

    @property
    def clean_count(self) -> int:
        return sum(len(b) for b in self.blocks)

    def anchor(self, key: Key) -> tuple[str, int]:
        """(file, row) that findings about the slot-round point to."""
        m = self.special.get(key)
        if m is not None:
            return m.anchor.file, m.anchor.row
        block, row = self._clean_rows[self.place_of(key)]
        if block < 0:
            raise KeyError(key)
        return self.blocks[block].file, int(self.blocks[block].numbers[row])

    @cached_property
    def _clean_rows(self) -> np.ndarray:
        """Per place: (block, row in it) of its clean row, or (-1, -1)."""
        out = np.full((len(self.plan.slots) * len(self.plan.rounds), 2), -1, dtype=np.int64)
        for k, b in enumerate(self.blocks):
            at = self.clean_places(b)
            out[at, 0], out[at, 1] = k, np.arange(len(b))
        return out

    def first_seen(self, m: Merged) -> int:
        """The place in the returns of the slot-round's first row: file place × ROWS + row."""
        return min(self.places[e.file] * ROWS + e.row for e in (*m.rows, *m.blank_rows))


def unblock_shared(
    idx: PlanIndex, entries: list[Entry], blocks: list[CleanBlock], places: dict[str, int]
) -> tuple[list[Entry], list[CleanBlock]]:
    """Clean rows whose slot-round another row also names, turned into Entries among the others, in reading
    order; the blocks keep the rest."""
    if not blocks:
        return entries, blocks
    n = len(idx.plan.slots)
    at_entries = np.array(
        [idx.round_number[e.round] * n + idx.slot_number[e.slot.code] for e in entries], dtype=np.int64
    )
    at_blocks = [b.rounds * n + b.slots for b in blocks]
    counts = np.bincount(np.concatenate([at_entries, *at_blocks]), minlength=n * len(idx.plan.rounds))
    out: list[CleanBlock] = []
    moved: list[Entry] = []
    for b, at in zip(blocks, at_blocks, strict=True):
        shared = counts[at] > 1
        if not shared.any():
            out.append(b)
            continue
        moved += [b.entry(k) for k in np.flatnonzero(shared).tolist()]
        keep = np.flatnonzero(~shared)
        if len(keep):
            out.append(_rows_of_block(b, keep))
    if moved:
        entries = sorted([*entries, *moved], key=lambda e: (places[e.file], e.row))  # stable: ties keep order
    return entries, out


def _rows_of_block(b: CleanBlock, keep: np.ndarray) -> CleanBlock:
    return replace(
        b,
        numbers=b.numbers[keep],
        slots=b.slots[keep],
        rounds=b.rounds[keep],
        values={k: v[keep] for k, v in b.values.items()},
        has={k: v[keep] for k, v in b.has.items()},
        cells=[b.cells[k] for k in keep.tolist()],
    )


def merge_returns(
    idx: PlanIndex, entries: list[Entry], blocks: list[CleanBlock], places: dict[str, int]
) -> tuple[Returned, list[Finding]]:
    """The Returned of these rows (blocks already cleared of shared slot-rounds) and the findings of merging."""
    special, found = merge_entries(idx.plan, entries)
    return Returned(idx, special, blocks, places), found
