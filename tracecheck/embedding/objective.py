"""Training objectives for the factorisation ``logit_ij = x_i . y_j`` and their gradients.

Two pair losses, both with analytic gradients, over a label ``s = +1`` (link) or
``-1`` (no link) and a weight ``w``:

- ``squared-hinge`` (exact fits): ``w * max(0, 1 - s z)**2``. It is zero once a pair is
  on the right side of the threshold by the margin 1, so training stops pushing pairs
  that are already right and spends its effort on the violated ones; the logistic loss
  never reaches zero and keeps inflating the factors. Squared (not plain) hinge keeps
  the objective continuously differentiable, which L-BFGS needs.
- ``logistic`` (link suggestion): ``w * log(1 + exp(-s z))``, the likelihood of the
  logistic factorisation, with an L2 penalty so scores stay calibrated.

Links get the class weight ``w+ = non-links / links`` so the few links are not drowned
by the many non-links. Self-pairs always have weight 0.

References
----------
S. Chanpuriya, C. Musco, K. Sotiropoulos, C. E. Tsourakakis, "Node Embeddings and Exact
Low-Rank Representations of Complex Networks", NeurIPS 2020 (the logistic
factorisation and its exact low-rank fits).
R. H. Byrd, P. Lu, J. Nocedal, C. Zhu, "A Limited Memory Algorithm for Bound Constrained
Optimization", SIAM J. Sci. Comput. 16(5), 1995 (L-BFGS-B, scipy's, used unbounded here).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy import sparse
from scipy.optimize import minimize

__all__ = ["LOSSES", "Objective", "dense_objective", "pair_objective", "split", "pair_loss", "minimise"]

LOSSES = ("squared-hinge", "logistic")
Objective = Callable[[np.ndarray], tuple[float, np.ndarray]]


def minimise(objective: Objective, theta: np.ndarray, *, max_iter: int,
             callback: Callable[[np.ndarray], bool] | None = None) -> np.ndarray:
    """Run scipy's L-BFGS-B on ``objective`` from ``theta``; return the last iterate.

    Parameters
    ----------
    objective
        ``theta -> (value, gradient)``, continuously differentiable (both losses are).
    theta
        Start; not modified.
    max_iter
        Iteration cap.
    callback
        Called with each new iterate; returning ``True`` stops the run there (the exact
        fits stop at the first certified iterate).

    Returns
    -------
    numpy.ndarray
        The iterate the run ended on.

    Examples
    --------
    >>> x = minimise(lambda t: (float(t @ t), 2 * t), np.array([3.0, -4.0]), max_iter=50)
    >>> bool(np.allclose(x, 0.0))
    True

    References
    ----------
    R. H. Byrd, P. Lu, J. Nocedal, C. Zhu, SIAM J. Sci. Comput. 16(5), 1995.
    """
    last = [np.array(theta, dtype=np.float64)]

    def step(intermediate_result) -> None:
        last[0] = np.array(intermediate_result.x)  # scipy may reuse its buffer
        if callback is not None and callback(intermediate_result.x):
            raise StopIteration  # scipy >= 1.11 ends the run and keeps this iterate

    # No tolerance stops: the caller's callback or the iteration cap ends a run, so the
    # result does not hinge on how flat the loss happens to be.
    minimize(objective, last[0], jac=True, method="L-BFGS-B", callback=step,
             options={"maxiter": max_iter, "maxfun": 2 * max_iter, "ftol": 0.0, "gtol": 0.0,
                      "maxcor": 20})
    return last[0]


def split(theta: np.ndarray, n: int, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Views of the source and target factors inside the flat parameter vector."""
    return theta[: n * k].reshape(n, k), theta[n * k :].reshape(n, k)


def pair_loss(z: np.ndarray, sign: np.ndarray, weight: np.ndarray, loss: str) -> tuple[float, np.ndarray]:
    """Loss summed over pairs and its derivative with respect to each logit."""
    if loss == "squared-hinge":
        r = np.maximum(0.0, 1.0 - sign * z)
        return float(np.sum(weight * r * r)), -2.0 * weight * sign * r
    if loss == "logistic":
        margin = -sign * z
        value = np.sum(weight * np.logaddexp(0.0, margin))
        return float(value), -weight * sign * _sigmoid(margin)
    raise ValueError(f"unknown loss {loss!r}")


def _sigmoid(v: np.ndarray) -> np.ndarray:
    return 0.5 * (1.0 + np.tanh(0.5 * v))


@dataclass
class DenseState:
    """The logits of the last evaluation, so a callback can test them without recomputing."""

    theta: np.ndarray | None = None
    z: np.ndarray | None = None
    sz: np.ndarray | None = None


