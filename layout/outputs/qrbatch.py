"""Many version-1 QR symbols at once, in numpy (ISO/IEC 18004: alphanumeric mode, error correction M).

Labels need one symbol per slot, tens of thousands per study; the qrcode library builds each
one in Python, trying all eight masks module by module. Every code of up to 20 characters
fits version 1 (21 x 21 modules), whose layout is fixed, so here the bit streams, the
Reed-Solomon codewords, the placement, the eight masks and their penalty scores are
computed for a whole batch as arrays. The mask is chosen as the qrcode library chooses it
(penalty rules 1-4 of the standard, scored with the format modules left light), so each
symbol equals the library's module for module; tests/test_printables.py compares them.
Longer texts fall back to the library (layout.outputs.qr).
"""

from __future__ import annotations

from functools import cache
from typing import Final

import numpy as np

SIZE: Final = 21
DATA_CODEWORDS: Final = 16  # version 1-M
EC_CODEWORDS: Final = 10
MAX_CHARS: Final = 20  # alphanumeric characters version 1-M holds
ALPHANUMERIC: Final = "0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ $%*+-./:"
_VALUE: Final = {c: i for i, c in enumerate(ALPHANUMERIC)}
_FORMAT_GENERATOR: Final = 0b10100110111
_FORMAT_MASK: Final = 0b101010000010010
_EC_LEVEL_M: Final = 0  # the two format bits of level M


def fits(text: str) -> bool:
    """Whether text is a version-1-M alphanumeric symbol this module makes."""
    return len(text) <= MAX_CHARS and all(c in _VALUE for c in text)


@cache
def _gf() -> tuple[np.ndarray, np.ndarray]:
    """exp and log tables of GF(256) with the standard's polynomial x^8 + x^4 + x^3 + x^2 + 1."""
    exp = np.zeros(512, dtype=np.int64)
    log = np.zeros(256, dtype=np.int64)
    x = 1
    for i in range(255):
        exp[i] = x
        log[x] = i
        x <<= 1
        if x & 0x100:
            x ^= 0x11D
    exp[255:510] = exp[:255]
    return exp, log


@cache
def _generator() -> np.ndarray:
    """Coefficients of (x - a^0)(x - a^1)...(x - a^9), highest power first."""
    exp, log = _gf()
    g = [1]
    for i in range(EC_CODEWORDS):
        nxt = [0] * (len(g) + 1)
        for j, c in enumerate(g):
            nxt[j] ^= c
            if c:
                nxt[j + 1] ^= int(exp[(log[c] + i) % 255])
        g = nxt
    return np.array(g, dtype=np.int64)


