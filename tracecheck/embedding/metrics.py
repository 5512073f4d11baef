"""Ranking metrics for held-out link prediction: ROC-AUC and average precision."""

from __future__ import annotations

import numpy as np

__all__ = ["roc_auc", "average_precision", "midranks"]


def midranks(values: np.ndarray) -> np.ndarray:
    """1-based ranks of ``values``, ties sharing the mean of the ranks they span."""
    values = np.asarray(values, dtype=float)
    order = np.argsort(values, kind="mergesort")
    ordered = values[order]
    _, start, count = np.unique(ordered, return_index=True, return_counts=True)
    ranks = np.empty(values.size)
    ranks[order] = np.repeat(start + (count + 1) / 2.0, count)
    return ranks


def roc_auc(positive: np.ndarray, negative: np.ndarray) -> float:
    """Area under the ROC curve: the probability that a random positive outscores a
    random negative, ties counting one half.

    Parameters
    ----------
    positive, negative
        Scores of the held-out links and of the sampled non-links.

    Returns
    -------
    float
        ``U / (n1 n2)`` where ``U`` is the Mann-Whitney statistic of the positives,
        computed from midranks: ``U = R1 - n1 (n1 + 1) / 2``.

    References
    ----------
    H. B. Mann, D. R. Whitney, "On a Test of Whether one of Two Random Variables is
    Stochastically Larger than the Other", Ann. Math. Statist. 18(1), 1947.
    J. A. Hanley, B. J. McNeil, "The Meaning and Use of the Area under a Receiver
    Operating Characteristic (ROC) Curve", Radiology 143(1), 1982.

    Examples
    --------
    >>> roc_auc(np.array([0.9, 0.4]), np.array([0.5, 0.1]))
    0.75
    """
    n1, n2 = len(positive), len(negative)
    if n1 == 0 or n2 == 0:
        raise ValueError("ROC-AUC needs at least one positive and one negative score")
    ranks = midranks(np.concatenate([positive, negative]))
    u = ranks[:n1].sum() - n1 * (n1 + 1) / 2.0
    return float(u / (n1 * n2))


def average_precision(positive: np.ndarray, negative: np.ndarray) -> float:
    """Average precision: the precision at each distinct score threshold, weighted by
    the recall gained there (tied scores are one threshold).

    With distinct scores this is the mean, over the positives, of the precision of
    the ranking cut just below each positive.

    References
    ----------
    C. D. Manning, P. Raghavan, H. Schuetze, *Introduction to Information Retrieval*,
    Cambridge University Press, 2008, sec. 8.4.

    Examples
    --------
    >>> average_precision(np.array([0.9, 0.4]), np.array([0.5, 0.1]))
    0.8333333333333333
    """
    n1 = len(positive)
    if n1 == 0:
        raise ValueError("average precision needs at least one positive score")
    scores = np.concatenate([positive, negative])
    labels = np.concatenate([np.ones(n1), np.zeros(len(negative))])
    order = np.argsort(-scores, kind="mergesort")
    scores, labels = scores[order], labels[order]
    last = np.r_[np.nonzero(np.diff(scores))[0], scores.size - 1]  # end of each tie group
    hits = np.cumsum(labels)[last]
    precision = hits / (last + 1)
    recall_gain = np.diff(np.r_[0.0, hits]) / n1
    return float(np.sum(precision * recall_gain))