def dense_objective(
    link: np.ndarray, k: int, *, loss: str, positive_weight: float, l2: float = 0.0
) -> tuple[Objective, DenseState]:
    """Full-batch objective over all ``n * n`` ordered pairs (self-pairs excluded).

    Parameters
    ----------
    link
        Boolean ``n x n`` adjacency (``link[i, j]``: a link ``i -> j``).
    k
        Dimension of each factor.
    loss
        One of :data:`LOSSES`.
    positive_weight
        Weight of a link pair relative to a non-link pair.
    l2
        Coefficient of ``|X|^2 + |Y|^2``.

    Returns
    -------
    (objective, state)
        ``objective(theta) -> (value, gradient)``; ``state`` holds the last logits.
    """
    n = link.shape[0]
    sign = np.where(link, 1.0, -1.0)
    weight = np.where(link, positive_weight, 1.0)
    np.fill_diagonal(weight, 0.0)
    minus_two_sign = -2.0 * sign
    state = DenseState()

    # Preallocated n x n buffers: fresh temporaries of this size are mapped and
    # page-faulted by the allocator at every call, which cost more than the arithmetic.
    buffers = {name: np.empty((n, n)) for name in ("z", "sz", "r", "wr")}

    def hinge(z: np.ndarray) -> tuple[float, np.ndarray]:
        # pair_loss's squared hinge in place, six passes over n^2 instead of ten: this
        # is where a dense fit spends its time. state.sz keeps s * z for the monitor.
        sz = np.multiply(sign, z, out=buffers["sz"])
        r = np.subtract(1.0, sz, out=buffers["r"])
        np.maximum(r, 0.0, out=r)
        wr = np.multiply(weight, r, out=buffers["wr"])
        value = float(np.multiply(wr, r, out=r).sum())
        state.sz = sz
        return value, np.multiply(wr, minus_two_sign, out=wr)

    def objective(theta: np.ndarray) -> tuple[float, np.ndarray]:
        x, y = split(theta, n, k)
        z = np.matmul(x, y.T, out=buffers["z"])
        if loss == "squared-hinge":
            value, dz = hinge(z)
        else:
            value, dz = pair_loss(z, sign, weight, loss)
        grad = np.concatenate([(dz @ y).ravel(), (dz.T @ x).ravel()])
        if l2:
            value += l2 * float(theta @ theta)
            grad += 2.0 * l2 * theta
        state.theta, state.z = theta.copy(), z
        return value, grad

    return objective, state


def pair_objective(
    n: int,
    k: int,
    src: np.ndarray,
    dst: np.ndarray,
    sign: np.ndarray,
    weight: np.ndarray,
    *,
    loss: str,
    l2: float = 0.0,
    implicit: float = 0.0,
) -> tuple[Objective, DenseState]:
    """Objective over a chosen set of pairs (an active set), sparse in memory.

    The pairs must be sorted by ``(src, dst)``; gradients go through one CSR matrix
    whose structure is built once. ``state.z`` holds the pair logits of the last call.

    ``implicit`` adds ``implicit * sum_ij (z_ij + 1)**2`` over *all* ``n^2`` pairs,
    computed in ``O(n k^2)`` from the Gram matrices without forming a logit:
    ``|X Y^T|_F^2 = tr((X^T X)(Y^T Y))``. It pulls the logits of the pairs not in the
    active set towards -1, so the full pass finds far fewer violated non-links (the
    implicit all-negatives device of weighted matrix factorisation; Hu, Koren,
    Volinsky, "Collaborative Filtering for Implicit Feedback Datasets", ICDM 2008).
    """
    state = DenseState()
    indptr = np.searchsorted(src, np.arange(n + 1)).astype(np.int64)
    structure = sparse.csr_matrix((np.zeros(src.size), dst, indptr), shape=(n, n))

    def objective(theta: np.ndarray) -> tuple[float, np.ndarray]:
        x, y = split(theta, n, k)
        z = np.einsum("ij,ij->i", x.take(src, axis=0), y.take(dst, axis=0))  # take: 2x faster than x[src]
        value, dz = pair_loss(z, sign, weight, loss)
        structure.data = dz
        gx, gy = structure @ y, structure.T @ x
        if implicit:
            gram_x, gram_y = x.T @ x, y.T @ y
            sum_x, sum_y = x.sum(axis=0), y.sum(axis=0)
            value += implicit * float(np.sum(gram_x * gram_y) + 2.0 * sum_x @ sum_y + n * n)
            gx += 2.0 * implicit * (x @ gram_y + sum_y)
            gy += 2.0 * implicit * (y @ gram_x + sum_x)
        grad = np.concatenate([gx.ravel(), gy.ravel()])
        if l2:
            value += l2 * float(theta @ theta)
            grad += 2.0 * l2 * theta
        state.theta, state.z = theta.copy(), z
        return value, grad

    return objective, state
