"""The caution every output that supports safety work carries, in one wording."""

from __future__ import annotations

__all__ = ["caution"]


def caution(opening: str) -> str:
    """The caution after ``opening`` ("This diff supports", "These results support")."""
    verb = "does" if opening.endswith("supports") else "do"  # "These results support"
    return (
        f"{opening}, and {verb} not replace, review by qualified people. Tool qualification "
        "under the applicable standard is the user's responsibility; local codes and "
        "licensed practice prevail."
    )
