"""The command line: a click group over plain command functions.

This is the only module that imports click. Every command gathers its options and
calls one function that returns an exit code. The error boundary in
:meth:`TracecheckGroup.main` maps what escapes to the exit codes of DESIGN.md:
2 for input and usage errors (one paragraph, no traceback), 3 for a bug (with a hint
to rerun with ``--debug``), 130 when interrupted.
"""

from __future__ import annotations

import os
import sys
import traceback
from collections.abc import Callable

import click

from tracecheck import __version__
from tracecheck.errors import (
    EXIT_INTERNAL,
    EXIT_INTERRUPTED,
    EXIT_USAGE,
    TracecheckError,
)

__all__ = ["cli", "main"]

SEVERITY_CHOICE = click.Choice(["error", "warning", "note"])


def _color_wanted(no_color: bool, stream) -> bool:
    if no_color or os.environ.get("NO_COLOR"):
        return False
    return hasattr(stream, "isatty") and stream.isatty()


class TracecheckGroup(click.Group):
    """A click group whose ``main`` is the one error boundary of the program."""

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True, **extra):
        argv = list(sys.argv[1:] if args is None else args)
        debug = "--debug" in argv or bool(os.environ.get("TRACECHECK_DEBUG"))
        try:
            code = super().main(argv, prog_name or "tracecheck", complete_var, False, **extra)
        except click.exceptions.Exit as done:
            code = done.exit_code
        except click.ClickException as error:
            error.show()
            code = EXIT_USAGE
        except click.Abort:
            click.echo("tracecheck: interrupted.", err=True)
            code = EXIT_INTERRUPTED
        except TracecheckError as error:
            if debug:
                traceback.print_exc()
            click.echo(f"tracecheck: error: {error}", err=True)
            code = error.exit_code
        except KeyboardInterrupt:
            click.echo("tracecheck: interrupted.", err=True)
            code = EXIT_INTERRUPTED
        except BrokenPipeError:
            code = 0
        except Exception as error:  # the last line of defence: a bug, not the user's fault
            if debug:
                traceback.print_exc()
            else:
                click.echo(
                    f"tracecheck: internal error ({type(error).__name__}: {error}). "
                    "This is a bug; rerun with --debug for the traceback and report it.",
                    err=True,
                )
            code = EXIT_INTERNAL
        code = 0 if code is None else int(code)
        if standalone_mode:
            sys.exit(code)
        return code


def _common(formats: list[str]) -> Callable:
    """Options every model-reading command shares."""

    def decorate(function: Callable) -> Callable:
        options = [
            click.option("--format", "fmt", type=click.Choice(formats), default="text", show_default=True,
                         help="Output format."),
            click.option("-o", "--output", type=click.Path(dir_okay=False), default=None,
                         help="Write the output to FILE (atomically) instead of stdout."),
            click.option("--config", "config_option", type=click.Path(dir_okay=False), default=None,
                         help="Configuration file (default: tracecheck.toml or pyproject.toml found upwards from the model)."),
            click.option("--quiet", is_flag=True, help="Print only the summary."),
            click.option("--no-color", is_flag=True, help="No colour (also when NO_COLOR is set)."),
            click.option("--debug", is_flag=True, hidden=True),
        ]
        for option in reversed(options):
            function = option(function)
        return function

    return decorate


def _render_options(ctx: click.Context, quiet: bool, no_color: bool, output: str | None):
    from tracecheck.report import RenderOptions

    obj = ctx.find_root().obj or {}
    quiet = quiet or obj.get("quiet", False)
    no_color = no_color or obj.get("no_color", False)
    color = False if output and output != "-" else _color_wanted(no_color, sys.stdout)
    width = 100
    if color:
        import shutil

        width = max(60, shutil.get_terminal_size((100, 24)).columns)
    return RenderOptions(color=color, width=width, quiet=quiet)


