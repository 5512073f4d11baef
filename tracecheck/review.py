"""The review ledger: which trace links a person accepted, and what both ends said then.

``tracecheck review accept`` records, in ``.tracecheck/reviews.json`` at the root of the
model's repository (the model's folder when it is in none), a content hash of both
ends of each accepted link — the fields a reviewer reads: kind, name, text and
attributes — with who accepted it and on which date. The ``stale-link`` rule and
``review status`` compare those hashes with the model: a link is *stale* when an end
it joins has changed since its last recorded review.

The ledger is the only file tracecheck writes into a user's repository, and only on
that explicit command. It is written atomically, sorted by link, one field per line,
so its history diffs cleanly. Model exports are never touched.
"""

from __future__ import annotations

import hashlib
import json
import re
from collections.abc import Iterable
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

from tracecheck.errors import InputError, UsageError
from tracecheck.model import Element, Model

__all__ = [
    "LEDGER",
    "FORMAT",
    "Review",
    "Stale",
    "content_hash",
    "ledger_location",
    "find_ledger",
    "read_ledger",
    "write_ledger",
    "parse_link",
    "accept",
    "stale_links",
]

LEDGER = Path(".tracecheck") / "reviews.json"
FORMAT = "tracecheck-reviews/1"
_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")
_FIELDS = ("source", "relation", "target", "source_sha256", "target_sha256", "accepted_by", "accepted_on")

Triple = tuple[str, str, str]  # (source, target, relation), as Link.triple


