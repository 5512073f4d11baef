"""Measure the re-identification threshold: precision and recall of ``diff`` matching.

Two inputs:

- the demo stages detailed-design -> qualification (two documented renumberings);
- synthetic versions of the qualification stage: K elements renumbered with a share of
  their text words reworded (true pairs), K other elements removed and replaced by K
  new same-kind elements carrying the content and links of a *different* element of
  that kind (hard negatives: templated siblings such as "software ... of channel 12"
  against "... of channel 31"). A reported pair is right only if it is a planted
  renumbering.

Prints precision and recall per threshold and rewording rate (seeds pooled), and the
separation of the content measures considered (word-set Jaccard with every word
weighing 1 or with rare words weighing more, against difflib's character sequence
ratio): the share of (true pair, hard negative) couples
that each measure ranks the right way round, content only.

    python benchmarks/diff_threshold.py
"""

from __future__ import annotations

import argparse
import copy
import difflib
import json
import random
from collections import Counter

from tracecheck.demo.stages import stage_document
from tracecheck.diff.matching import MatchOptions, jaccard, match_elements, tokens, weighted_jaccard
from tracecheck.formats.thread_json import parse

THRESHOLDS = (0.3, 0.4, 0.5, 0.55, 0.6, 0.7, 0.8)
RATES = (0.0, 0.1, 0.2, 0.33, 0.5)
FILLERS = ["promptly", "berth", "monitored", "supervised", "nominal", "reported", "vessel", "rated",
           "continuously", "checked", "quay", "configured"]


def model(doc: dict, name: str):
    return parse(json.dumps(doc).encode("utf-8"), name)


def reword(text: str, rate: float, rng: random.Random) -> str:
    words = text.split()
    for n in rng.sample(range(len(words)), round(rate * len(words))):
        words[n] = rng.choice(FILLERS)
    return " ".join(words)


def synthetic(base: dict, rate: float, k: int, seed: int) -> tuple[dict, set[tuple[str, str]], list]:
    rng = random.Random(seed)
    doc = copy.deepcopy(base)
    leaves = sorted({e["id"] for e in doc["elements"]} - {e.get("parent") for e in doc["elements"]})
    rng.shuffle(leaves)
    renamed, removed = leaves[:k], leaves[k:2 * k]
    by_id = {e["id"]: e for e in doc["elements"]}
    truth, negatives = set(), []
    for old in renamed:
        element = by_id[old]
        element["id"] = f"{old}-N"
        element["text"] = reword(element.get("text") or "", rate, rng)
        truth.add((old, element["id"]))
    for link in doc["links"]:
        for end in ("source", "target"):
            if link[end] in renamed:
                link[end] = f"{link[end]}-N"
    kinds = {}
    for e in base["elements"]:
        kinds.setdefault(e["kind"], []).append(e)
    gone = set(removed)
    doc["links"] = [lk for lk in doc["links"] if lk["source"] not in gone and lk["target"] not in gone]
    doc["elements"] = [e for e in doc["elements"] if e["id"] not in gone]
    for n, old in enumerate(removed):
        # A donor with the very text of the removed element would be the same element
        # under another id: nothing could tell those apart, so it is not a negative.
        donor = rng.choice([e for e in kinds[by_id[old]["kind"]]
                            if e["id"] not in (old, *renamed, *removed) and e.get("text") != by_id[old].get("text")])
        fresh = {key: copy.deepcopy(value) for key, value in donor.items() if key != "parent"}
        fresh["id"] = f"ADDED-{n}"
        doc["elements"].append(fresh)
        for lk in base["links"]:
            if lk["source"] == donor["id"] and lk["target"] not in gone:
                doc["links"].append({**lk, "source": fresh["id"]})
        negatives.append((by_id[old], fresh))
    return doc, truth, negatives


def scores(truth_pairs: list, negatives: list) -> dict[str, float]:
    """Share of (true, negative) couples ranked right by each content measure."""
    counts = Counter(t for pair in truth_pairs + negatives for text in pair for t in tokens(text))
    rarity = {t: 1 / n for t, n in counts.items()}
    measures = {
        "rarity-weighted": lambda a, b: weighted_jaccard(tokens(a), tokens(b), rarity) or 0.0,
        "word Jaccard": lambda a, b: jaccard(tokens(a), tokens(b)) or 0.0,
        "sequence ratio": lambda a, b: difflib.SequenceMatcher(None, a or "", b or "", autojunk=False).ratio(),
    }
    result = {}
    for name, measure in measures.items():
        true = [measure(a, b) for a, b in truth_pairs]
        false = [measure(a, b) for a, b in negatives]
        result[name] = sum(t > f for t in true for f in false) / max(1, len(true) * len(false))
    return result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--seeds", type=int, default=3)
    parser.add_argument("--k", type=int, default=30, help="renumbered and replaced elements per version")
    args = parser.parse_args()
    base = stage_document("qualification")
    base_model = model(base, "qualification")

    old_demo, new_demo = model(stage_document("detailed-design"), "dd"), model(base, "q")
    demo_truth = {("REQ-SW-031", "REQ-SW-131"), ("REQ-SW-032", "REQ-SW-132")}
    print("demo detailed-design -> qualification (2 renumberings)")
    for threshold in THRESHOLDS:
        found = {(o, n) for o, n, _ in match_elements(old_demo, new_demo, MatchOptions(threshold=threshold)).reidentified}
        print(f"  threshold {threshold:.2f}: reported {len(found)}, right {len(found & demo_truth)}")

    print(f"\nsynthetic, qualification stage, {args.k} renumbered + {args.k} replaced per version, {args.seeds} seeds")
    print("rate  " + "  ".join(f"t={t:.2f} P/R   " for t in THRESHOLDS))
    for rate in RATES:
        cells = []
        pairs_text, negatives_text = [], []
        for threshold in THRESHOLDS:
            right = reported = planted = 0
            for seed in range(args.seeds):
                doc, truth, negatives = synthetic(base, rate, args.k, seed)
                found = {(o, n) for o, n, _ in
                         match_elements(base_model, model(doc, "syn"), MatchOptions(threshold=threshold)).reidentified}
                right, reported, planted = right + len(found & truth), reported + len(found), planted + len(truth)
                if threshold == THRESHOLDS[0]:
                    new_by_id = {e["id"]: e for e in doc["elements"]}
                    pairs_text += [(base_model.by_id[o].text, new_by_id[n].get("text")) for o, n in truth]
                    negatives_text += [(a.get("text"), b.get("text")) for a, b in negatives]
            cells.append(f"{right / max(reported, 1):.2f}/{right / planted:.2f}")
        print(f"{rate:4.2f}  " + "  ".join(f"{c:<14}" for c in cells)
              + "  content ranking: " + ", ".join(f"{k} {v:.3f}" for k, v in scores(pairs_text, negatives_text).items()))


if __name__ == "__main__":
    main()
