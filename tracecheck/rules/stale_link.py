"""The ``stale-link`` rule: links whose ends changed since a person accepted them.

It reads the review ledger (:mod:`tracecheck.review`) nearest above the model file, or
above the working folder for standard input and ``REV:PATH``; without a ledger it
reports nothing.
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

from tracecheck.review import find_ledger, read_ledger, stale_links
from tracecheck.rules import Hit, rule
from tracecheck.rules.engine import RuleContext

__all__ = ["stale_link"]


def _anchor(origin: str) -> Path:
    path = Path(origin)
    return path.parent if os.path.isfile(path) else Path.cwd()


@rule(
    "stale-link",
    severity="warning",
    short="A reviewed trace link joins an element that changed since the review.",
    full="The review ledger (.tracecheck/reviews.json, written by 'tracecheck review accept') "
    "holds a hash of what both ends of each accepted link said when it was accepted: kind, "
    "name, text and attributes. When either end has changed since, the link needs review again.",
    help="Review the link against the changed element, then record it with 'tracecheck review accept'.",
    template="{source} {relation} {target} was accepted by {by} on {on}; since then its {changed} changed",
)
def stale_link(context: RuleContext) -> Iterator[Hit]:
    ledger = find_ledger(_anchor(context.model.origin))
    if ledger is None:
        return
    for stale in stale_links(context.model, read_ledger(ledger)):
        review = stale.review
        link = context.distinct_links[review.triple][0]
        args = {"source": review.source, "relation": review.relation, "target": review.target,
                "by": review.accepted_by, "on": review.accepted_on, "changed": " and ".join(stale.changed)}
        yield Hit((review.source, review.target), args, link=link)
