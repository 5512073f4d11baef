"""The ``waiver-expired`` rule: a waiver past its last valid day.

The engine runs every rule over a model alone and has no waivers, so there this rule
yields nothing; :func:`tracecheck.waivers.apply_waivers` runs it with the expired
waivers of a run in its context and stamps the findings the usual way.
"""

from __future__ import annotations

from collections.abc import Iterator

from tracecheck.rules import Hit, rule

__all__ = ["waiver_expired"]


@rule(
    "waiver-expired",
    severity="error",
    short="A waiver has passed its expiry date.",
    full="A waiver accepts one finding until a date. After that date it waives nothing, "
    "the finding it covered counts again, and this finding asks for the waiver to be "
    "reviewed: renewed with a new date and approval, or removed once the finding is fixed.",
    help="Review the waiver: fix the finding and delete the waiver, or renew it with a new "
    "expiry date, reason and approver.",
    template="waiver for {rule} on {subject} (approved by {approved_by}) expired on {expires}",
)
def waiver_expired(context) -> Iterator[Hit]:
    waivers = getattr(context, "waivers", None)
    if not waivers:
        return
    for waiver in waivers:
        args = {"rule": waiver.rule, "subject": waiver.subject, "approved_by": waiver.approved_by,
                "expires": waiver.expires.isoformat()}
        relation = waiver.link[2] if waiver.link is not None else None
        key = (waiver.rule, waiver.declaration or "", waiver.expires.isoformat())
        yield Hit(waiver.subject_ids, args, location=waiver.location, relation=relation, key=key)
