"""The ``coverage`` rule: one finding per element a declaration leaves uncovered."""

from __future__ import annotations

from collections.abc import Iterator

from tracecheck.coverage import evaluate_codes
from tracecheck.rules import Hit, rule
from tracecheck.rules.engine import RuleContext

__all__ = ["coverage"]


def _need(declaration) -> str:
    need = declaration.need
    relations = "/".join(need.relations)
    kinds = "any kind" if need.kinds is None else "/".join(sorted(need.kinds))
    count = "" if declaration.at_least == 1 else f"at least {declaration.at_least} "
    if need.direction == "incoming":
        return f"no {count}incoming {relations} from {kinds}" if not count else (
            f"fewer than {declaration.at_least} incoming {relations} from {kinds}"
        )
    return f"no {count}outgoing {relations} to {kinds}" if not count else (
        f"fewer than {declaration.at_least} outgoing {relations} to {kinds}"
    )


@rule(
    "coverage",
    severity="warning",
    short="An element lacks the trace links a coverage declaration requires.",
    full="Coverage declarations say which elements need which links (by default: every "
    "requirement verified by a test, every leaf requirement satisfied, every function "
    "allocated, every test verifying something that exists, every hazard mitigated). "
    "One finding per uncovered element, naming its declaration.",
    help="Add the missing trace link, or record why it is not needed in a waiver.",
    template="{id} ({kind}) is not covered by {declaration}: {need}",
)
def coverage(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    for declaration in context.config.declarations:
        _, uncovered, _ = evaluate_codes(context.model, declaration)
        need = _need(declaration)
        for element_id in sorted(arrays.names[c] for c in uncovered.tolist()):
            args = {
                "id": element_id,
                "kind": arrays.kind_names[arrays.kind[arrays.position[element_id]]],
                "declaration": declaration.name,
                "need": need,
            }
            yield Hit(
                (element_id,),
                args,
                declaration=declaration.name,
                severity=declaration.severity or context.config.severities.get("coverage"),
            )
