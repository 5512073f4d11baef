"""The stored embedding: two factor matrices, their element ids, and how they were made.

The decoder predicts a link ``i -> j`` when the logit ``x_i . y_j`` is above the
threshold (0, i.e. sigma(x_i . y_j) > 1/2). Separate source and target factors keep
direction. One ``.npz`` file holds everything; it is written with fixed zip timestamps
so the same embedding gives the same bytes, and read without pickles.
"""

from __future__ import annotations

import io
import json
import zipfile
import zlib
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from tracecheck.errors import InputError

__all__ = [
    "FORMAT",
    "Embedding",
    "certification_margin",
    "dumps",
    "loads",
    "load",
    "truncate",
]

FORMAT = "tracecheck-embedding/1"
_KEYS = ("format", "x", "y", "ids", "dimension", "threshold", "settings", "fingerprint", "relations")
# Unit roundoff of float64 (2**-53) and a floor for the margin, so that a logit that
# is zero up to rounding is never taken as either side of the threshold.
_UNIT_ROUNDOFF = 2.0**-53
_MARGIN_FLOOR = 1e-9


@dataclass(frozen=True)
class Embedding:
    """Source factors ``x`` and target factors ``y`` (``n x k``, float64) over ``ids``.

    Attributes
    ----------
    relations
        The relations the embedding was fitted to; ``None`` for their union.
    settings
        Training settings (JSON-serialisable), recorded for the reader.
    fingerprint
        :func:`tracecheck.embedding.graph.fingerprint` of the graph it was fitted to.
    """

    x: np.ndarray
    y: np.ndarray
    ids: tuple[str, ...]
    threshold: float = 0.0
    relations: tuple[str, ...] | None = None
    settings: Mapping[str, Any] = field(default_factory=dict)
    fingerprint: str = ""

    @property
    def dimension(self) -> int:
        return int(self.x.shape[1])

    @property
    def margin(self) -> float:
        return certification_margin(self.x, self.y)


def certification_margin(x: np.ndarray, y: np.ndarray) -> float:
    """A bound on the float64 rounding error of any logit ``x_i . y_j``.

    A logit counts as above (below) the threshold only if it is above (below) it by
    more than this margin, so a certified exact embedding is exact in real arithmetic.

    Parameters
    ----------
    x, y
        Factor matrices of shape ``(n, k)``.

    Returns
    -------
    float
        ``max(1e-9, 2 k u max|x_i| max|y_j|)`` with ``u = 2**-53``: the classical bound
        ``|fl(x.y) - x.y| <= gamma_k sum|x_l y_l|`` (Higham, *Accuracy and Stability of
        Numerical Algorithms*, 2nd ed., 2002, sec. 3.1) with Cauchy-Schwarz and slack.

    References
    ----------
    N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, SIAM, 2002.
    """
    if x.size == 0 or y.size == 0:
        return _MARGIN_FLOOR
    k = x.shape[1]
    bound = 2.0 * k * _UNIT_ROUNDOFF * float(np.linalg.norm(x, axis=1).max()) * float(
        np.linalg.norm(y, axis=1).max()
    )
    return max(_MARGIN_FLOOR, bound)


