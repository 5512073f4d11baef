"""``tracecheck review accept`` and ``tracecheck review status``."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from tracecheck import review
from tracecheck.commands.common import Streams, emit, load
from tracecheck.errors import UsageError
from tracecheck.report import RenderOptions, render

__all__ = ["accept", "status", "StatusResult"]


@dataclass(frozen=True)
class StatusResult:
    model: str
    ledger: str | None
    data: dict[str, Any]

    def to_json(self) -> dict[str, Any]:
        return {"model": self.model, "ledger": self.ledger, **self.data}


def _ledger_for(loaded) -> Path:
    return review.ledger_location(loaded.source.path)


def accept(
    spec: str,
    links: Sequence[str],
    *,
    all_links: bool = False,
    by: str | None = None,
    on: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    if all_links == bool(links):
        raise UsageError("name the links to accept ('SOURCE RELATION TARGET' ...) or give --all, not both.")
    triples = None if all_links else [review.parse_link(text) for text in links]
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    path = _ledger_for(loaded)
    if by is None:
        from tracecheck import gitsource

        by = gitsource.user_name(path.parent.parent) or ""
    day = on or datetime.now(UTC).date().isoformat()
    existing = review.read_ledger(path) if path.is_file() else {}
    updated, recorded = review.accept(loaded.model, existing, triples, by=by, on=day)
    if recorded:
        review.write_ledger(path, updated)
    if recorded:
        streams.stdout.write(
            f"{len(recorded)} link{'s' if len(recorded) != 1 else ''} recorded as reviewed by {by.strip()} "
            f"on {day} in {path}; {len(updated)} in the ledger.\n"
        )
    else:
        streams.stdout.write(f"Nothing to record: the links are already reviewed and unchanged ({path}).\n")
    return 0


def status(
    spec: str,
    *,
    fmt: str = "text",
    output: str | None = None,
    fail_on_stale: bool = False,
    config_option: str | None = None,
    input_format: str | None = None,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    path = _ledger_for(loaded)
    reviews = review.read_ledger(path) if path.is_file() else {}
    result = StatusResult(loaded.source.origin, str(path) if path.is_file() else None,
                          review.status(loaded.model, reviews))
    emit(render("review-status", fmt, result, options or RenderOptions()), output, streams)
    return 1 if fail_on_stale and result.data["stale"] else 0
