"""Limited-memory BFGS in numpy: the optimiser of the exact fits.

The factorisation has no bounds, so the plain two-loop recursion with a backtracking
line search is all it needs. We first moved off scipy's L-BFGS-B (which also handles
bound constraints, through a generalised Cauchy point and a subspace minimisation)
because its iterations were slow here: 28 ms at 20 000 parameters with OpenBLAS's
thread pool on a shared machine, ten times the cost with one thread. The real cause
was the thread pool, now held to one thread (:mod:`tracecheck.embedding.threads`),
and with that fixed both optimisers cost about the same (``benchmarks/embedding.py``
runs scipy's as the baseline: ours took 1.13 and 1.06 times as long for the 1k
synthetic search in two runs, within the noise of a busy machine). This one is kept because it is short,
deterministic, uses elementwise numpy only, and the tests' recorded dimensions were
found with it.

References
----------
J. Nocedal, "Updating Quasi-Newton Matrices with Limited Storage", Math. Comp. 35(151),
1980 (the two-loop recursion). J. Nocedal, S. J. Wright, *Numerical Optimization*, 2nd
ed., Springer, 2006, Algorithms 7.4 and 7.5, and sec. 3.1 (Armijo backtracking).
"""

from __future__ import annotations

from collections import deque
from collections.abc import Callable

import numpy as np

__all__ = ["minimize_lbfgs"]

Objective = Callable[[np.ndarray], tuple[float, np.ndarray]]
_ARMIJO = 1e-4
_MAX_HALVINGS = 40


def _dot(a: np.ndarray, b: np.ndarray) -> float:
    # Elementwise product and sum: no BLAS call, so no thread pool to wake.
    return float(np.multiply(a, b).sum())


def _direction(gradient: np.ndarray, history: deque) -> np.ndarray:
    """``-H g`` by the two-loop recursion over the stored ``(s, y, 1 / y.s)`` pairs."""
    q = -gradient
    alphas = []
    for s, y, rho in reversed(history):
        alpha = rho * _dot(s, q)
        q = q - alpha * y
        alphas.append(alpha)
    if history:
        s, y, _ = history[-1]
        q = q * (_dot(s, y) / _dot(y, y))
    else:
        q = q / max(1.0, float(np.sqrt(_dot(gradient, gradient))))
    for (s, y, rho), alpha in zip(history, reversed(alphas), strict=True):
        q = q + (alpha - rho * _dot(y, q)) * s
    return q


def minimize_lbfgs(
    objective: Objective,
    theta: np.ndarray,
    *,
    callback: Callable[[np.ndarray], bool],
    max_iter: int,
    memory: int = 10,
) -> np.ndarray:
    """Minimise ``objective`` from ``theta`` until ``callback`` says stop.

    Parameters
    ----------
    objective
        ``theta -> (value, gradient)``; continuously differentiable (the squared hinge
        and the logistic loss are).
    theta
        Start; not modified.
    callback
        Called with each new iterate; returning ``True`` stops the run.
    max_iter
        Iteration cap.
    memory
        Number of correction pairs kept.

    Returns
    -------
    numpy.ndarray
        The last iterate (the start if no step decreased the objective).

    Examples
    --------
    >>> f = lambda t: (float(t @ t), 2 * t)
    >>> x = minimize_lbfgs(f, np.array([3.0, -4.0]), callback=lambda t: bool(t @ t < 1e-12), max_iter=50)
    >>> bool(np.allclose(x, 0.0))
    True
    """
    x = np.array(theta, dtype=np.float64)
    value, gradient = objective(x)
    history: deque = deque(maxlen=memory)
    for _ in range(max_iter):
        d = _direction(gradient, history)
        slope = _dot(gradient, d)
        if slope >= 0.0:  # not a descent direction: forget the curvature, go downhill
            history.clear()
            d = -gradient / max(1.0, float(np.sqrt(_dot(gradient, gradient))))
            slope = _dot(gradient, d)
            if slope >= 0.0:
                return x  # zero gradient
        step = 1.0
        for _ in range(_MAX_HALVINGS):
            trial = x + step * d
            trial_value, trial_gradient = objective(trial)
            if trial_value <= value + _ARMIJO * step * slope:
                break
            step *= 0.5
        else:
            return x  # no decrease along d: a minimum to working precision
        s, y = trial - x, trial_gradient - gradient
        sy = _dot(s, y)
        if sy > 1e-10 * _dot(y, y):
            history.append((s, y, 1.0 / sy))
        x, value, gradient = trial, trial_value, trial_gradient
        if callback(x):
            break
    return x
