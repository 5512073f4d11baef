"""Start lines of the items of a JSON document's top-level arrays, by a byte scan.

The thread JSON reader decodes the whole document with the C decoder and then needs,
for locations, the line each element and link starts on. Decoding item by item from
Python to learn those positions costs about as much again as the decode itself; this
module finds them with a few vectorised passes over the bytes instead:

1. find the quotes, backslashes, brackets/braces and newlines (one comparison each);
2. drop quotes escaped by an odd run of backslashes;
3. drop brackets inside strings (an odd number of quotes before them);
4. a running sum of +1/-1 over the remaining brackets gives the nesting depth, so an
   item of a top-level array is a ``{`` opened at depth 2;
5. the item's line is one plus the number of newlines before it (a raw newline cannot
   occur inside a JSON string).

The bytes are processed in chunks, so the memory it needs is a few chunk-sized arrays
and the item positions. It is only used on a document the decoder has already
accepted; whenever it cannot vouch for its answer (an array's key written with escapes,
a duplicated key, an item count that differs from the decoded list) it returns
``None`` and the reader falls back to decoding item by item.
"""

from __future__ import annotations

import re
from bisect import bisect_right
from collections.abc import Mapping

import numpy as np

__all__ = ["item_lines", "LazyLines", "CHUNK"]

CHUNK = 1 << 23
# Bytes between the newline checkpoints of :class:`LazyLines`: a line asked for is then
# at most this many bytes of counting away (microseconds), not a whole chunk.
STEP = 1 << 16
_KEY_BEFORE = re.compile(rb'"([A-Za-z_]+)"[ \t\r\n]*:[ \t\r\n]*\Z')


def _unescaped(quotes: np.ndarray, backslashes: np.ndarray) -> np.ndarray:
    """``quotes`` without those preceded by an odd run of backslashes."""
    if backslashes.size == 0:
        return quotes
    new_run = np.ones(backslashes.size, dtype=bool)
    new_run[1:] = backslashes[1:] != backslashes[:-1] + 1
    starts = np.flatnonzero(new_run)
    lengths = np.diff(np.append(starts, backslashes.size))
    escaped = backslashes[starts + lengths - 1][lengths % 2 == 1] + 1
    return quotes[~np.isin(quotes, escaped)]


class _Scan:
    """Running state across chunks: item offsets, and each chunk's newline count (for
    :class:`LazyLines`)."""

    def __init__(self) -> None:
        self.in_string = 0  # 1 while inside a string at the chunk boundary
        self.depth = 0
        self.newlines = 0
        self.arrays: list[int] = []  # byte offset of each top-level '['
        self.closes: list[int] = []  # byte offset of each top-level ']'
        self.items: list[np.ndarray] = []  # byte offsets of items at depth 2
        self.chunk_starts: list[int] = []  # byte offset of each chunk
        self.chunk_newlines: list[int] = []  # newlines before each chunk

    def chunk(self, block: np.ndarray, offset: int) -> None:
        # One comparison per byte class: several times faster than a lookup table.
        quotes = _unescaped(np.flatnonzero(block == ord('"')), np.flatnonzero(block == ord("\\")))
        folded = block | 0x20  # '[' -> '{' and ']' -> '}'; nothing else lands on those
        brackets = np.flatnonzero((folded == ord("{")) | (folded == ord("}")))
        outside = (np.searchsorted(quotes, brackets) + self.in_string) % 2 == 0
        brackets = brackets[outside]
        self.in_string = (self.in_string + quotes.size) % 2
        chars = block[brackets]
        opening = (chars == ord("[")) | (chars == ord("{"))
        delta = np.where(opening, 1, -1)
        after = self.depth + np.cumsum(delta)
        before = after - delta
        self.arrays += (brackets[(chars == ord("[")) & (before == 1)] + offset).tolist()
        self.closes += (brackets[(chars == ord("]")) & (after == 1)] + offset).tolist()
        items = brackets[(chars == ord("{")) & (before == 2)]
        self.items.append(items + offset)
        self.chunk_starts.append(offset)
        self.chunk_newlines.append(self.newlines)
        self.newlines += int(np.count_nonzero(block == ord("\n")))
        if after.size:
            self.depth = int(after[-1])


def _scan(data: bytes, counts: Mapping[str, int], chunk: int) -> tuple[_Scan, dict] | None:
    """Run the scan; key -> (low, high) slice of the scan's items, or ``None``."""
    buffer = np.frombuffer(data, dtype=np.uint8)
    scan = _Scan()
    low = 0
    while low < len(buffer):
        high = min(low + chunk, len(buffer))
        while high < len(buffer) and buffer[high - 1] == ord("\\"):
            high += 1  # never split a run of backslashes
        scan.chunk(buffer[low:high], low)
        low = high
    if scan.in_string or scan.depth != 0 or len(scan.arrays) != len(scan.closes):
        return None
    items = np.concatenate(scan.items) if scan.items else np.zeros(0, dtype=np.int64)
    scan.items = [items]
    found: dict[str, tuple[int, int]] = {}
    for start, end in zip(scan.arrays, scan.closes, strict=True):
        key = _KEY_BEFORE.search(data, max(0, start - 256), start)
        name = key.group(1).decode("ascii") if key else None
        if name is None or name in found:
            return None
        low, high = np.searchsorted(items, [start, end])
        found[name] = (int(low), int(high))
    for name, count in counts.items():
        low, high = found.get(name, (0, 0))
        if high - low != count:
            return None
    return scan, found


