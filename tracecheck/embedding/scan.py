"""Blockwise reconstruction of all ordered pairs, in bounded memory.

The logits of a block of source rows against every target are formed at once
(``rows x n`` float64, about 32 MB), compared with the links of those rows, and
dropped. 50 000 elements never need the 20 GB a full logit matrix would take.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["Scan", "scan", "BLOCK_BYTES"]

BLOCK_BYTES = 32 * 2**20


@dataclass
class Scan:
    """What a full pass found.

    Attributes
    ----------
    missing_src, missing_dst, missing_logit
        Links whose logit is not above ``threshold + margin``.
    spurious_src, spurious_dst, spurious_logit
        Non-links whose logit is at least ``threshold - bound`` (``bound`` is the
        certification margin for verification, the training margin for mining);
        at most ``limit`` per block, the highest first, when a limit is given.
    spurious_count
        All non-links with logit ``>= threshold - margin`` (not truncated).
    closest
        The smallest distance of a correctly reproduced pair's logit from the threshold.
    """

    missing_src: np.ndarray
    missing_dst: np.ndarray
    missing_logit: np.ndarray
    spurious_src: np.ndarray
    spurious_dst: np.ndarray
    spurious_logit: np.ndarray
    spurious_count: int
    closest: float

    @property
    def exact(self) -> bool:
        return self.missing_src.size == 0 and self.spurious_count == 0


def _concat(parts: list[np.ndarray], dtype) -> np.ndarray:
    return np.concatenate(parts) if parts else np.zeros(0, dtype=dtype)


def scan(
    x: np.ndarray,
    y: np.ndarray,
    src: np.ndarray,
    dst: np.ndarray,
    *,
    threshold: float,
    margin: float,
    bound: float | None = None,
    limit: int | None = None,
    rng: np.random.Generator | None = None,
    progress: Callable[[float, str], None] | None = None,
) -> Scan:
    """Compare the thresholded logits ``x @ y.T`` with the links ``src -> dst``.

    Parameters
    ----------
    x, y
        Source and target factors, ``n x k`` float64.
    src, dst
        The links as positions, sorted by ``(src, dst)``, no self-pairs.
    threshold, margin
        A pair is reproduced as a link if its logit exceeds ``threshold + margin``
        and as a non-link if it is below ``threshold - margin``; self-pairs are
        never asked.
    bound
        Report non-links with logit ``>= threshold - bound`` (default: ``margin``).
    limit
        Keep at most this many reported non-links per block: the highest logits, or a
        uniform sample of them when ``rng`` is given.
    progress
        Called with the fraction of rows done.

    Returns
    -------
    Scan
    """
    n = x.shape[0]
    bound = margin if bound is None else bound
    indptr = np.searchsorted(src, np.arange(n + 1))
    rows = max(1, min(n, BLOCK_BYTES // max(1, 8 * n)))
    yt = np.ascontiguousarray(y.T)
    buffer = np.empty((rows, n))
    found: dict[str, list[np.ndarray]] = {key: [] for key in ("ms", "md", "ml", "ss", "sd", "sl")}
    count, closest = 0, np.inf
    for start in range(0, n, rows):
        stop = min(n, start + rows)
        z = np.matmul(x[start:stop], yt, out=buffer[: stop - start])
        if threshold:  # a pass over the block saved in the usual case of threshold 0
            z -= threshold
        r = src[indptr[start] : indptr[stop]] - start
        c = dst[indptr[start] : indptr[stop]]
        on_links = z[r, c]
        bad = on_links <= margin
        if bad.any():
            found["ms"].append(r[bad] + start)
            found["md"].append(c[bad])
            found["ml"].append(on_links[bad] + threshold)
        if (~bad).any():
            closest = min(closest, float(on_links[~bad].min()))
        z[r, c] = -np.inf
        local = np.arange(stop - start)
        z[local, local + start] = -np.inf
        highest = float(z.max())
        if highest >= -max(bound, margin):
            count += _collect_non_links(z, start, threshold, margin, bound, limit, rng, found)
        elif np.isfinite(highest):
            closest = min(closest, -highest)
        if progress is not None:
            progress(stop / n, f"{stop}/{n} rows")
    return Scan(
        _concat(found["ms"], np.int64), _concat(found["md"], np.int64), _concat(found["ml"], float),
        _concat(found["ss"], np.int64), _concat(found["sd"], np.int64), _concat(found["sl"], float),
        count, float(closest),
    )


def _collect_non_links(z, start, threshold, margin, bound, limit, rng, found) -> int:
    """Record the block's non-links at or above ``-bound``; return the count above ``-margin``."""
    r, c = np.nonzero(z >= -max(bound, margin))
    values = z[r, c]
    count = int(np.count_nonzero(values >= -margin))
    keep = values >= -bound
    r, c, values = r[keep], c[keep], values[keep]
    if limit is not None and values.size > limit:
        if rng is not None:
            top = np.sort(rng.choice(values.size, limit, replace=False))
        else:
            top = np.argpartition(-values, limit - 1)[:limit]
        r, c, values = r[top], c[top], values[top]
    found["ss"].append(r + start)
    found["sd"].append(c)
    found["sl"].append(values + threshold)
    return count