def content_hash(element: Element) -> str:
    """SHA-256 of what a reviewer reads of an element: kind, name, text, attributes.

    Canonical JSON (sorted keys, no spaces), so attribute order and file layout do not
    matter; the element's position, parent and source line are not part of it.
    """
    fields = {"kind": element.kind, "name": element.name, "text": element.text,
              "attributes": dict(element.attributes)}
    text = json.dumps(fields, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


@dataclass(frozen=True)
class Review:
    source: str
    relation: str
    target: str
    source_sha256: str
    target_sha256: str
    accepted_by: str
    accepted_on: str

    @property
    def triple(self) -> Triple:
        return (self.source, self.target, self.relation)


@dataclass(frozen=True)
class Stale:
    review: Review
    changed: tuple[str, ...]  # "source" and/or "target"


def ledger_location(model_path: Path | None) -> Path:
    """Where ``review accept`` writes: the repository root around the model, else its folder."""
    from tracecheck import gitsource

    anchor = (model_path.resolve().parent if model_path is not None else Path.cwd().resolve())
    root = gitsource.find_root(anchor)
    return (root or anchor) / LEDGER


def find_ledger(start: Path) -> Path | None:
    """The nearest ``.tracecheck/reviews.json`` in ``start`` or a folder above it.

    The search stops at the root of the repository around ``start`` (a folder holding
    ``.git``), so a ledger outside the repository never judges its models.
    """
    folder = start.resolve()
    for candidate in (folder, *folder.parents):
        path = candidate / LEDGER
        if path.is_file():
            return path
        if (candidate / ".git").exists():
            break
    return None


def _bad(path: Path, where: str, what: str) -> InputError:
    return InputError(f"{path}: {where}: {what} (the review ledger is written by 'tracecheck review accept').")


def read_ledger(path: Path) -> dict[Triple, Review]:
    """The reviews in ``path`` by link; a malformed ledger is an :class:`InputError`."""
    try:
        document = json.loads(path.read_text("utf-8"))
    except OSError as error:
        raise InputError(f"{path}: cannot read the review ledger ({error.strerror or error}).") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as error:
        line = getattr(error, "lineno", None)
        raise InputError(f"{path}{f':{line}' if line else ''}: the review ledger is not valid UTF-8 JSON.") from None
    if not isinstance(document, dict) or document.get("format") != FORMAT:
        raise _bad(path, "$.format", f"expected {FORMAT!r}")
    if set(document) != {"format", "reviews"} or not isinstance(document["reviews"], list):
        raise _bad(path, "$", "expected exactly the keys 'format' and 'reviews' (a list)")
    reviews: dict[Triple, Review] = {}
    for n, item in enumerate(document["reviews"]):
        if not isinstance(item, dict) or set(item) != set(_FIELDS) or not all(isinstance(item[k], str) for k in _FIELDS):
            raise _bad(path, f"$.reviews[{n}]", f"expected string fields {', '.join(_FIELDS)}")
        review = Review(**item)
        reviews[review.triple] = review
    return reviews


def write_ledger(path: Path, reviews: dict[Triple, Review]) -> None:
    """Write the ledger atomically, sorted by (source, relation, target)."""
    from tracecheck.commands.common import atomic_write

    ordered = sorted(reviews.values(), key=lambda r: (r.source, r.relation, r.target))
    document = {"format": FORMAT, "reviews": [asdict(r) for r in ordered]}
    path.parent.mkdir(parents=True, exist_ok=True)
    atomic_write(path, (json.dumps(document, indent=2, ensure_ascii=False) + "\n").encode("utf-8"))


def parse_link(text: str) -> Triple:
    """``"TST-7 verifies REQ-3"`` -> ``("TST-7", "REQ-3", "verifies")``."""
    parts = text.split()
    if len(parts) != 3:
        raise UsageError(f"{text!r}: write a link as 'SOURCE RELATION TARGET', for example 'TST-7 verifies REQ-3'.")
    source, relation, target = parts
    return (source, target, relation)


def _record(model: Model, triple: Triple, by: str, on: str) -> Review:
    source, target, relation = triple
    return Review(source, relation, target, content_hash(model.by_id[source]),
                  content_hash(model.by_id[target]), by, on)


def _current(model: Model, review: Review) -> bool:
    source, target = model.by_id.get(review.source), model.by_id.get(review.target)
    return (source is not None and target is not None
            and content_hash(source) == review.source_sha256
            and content_hash(target) == review.target_sha256)


def accept(
    model: Model, reviews: dict[Triple, Review], links: Iterable[Triple] | None, *, by: str, on: str
) -> tuple[dict[Triple, Review], list[Triple]]:
    """Record links as reviewed; ``links=None`` means every link whose ends exist.

    A link whose record is still current keeps its original record, so accepting
    again changes nothing and the ledger's history shows when each review happened.
    Returns the new ledger and the links newly recorded.
    """
    if not by.strip():
        raise UsageError("name the reviewer with --by NAME (or set git's user.name).")
    if not _DATE.match(on):
        raise UsageError(f"--on {on!r}: give the date as YYYY-MM-DD.")
    existing = {link.triple for link in model.links}
    if links is None:
        chosen = sorted(t for t in existing if t[0] in model.by_id and t[1] in model.by_id)
    else:
        chosen = list(dict.fromkeys(links))
        missing = [t for t in chosen if t not in existing]
        if missing:
            shown = "; ".join(f"{s} {r} {t}" for s, t, r in missing)
            raise UsageError(f"{model.origin}: no such link in the model: {shown}.")
        dangling = [t for t in chosen if t[0] not in model.by_id or t[1] not in model.by_id]
        if dangling:
            shown = "; ".join(f"{s} {r} {t}" for s, t, r in dangling)
            raise UsageError(f"{model.origin}: cannot accept a link whose end does not exist: {shown}.")
    updated = dict(reviews)
    recorded = []
    for triple in chosen:
        old = updated.get(triple)
        if old is not None and _current(model, old):
            continue
        updated[triple] = _record(model, triple, by.strip(), on)
        recorded.append(triple)
    return updated, recorded


def stale_links(model: Model, reviews: dict[Triple, Review]) -> list[Stale]:
    """Reviewed links still in the model whose source or target changed since review.

    A link whose end no longer exists is left to ``dangling-link``; a reviewed link no
    longer in the model is not stale (there is nothing left to re-review).
    """
    present = {link.triple for link in model.links}
    found = []
    for triple in sorted(reviews):
        review = reviews[triple]
        source, target = model.by_id.get(review.source), model.by_id.get(review.target)
        if triple not in present or source is None or target is None:
            continue
        changed = tuple(
            end for end, element, digest in (("source", source, review.source_sha256),
                                             ("target", target, review.target_sha256))
            if content_hash(element) != digest
        )
        if changed:
            found.append(Stale(review, changed))
    return found


def status(model: Model, reviews: dict[Triple, Review]) -> dict[str, Any]:
    """Counts and lists for ``review status``: stale, current, unreviewed, gone."""
    present = {link.triple for link in model.links if link.source in model.by_id and link.target in model.by_id}
    stale = stale_links(model, reviews)
    stale_set = {s.review.triple for s in stale}
    return {
        "stale": [{**asdict(s.review), "changed": list(s.changed)} for s in stale],
        "current": sum(1 for t in reviews if t in present and t not in stale_set),
        "unreviewed": sorted(f"{s} {r} {t}" for s, t, r in present - set(reviews)),
        "gone": sorted(f"{s} {r} {t}" for s, t, r in set(reviews) - {link.triple for link in model.links}),
    }