def truncate(x: np.ndarray, y: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """The best rank-``k`` factors of ``x @ y.T`` (in Frobenius norm), without forming it.

    Used to start a smaller fit from a larger exact one: QR of both factors, SVD of
    the small core, singular values split evenly between the sides.
    """
    qx, rx = np.linalg.qr(x)
    qy, ry = np.linalg.qr(y)
    u, s, vt = np.linalg.svd(rx @ ry.T)
    root = np.sqrt(s[:k])
    return (qx @ u[:, :k]) * root, (qy @ vt[:k].T) * root


def dumps(embedding: Embedding) -> bytes:
    """The ``.npz`` bytes of ``embedding`` (deterministic: fixed zip timestamps)."""
    arrays = {
        "format": np.array(FORMAT),
        "x": np.ascontiguousarray(embedding.x, dtype=np.float64),
        "y": np.ascontiguousarray(embedding.y, dtype=np.float64),
        "ids": np.array(embedding.ids, dtype=str) if embedding.ids else np.zeros(0, dtype="<U1"),
        "dimension": np.array(embedding.dimension, dtype=np.int64),
        "threshold": np.array(embedding.threshold, dtype=np.float64),
        "settings": np.array(json.dumps(dict(embedding.settings), sort_keys=True)),
        "fingerprint": np.array(embedding.fingerprint),
        "relations": np.array(json.dumps(None if embedding.relations is None else list(embedding.relations))),
    }
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", compression=zipfile.ZIP_DEFLATED) as archive:
        for name in _KEYS:
            info = zipfile.ZipInfo(f"{name}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            info.compress_type = zipfile.ZIP_DEFLATED
            member = io.BytesIO()
            np.lib.format.write_array(member, arrays[name], allow_pickle=False)
            archive.writestr(info, member.getvalue())
    return buffer.getvalue()


def _refuse(origin: str, problem: str) -> InputError:
    return InputError(
        f"{origin}: not a usable tracecheck embedding ({problem}). Fit a new one with "
        "'tracecheck embed fit MODEL -o FILE.npz'."
    )


def _text(data: Mapping[str, np.ndarray], key: str, origin: str) -> str:
    value = data[key]
    if value.shape != () or value.dtype.kind != "U":
        raise _refuse(origin, f"'{key}' is not a text value")
    return str(value)


def _json(data: Mapping[str, np.ndarray], key: str, origin: str) -> Any:
    try:
        return json.loads(_text(data, key, origin))
    except json.JSONDecodeError as error:
        raise _refuse(origin, f"'{key}' is not valid JSON: {error.msg}") from None


def _factors(data: Mapping[str, np.ndarray], origin: str) -> tuple[np.ndarray, np.ndarray]:
    x, y = data["x"], data["y"]
    for key, value in (("x", x), ("y", y)):
        if value.ndim != 2 or value.dtype.kind != "f":
            raise _refuse(origin, f"'{key}' is not a matrix of floating-point numbers")
        if not np.isfinite(value).all():
            raise _refuse(origin, f"'{key}' holds NaN or infinite values")
    if x.shape != y.shape:
        raise _refuse(origin, f"'x' has shape {x.shape} but 'y' has shape {y.shape}")
    return x.astype(np.float64), y.astype(np.float64)


def _ids(data: Mapping[str, np.ndarray], n: int, origin: str) -> tuple[str, ...]:
    ids = data["ids"]
    if ids.ndim != 1 or (ids.size and ids.dtype.kind != "U"):
        raise _refuse(origin, "'ids' is not a list of element ids")
    if ids.size != n:
        raise _refuse(origin, f"{ids.size} element ids for {n} factor rows")
    result = tuple(str(i) for i in ids)
    if len(set(result)) != len(result):
        raise _refuse(origin, "'ids' repeats an element id")
    return result


def loads(data: bytes, origin: str) -> Embedding:
    """Read an embedding from ``.npz`` bytes; anything malformed is an :class:`InputError`.

    Pickled objects are never loaded (``allow_pickle=False``).
    """
    try:
        with np.load(io.BytesIO(data), allow_pickle=False) as archive:
            missing = [key for key in _KEYS if key not in archive.files]
            if missing:
                raise _refuse(origin, f"missing {', '.join(repr(k) for k in missing)}")
            arrays = {key: archive[key] for key in _KEYS}
    except InputError:
        raise
    except (ValueError, OSError, EOFError, KeyError, zipfile.BadZipFile, zlib.error) as error:
        raise _refuse(origin, f"cannot be read as .npz: {error}") from None
    if _text(arrays, "format", origin) != FORMAT:
        raise _refuse(origin, f"format is {str(arrays['format'])!r}, expected {FORMAT!r}")
    x, y = _factors(arrays, origin)
    dimension = arrays["dimension"]
    if dimension.shape != () or dimension.dtype.kind not in "iu" or int(dimension) != x.shape[1]:
        raise _refuse(origin, f"'dimension' does not match the {x.shape[1]} factor columns")
    threshold = arrays["threshold"]
    if threshold.shape != () or threshold.dtype.kind != "f" or not np.isfinite(threshold):
        raise _refuse(origin, "'threshold' is not a finite number")
    settings = _json(arrays, "settings", origin)
    relations = _json(arrays, "relations", origin)
    if not isinstance(settings, dict):
        raise _refuse(origin, "'settings' is not a JSON object")
    if relations is not None and not (
        isinstance(relations, list) and all(isinstance(r, str) for r in relations)
    ):
        raise _refuse(origin, "'relations' is neither null nor a list of names")
    return Embedding(
        x=x,
        y=y,
        ids=_ids(arrays, x.shape[0], origin),
        threshold=float(threshold),
        relations=None if relations is None else tuple(relations),
        settings=settings,
        fingerprint=_text(arrays, "fingerprint", origin),
    )


def load(path: str | Path) -> Embedding:
    """Read an embedding file; a missing or unreadable file is an :class:`InputError`."""
    path = Path(path)
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: no such embedding file.") from None
    except (IsADirectoryError, PermissionError) as error:
        raise InputError(f"{path}: cannot be read ({error.strerror}).") from None
    return loads(data, str(path))
