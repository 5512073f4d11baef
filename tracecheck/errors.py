"""Domain errors. Each carries its exit code and one sentence a user can act on.

The core raises these; only the error boundary in ``cli.py`` turns them into a
message on stderr and an exit code. Nothing here imports click.
"""

from __future__ import annotations

__all__ = [
    "EXIT_OK",
    "EXIT_FINDINGS",
    "EXIT_USAGE",
    "EXIT_INTERNAL",
    "EXIT_INTERRUPTED",
    "TracecheckError",
    "InputError",
    "ConfigError",
    "GitError",
    "UsageError",
]

EXIT_OK = 0
EXIT_FINDINGS = 1
EXIT_USAGE = 2
EXIT_INTERNAL = 3
EXIT_INTERRUPTED = 130


class TracecheckError(Exception):
    """An error the user can fix; ``str(error)`` is the whole message."""

    exit_code = EXIT_USAGE

    def __init__(self, message: str, *, details: list[str] | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.details = list(details or [])

    def __str__(self) -> str:
        if not self.details:
            return self.message
        return self.message + "\n" + "\n".join(f"  {line}" for line in self.details)


class InputError(TracecheckError):
    """A model, baseline or waiver file that cannot be read or is malformed."""


class ConfigError(TracecheckError):
    """A configuration file that is malformed or violates its schema."""


class GitError(TracecheckError):
    """A git revision, path or repository that cannot be resolved."""


class UsageError(TracecheckError):
    """Options that contradict each other or name something unknown."""