def _data_codewords(texts: list[str]) -> np.ndarray:
    """(n, 16) data codewords: mode, count, the character pairs, terminator, padding."""
    out = np.zeros((len(texts), DATA_CODEWORDS), dtype=np.int64)
    for k, text in enumerate(texts):
        bits = "0010" + format(len(text), "09b")
        for i in range(0, len(text) - 1, 2):
            bits += format(45 * _VALUE[text[i]] + _VALUE[text[i + 1]], "011b")
        if len(text) % 2:
            bits += format(_VALUE[text[-1]], "06b")
        bits += "0" * min(4, DATA_CODEWORDS * 8 - len(bits))
        bits += "0" * (-len(bits) % 8)
        words = [int(bits[i : i + 8], 2) for i in range(0, len(bits), 8)]
        words += [0xEC, 0x11] * ((DATA_CODEWORDS - len(words)) // 2 + 1)
        out[k] = words[:DATA_CODEWORDS]
    return out


def _ec_codewords(data: np.ndarray) -> np.ndarray:
    """(n, 10) Reed-Solomon codewords: the remainder of data(x)·x^10 by the generator, row by row at once."""
    exp, log = _gf()
    gen = _generator()[1:]
    rem = np.zeros((data.shape[0], EC_CODEWORDS), dtype=np.int64)
    for i in range(DATA_CODEWORDS):
        feedback = data[:, i] ^ rem[:, 0]
        rem = np.concatenate([rem[:, 1:], np.zeros((data.shape[0], 1), dtype=np.int64)], axis=1)
        nonzero = feedback != 0
        product = exp[(log[feedback[nonzero]][:, None] + log[gen][None, :]) % 255]
        rem[nonzero] ^= product
    return rem


@cache
def _layout() -> tuple[np.ndarray, np.ndarray, list[tuple[int, int]], list[tuple[int, int]]]:
    """The function modules (values and where they are), the data positions in placement order,
    and the 2 x 15 format positions (bit i of the format word at each)."""
    value = np.zeros((SIZE, SIZE), dtype=bool)
    taken = np.zeros((SIZE, SIZE), dtype=bool)
    for row, col in ((0, 0), (SIZE - 7, 0), (0, SIZE - 7)):  # finders with their separators
        for r in range(-1, 8):
            for c in range(-1, 8):
                if 0 <= row + r < SIZE and 0 <= col + c < SIZE:
                    dark = (
                        (0 <= r <= 6 and c in (0, 6)) or (0 <= c <= 6 and r in (0, 6)) or (2 <= r <= 4 and 2 <= c <= 4)
                    )
                    value[row + r, col + c] = dark
                    taken[row + r, col + c] = True
    for i in range(8, SIZE - 8):  # timing patterns
        value[i, 6] = value[6, i] = i % 2 == 0
        taken[i, 6] = taken[6, i] = True
    vertical = [(i, 8) if i < 6 else (i + 1, 8) if i < 8 else (SIZE - 15 + i, 8) for i in range(15)]
    horizontal = [(8, SIZE - i - 1) if i < 8 else (8, 15 - i) if i < 9 else (8, 15 - i - 1) for i in range(15)]
    for r, c in [*vertical, *horizontal, (SIZE - 8, 8)]:
        taken[r, c] = True
    order = []
    row, step = SIZE - 1, -1
    for col in range(SIZE - 1, 0, -2):
        if col <= 6:
            col -= 1
        while 0 <= row < SIZE:
            for c in (col, col - 1):
                if not taken[row, c]:
                    order.append((row, c))
            row += step
        row -= step
        step = -step
    return value, taken, order, [*vertical, *horizontal]


@cache
def _masks() -> np.ndarray:
    """(8, 21, 21): where each of the eight mask patterns flips a module."""
    i, j = np.indices((SIZE, SIZE))
    return np.array(
        [
            (i + j) % 2 == 0,
            i % 2 == 0,
            j % 3 == 0,
            (i + j) % 3 == 0,
            (i // 2 + j // 3) % 2 == 0,
            (i * j) % 2 + (i * j) % 3 == 0,
            ((i * j) % 2 + (i * j) % 3) % 2 == 0,
            ((i * j) % 3 + (i + j) % 2) % 2 == 0,
        ]
    )


def _format_bits(mask: int) -> int:
    data = (_EC_LEVEL_M << 3) | mask
    d = data << 10
    while d.bit_length() - _FORMAT_GENERATOR.bit_length() >= 0:
        d ^= _FORMAT_GENERATOR << (d.bit_length() - _FORMAT_GENERATOR.bit_length())
    return ((data << 10) | d) ^ _FORMAT_MASK


def _penalty(m: np.ndarray) -> np.ndarray:
    """Penalty of each symbol (..., 21, 21) by the four rules, as the qrcode library counts them."""
    points = np.zeros(m.shape[:-2], dtype=np.int64)
    for grid in (m, np.swapaxes(m, -1, -2)):  # rows, then columns
        run = np.ones(m.shape[:-1], dtype=np.int64)
        for c in range(1, SIZE):  # rule 1: a run of five or more alike scores its length less 2
            same = grid[..., c] == grid[..., c - 1]
            ended = ~same & (run >= 5)
            points += np.where(ended, run - 2, 0).sum(axis=-1)
            run = np.where(same, run + 1, 1)
        points += np.where(run >= 5, run - 2, 0).sum(axis=-1)
        p1 = np.array([1, 0, 1, 1, 1, 0, 1, 0, 0, 0, 0], dtype=bool)  # rule 3: 1:1:3:1:1 beside four light
        first = np.ones(grid.shape[:-1] + (SIZE - 10,), dtype=bool)
        second = first.copy()
        for k in range(11):
            window = grid[..., k : k + SIZE - 10]
            first &= window == p1[k]
            second &= window == p1[10 - k]
        points += 40 * (first.sum(axis=(-1, -2)) + second.sum(axis=(-1, -2)))
    a, b, c, d = m[..., :-1, :-1], m[..., :-1, 1:], m[..., 1:, :-1], m[..., 1:, 1:]
    points += 3 * ((a == b) & (a == c) & (a == d)).sum(axis=(-1, -2))  # rule 2: each 2 x 2 block alike
    percent = m.sum(axis=(-1, -2)) / float(SIZE * SIZE)  # rule 4, in the library's float steps
    points += 10 * np.floor(np.abs(percent * 100 - 50) / 5).astype(np.int64)
    return points


def symbols(texts: list[str]) -> np.ndarray:
    """(n, 21, 21) dark modules of each text's symbol (every text must fit, see fits())."""
    if not texts:
        return np.zeros((0, SIZE, SIZE), dtype=bool)
    data = _data_codewords(texts)
    words = np.concatenate([data, _ec_codewords(data)], axis=1)
    bits = ((words[:, :, None] >> np.arange(7, -1, -1)) & 1).reshape(len(texts), -1).astype(bool)
    value, taken, order, fmt = _layout()
    rows, cols = np.array(order).T
    plain = np.broadcast_to(value, (len(texts), SIZE, SIZE)).copy()
    plain[:, rows, cols] = bits[:, : len(order)]
    data_at = np.zeros((SIZE, SIZE), dtype=bool)
    data_at[rows, cols] = True
    trial = plain[:, None] ^ (_masks() & data_at)[None]  # (n, 8, 21, 21); format modules and the dark one light
    best = np.argmin(_penalty(trial), axis=1)  # the first of equal scores, as the library takes
    out = trial[np.arange(len(texts)), best]
    fr, fc = np.array(fmt).T
    format_words = np.array([_format_bits(k) for k in range(8)])
    format_bits = ((format_words[best][:, None] >> np.tile(np.arange(15), 2)) & 1).astype(bool)
    out[:, fr, fc] = format_bits
    out[:, SIZE - 8, 8] = True  # the dark module
    return out