@click.group(cls=TracecheckGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="tracecheck")
@click.option("--quiet", is_flag=True, help="Print only summaries.")
@click.option("--no-color", is_flag=True, help="No colour (also when NO_COLOR is set).")
@click.option("--debug", is_flag=True, help="Show the traceback of an internal error.")
@click.pass_context
def cli(ctx: click.Context, quiet: bool, no_color: bool, debug: bool) -> None:
    """Check, diff and report on digital-thread model exports.

    MODEL is a file path, - for standard input, or REV:PATH for PATH at git revision REV.
    Exit codes: 0 clean, 1 findings at or above --fail-on, 2 the input or options could
    not be used, 3 internal error, 130 interrupted.
    """
    ctx.obj = {"quiet": quiet, "no_color": no_color, "debug": debug}


def _formats(command: str) -> list[str]:
    from tracecheck.report import formats_for

    return formats_for(command)


@cli.command()
@click.argument("model")
@_common(["text", "json", "markdown"])
@click.option("--fail-on", type=SEVERITY_CHOICE, default="error", show_default=True,
              help="Exit 1 when a finding has this severity or a higher one.")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.pass_context
def check(ctx: click.Context, model: str, fmt: str, output: str | None, config_option: str | None,
          quiet: bool, no_color: bool, debug: bool, fail_on: str, input_format: str | None) -> int:
    """Check MODEL against the integrity rules and coverage declarations."""
    from tracecheck.commands import check as command

    return command.run(
        model,
        fmt=fmt,
        output=output,
        config_option=config_option,
        input_format=input_format,
        fail_on=fail_on,
        options=_render_options(ctx, quiet, no_color, output),
    )


@cli.command()
@click.argument("directory", required=False, type=click.Path(file_okay=False))
@click.option("--no-color", is_flag=True, help="No colour (also when NO_COLOR is set).")
@click.pass_context
def demo(ctx: click.Context, directory: str | None, no_color: bool) -> int:
    """Build the bundled ferry shore-charging demo repository and run tracecheck on it.

    DIRECTORY must not exist yet or be empty (default: a new temporary folder).
    """
    from tracecheck.demo import run

    return run(directory, options=_render_options(ctx, False, no_color, None))


# --- commands added by later capabilities go below this line --------------------------


@cli.command()
@click.argument("old")
@click.argument("new", required=False)
@_common(["text", "json", "markdown", "html"])
@click.option("--fail-on-change", is_flag=True, help="Exit 1 when the two models differ.")
@click.option("--input-format", default=None, help="Read both models as this format instead of detecting it.")
@click.pass_context
def diff(ctx: click.Context, old: str, new: str | None, fmt: str, output: str | None, config_option: str | None,
         quiet: bool, no_color: bool, debug: bool, fail_on_change: bool, input_format: str | None) -> int:
    """Show what changed from OLD to NEW (two model specs), or REV1..REV2 PATH.

    Elements are matched by id, then by content (re-identified); the report lists the
    elements whose review the changes invalidate. Exit 0 unless --fail-on-change.
    """
    from tracecheck.commands import diff as command

    return command.run(
        old,
        new,
        fmt=fmt,
        output=output,
        config_option=config_option,
        input_format=input_format,
        fail_on_change=fail_on_change,
        options=_render_options(ctx, quiet, no_color, output),
    )


@cli.group()
def embed() -> None:
    """Learned node embedding of the thread: fit it, verify it still reproduces the
    model exactly, and rank likely-missing links for review."""


@embed.command("fit")
@click.argument("model")
@click.option("-o", "--output", "embedding", required=True, type=click.Path(dir_okay=False),
              help="Write the embedding to this .npz file (atomically).")
@click.option("--dim", "dimension", type=int, default=None,
              help="Fit this dimension and report its residual errors (default: search the smallest exact one).")
@click.option("--relation", "relations", multiple=True,
              help="Fit only links of this relation (repeatable; default: the union of all relations).")
