"""Learned-embedding fidelity check: fit, verify and suggest (numpy, scipy's L-BFGS-B).

- :func:`~tracecheck.embedding.fit.fit_model`: the smallest exact dimension found (an
  upper bound) or a given one;
- :func:`~tracecheck.embedding.verify.verify`: does a stored embedding still reproduce
  the model, and which links does it miss or invent;
- :func:`~tracecheck.embedding.suggest.suggest`: held-out evaluation and ranked links
  for a human reviewer.

References
----------
S. Chanpuriya, C. Musco, K. Sotiropoulos, C. E. Tsourakakis, "Node Embeddings and Exact
Low-Rank Representations of Complex Networks", NeurIPS 2020.
"""

from __future__ import annotations

from tracecheck.embedding.factors import Embedding, dumps, load, loads
from tracecheck.embedding.fit import FitResult, FitSettings, fit_graph, fit_model
from tracecheck.embedding.graph import PairGraph, pair_graph
from tracecheck.embedding.suggest import SuggestResult, SuggestSettings, suggest
from tracecheck.embedding.verify import VerifyResult, verify, verify_file

__all__ = [
    "Embedding", "dumps", "load", "loads",
    "FitResult", "FitSettings", "fit_graph", "fit_model",
    "PairGraph", "pair_graph",
    "SuggestResult", "SuggestSettings", "suggest",
    "VerifyResult", "verify", "verify_file",
]