def item_lines(data: bytes, counts: Mapping[str, int], chunk: int = CHUNK) -> dict[str, list[int]] | None:
    """1-based start line of every item of the top-level arrays named in ``counts``.

    Parameters
    ----------
    data
        A UTF-8 JSON document (without byte order mark) that a strict decoder accepted,
        whose top-level arrays hold objects only.
    counts
        Key of each top-level array -> number of items the decoder found in it.
    chunk
        Bytes per vectorised pass (small values are for tests).

    Returns
    -------
    dict or None
        Key -> start lines, or ``None`` when the scan cannot vouch for its answer.
    """
    lazy = LazyLines.scan(data, counts, chunk)
    return None if lazy is None else {name: lazy.lines(name) for name in lazy.names}


class LazyLines:
    """Start lines of the items, each found when first asked for.

    The scan keeps every item's byte offset and each chunk's newline count. The first
    question inside a chunk counts that chunk's newlines every ``step`` bytes (one
    vectorised pass over the chunk); a line is then the newlines before its checkpoint
    plus a count of at most ``step`` bytes. Most runs ask for the lines of a few items
    (the ones with findings); a diff may ask for thousands (every finding new in one
    version). After ``EAGER_AFTER`` questions or one per ``EAGER_SHARE`` items,
    whichever is more, or when every line is wanted, all lines are computed at once as
    :func:`item_lines` does (about 1.5-2.5 s at 1M elements, where 11,000 questions
    one at a time cost about 0.25 s).
    """

    EAGER_AFTER = 64
    EAGER_SHARE = 32

    def __init__(self, data: bytes, scan: _Scan, found: Mapping[str, tuple[int, int]], step: int = STEP) -> None:
        self._data = data
        self._offsets = scan.items[0]
        self._chunk_starts = scan.chunk_starts
        self._chunk_newlines = scan.chunk_newlines
        self._step = step
        self._checkpoints: dict[int, tuple[list[int], list[int]]] = {}
        self._found = dict(found)
        self._asked = 0
        self._all: np.ndarray | None = None

    @classmethod
    def scan(cls, data: bytes, counts: Mapping[str, int], chunk: int = CHUNK, step: int = STEP) -> LazyLines | None:
        """The lazy lines of ``data``'s items, or ``None`` when the scan cannot vouch.
        ``chunk`` and ``step`` are bytes per vectorised pass and between newline
        checkpoints (small values are for tests)."""
        scanned = _scan(data, counts, chunk)
        return None if scanned is None else cls(data, *scanned, step=step)

    @property
    def names(self) -> list[str]:
        """The keys of the top-level arrays found, in file order."""
        return list(self._found)

    def line(self, name: str, index: int) -> int:
        low, high = self._found[name]
        if not 0 <= index < high - low:
            raise IndexError(index)
        if self._all is None and self._asked >= max(self.EAGER_AFTER, len(self._offsets) // self.EAGER_SHARE):
            self._compute_all()
        if self._all is not None:
            return int(self._all[low + index])
        self._asked += 1
        offset = int(self._offsets[low + index])
        starts, before = self._checkpoints_of(bisect_right(self._chunk_starts, offset) - 1)
        k = bisect_right(starts, offset) - 1
        return before[k] + self._data.count(b"\n", starts[k], offset) + 1

    def _checkpoints_of(self, chunk: int) -> tuple[list[int], list[int]]:
        """Start offset of every ``step`` bytes of chunk number ``chunk``, and the
        newlines before each (computed on the chunk's first question)."""
        found = self._checkpoints.get(chunk)
        if found is None:
            start = self._chunk_starts[chunk]
            end = self._chunk_starts[chunk + 1] if chunk + 1 < len(self._chunk_starts) else len(self._data)
            newline = np.frombuffer(self._data, dtype=np.uint8, count=end - start, offset=start) == ord("\n")
            whole = (end - start) // self._step * self._step
            counts = np.count_nonzero(newline[:whole].reshape(-1, self._step), axis=1).tolist()
            if whole < end - start:
                counts.append(int(np.count_nonzero(newline[whole:])))
            before = np.cumsum([self._chunk_newlines[chunk], *counts[:-1]]).tolist()
            found = self._checkpoints[chunk] = (list(range(start, end, self._step)), before)
        return found

    def lines(self, name: str) -> list[int]:
        if self._all is None:
            self._compute_all()
        low, high = self._found[name]
        return self._all[low:high].tolist()  # type: ignore[index]

    def _compute_all(self) -> None:
        newlines = np.flatnonzero(np.frombuffer(self._data, dtype=np.uint8) == ord("\n"))
        self._all = np.searchsorted(newlines, self._offsets) + 1