@click.option("--max-seconds", type=float, default=None, help="Stop training after this long; the best fit so far is kept.")
@click.option("--seed", type=int, default=0, show_default=True, help="Base seed of the random starts.")
@click.option("--format", "fmt", type=click.Choice(["text", "json", "markdown"]), default="text", show_default=True,
              help="Format of the report on stdout.")
@click.option("--config", "config_option", type=click.Path(dir_okay=False), default=None,
              help="Configuration file (default: tracecheck.toml or pyproject.toml found upwards from the model).")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.option("--quiet", is_flag=True, help="Print only the verdict; no progress bar.")
@click.option("--no-color", is_flag=True, help="No colour (also when NO_COLOR is set).")
@click.option("--debug", is_flag=True, hidden=True)
@click.pass_context
def embed_fit(ctx: click.Context, model: str, embedding: str, dimension: int | None, relations: tuple[str, ...],
              max_seconds: float | None, seed: int, fmt: str, config_option: str | None, input_format: str | None,
              quiet: bool, no_color: bool, debug: bool) -> int:
    """Fit an embedding whose decoder reproduces MODEL's links; exit 0 if exact, else 1.

    Without --dim the smallest exact dimension the search finds is kept: an upper bound,
    not a proven minimum.
    """
    from tracecheck.commands import embed as command

    return command.run_fit(
        model, embedding, dimension=dimension, relations=relations, seed=seed, max_seconds=max_seconds,
        fmt=fmt, config_option=config_option, input_format=input_format,
        options=_render_options(ctx, quiet, no_color, None),
    )


@embed.command("verify")
@click.argument("model")
@click.option("--embedding", "embedding", required=True, type=click.Path(dir_okay=False),
              help="The .npz written by 'embed fit'.")
@_common(["text", "json", "markdown"])
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.pass_context
def embed_verify(ctx: click.Context, model: str, embedding: str, fmt: str, output: str | None,
                 config_option: str | None, quiet: bool, no_color: bool, debug: bool,
                 input_format: str | None) -> int:
    """Exit 0 if EMBEDDING still reproduces MODEL exactly, else 1 with the links it
    misses or invents and the elements it does not know."""
    from tracecheck.commands import embed as command

    return command.run_verify(
        model, embedding, fmt=fmt, output=output, config_option=config_option, input_format=input_format,
        options=_render_options(ctx, quiet, no_color, output),
    )


@embed.command("suggest")
@click.argument("model")
@_common(["text", "json", "markdown"])
@click.option("--relation", "relations", multiple=True,
              help="Consider only this relation (repeatable; default: every relation the metamodel restricts).")
@click.option("--dim", "dimension", type=int, default=8, show_default=True, help="Embedding dimension.")
@click.option("--holdout", type=float, default=0.1, show_default=True,
              help="Fraction of links held out for the evaluation.")
@click.option("--top", type=int, default=20, show_default=True, help="Length of each ranked list.")
@click.option("--seed", type=int, default=0, show_default=True, help="Seed of the hold-out split and training.")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.pass_context
def embed_suggest(ctx: click.Context, model: str, fmt: str, output: str | None, config_option: str | None,
                  quiet: bool, no_color: bool, debug: bool, relations: tuple[str, ...], dimension: int,
                  holdout: float, top: int, seed: int, input_format: str | None) -> int:
    """Rank likely-missing links (between kinds the metamodel allows) and the least
    plausible existing ones, with a held-out evaluation. Suggestions for a human
    reviewer; nothing is applied to the model."""
    from tracecheck.commands import embed as command

    return command.run_suggest(
        model, relations=relations, dimension=dimension, holdout=holdout, top=top, seed=seed, fmt=fmt,
        output=output, config_option=config_option, input_format=input_format,
        options=_render_options(ctx, quiet, no_color, output),
    )


def main(argv: list[str] | None = None) -> int:
    return cli.main(argv, standalone_mode=False)


