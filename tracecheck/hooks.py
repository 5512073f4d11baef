"""``python -m tracecheck.hooks check [--opt=value ...] FILE...``: pre-commit's entry point.

pre-commit passes every changed file it selected, while ``tracecheck check`` reads one
model; this runs ``check`` once per file with the same options and exits with the
highest exit code. Options are written ``--opt=value`` (every argument that does not
start with ``-`` is taken as a model file).
"""

from __future__ import annotations

import sys

__all__ = ["main"]


def main(argv: list[str] | None = None) -> int:
    from tracecheck.cli import cli

    args = list(sys.argv[1:] if argv is None else argv)
    if not args or args[0] != "check":
        sys.stderr.write("tracecheck.hooks: usage: python -m tracecheck.hooks check [--opt=value ...] FILE...\n")
        return 2
    options = [a for a in args[1:] if a.startswith("-")]
    files = [a for a in args[1:] if not a.startswith("-")]
    code = 0
    for path in files:
        code = max(code, cli.main(["check", *options, path], standalone_mode=False))
    return code


if __name__ == "__main__":
    raise SystemExit(main())
