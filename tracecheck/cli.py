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


def _review_options(function: Callable) -> Callable:
    """Waiver options that check and gate share."""
    function = click.option("--today", "today_option", default=None, metavar="YYYY-MM-DD",
                            help="Judge waiver expiry as of this date (also TRACECHECK_TODAY; default: the system date).")(function)
    return click.option("--waivers", "waivers_option", type=click.Path(dir_okay=False), default=None,
                        help="Waiver file (TOML; default: [gate] waivers in the configuration).")(function)


@cli.command()
@click.argument("model")
@_common(["text", "json", "markdown", "sarif", "junit", "github"])
@click.option("--fail-on", type=SEVERITY_CHOICE, default="error", show_default=True,
              help="Exit 1 when a finding has this severity or a higher one.")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.option("--baseline", type=click.Path(dir_okay=False), default=None,
              help="An earlier 'check --format json' report; report only findings it does not list.")
@_review_options
@click.pass_context
def check(ctx: click.Context, model: str, fmt: str, output: str | None, config_option: str | None,
          quiet: bool, no_color: bool, debug: bool, fail_on: str, input_format: str | None,
          baseline: str | None, waivers_option: str | None, today_option: str | None) -> int:
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
        baseline=baseline,
        waivers_option=waivers_option,
        today_option=today_option,
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


@cli.command()
@click.argument("model")
@_common(["text", "json", "markdown", "csv", "html"])
@click.option("--by", "group_by", multiple=True, metavar="ATTRIBUTE",
              help="Also count per value of this attribute (repeatable; default from [report.coverage] by).")
@click.option("--matrix", type=click.Path(dir_okay=False), default=None,
              help="Also write the traceability matrix as CSV to FILE.")
@click.option("--profile", default=None, metavar="NAME",
              help="Declarations following a standard's trace obligations: airborne-software, road-vehicles, medical-software.")
@click.option("--result-attribute", default=None, metavar="NAME",
              help="Test attribute holding pass/fail/blocked/not-run (default: result).")
@click.option("--fail-under", type=float, default=None, metavar="PERCENT",
              help="Exit 1 when a declaration's coverage is below PERCENT.")
@click.option("--timestamp", is_flag=True, help="Record the time of the run in the evidence (reruns then differ).")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.pass_context
def coverage(ctx: click.Context, model: str, fmt: str, output: str | None, config_option: str | None,
             quiet: bool, no_color: bool, debug: bool, group_by: tuple[str, ...], matrix: str | None,
             profile: str | None, result_attribute: str | None, fail_under: float | None,
             timestamp: bool, input_format: str | None) -> int:
    """Coverage of MODEL per declaration and group, with gaps, test results and evidence.

    Exit 0 unless --fail-under is given and a declaration is below it (then 1).
    """
    from tracecheck.commands import coverage as command

    return command.run(
        model, fmt=fmt, output=output, matrix=matrix, config_option=config_option,
        input_format=input_format, group_by=group_by, result_attribute=result_attribute,
        profile=profile, timestamp=timestamp, fail_under=fail_under,
        options=_render_options(ctx, quiet, no_color, output),
    )


@cli.command()
@click.argument("paths", nargs=-1, required=True, metavar="PATH...")
@_common(["text", "json", "markdown", "sarif", "junit", "github"])
@click.option("--base", default=None, metavar="REV",
              help="What the change goes into (default: origin/HEAD, else main, else master).")
@click.option("--head", default=None, metavar="REV", help="The change (default: the working tree).")
@click.option("--exact-base", is_flag=True, help="Compare with --base itself, not its merge-base with head.")
@click.option("--fail-on", type=SEVERITY_CHOICE, default="error", show_default=True,
              help="Exit 1 when a new finding has this severity or a higher one.")
@click.option("--input-format", default=None, help="Read the models as this format instead of detecting it.")
@click.option("--embedding", default=None, metavar="EMB",
              help="Also verify this embedding (.npz from 'embed fit') against each head model.")
@_review_options
@click.pass_context
def gate(ctx: click.Context, paths: tuple[str, ...], fmt: str, output: str | None, config_option: str | None,
         quiet: bool, no_color: bool, debug: bool, base: str | None, head: str | None, exact_base: bool,
         fail_on: str, input_format: str | None, embedding: str | None, waivers_option: str | None,
         today_option: str | None) -> int:
    """Pre-merge gate: fail only on findings a change adds to the model files PATH...

    Compares head with the merge-base of --base and head (as a pull request shows the
    change) and reports findings new on head, findings resolved, and the diff summary.
    Exit 1 when a new, unwaived finding is at or above --fail-on, or when --embedding
    is given and the embedding does not reproduce a head model exactly.
    """
    from tracecheck.commands import gate as command

    return command.run(
        list(paths),
        base=base,
        head=head,
        exact_base=exact_base,
        fmt=fmt,
        output=output,
        config_option=config_option,
        input_format=input_format,
        fail_on=fail_on,
        waivers_option=waivers_option,
        today_option=today_option,
        options=_render_options(ctx, quiet, no_color, output),
        embedding=embedding,
    )


@cli.group()
def review() -> None:
    """Record reviewed trace links in .tracecheck/reviews.json and list the stale ones.

    A link is stale when an end it joins (kind, name, text or attributes) has changed
    since it was accepted. The ledger lives at the root of the model's repository.
    """


@review.command("accept")
@click.argument("model")
@click.argument("links", nargs=-1)
@click.option("--all", "all_links", is_flag=True, help="Accept every link of MODEL whose ends exist.")
@click.option("--by", default=None, metavar="NAME", help="Who accepts (default: git's user.name).")
@click.option("--on", default=None, metavar="YYYY-MM-DD", help="The date of the review (default: today, UTC).")
@click.option("--config", "config_option", type=click.Path(dir_okay=False), default=None,
              help="Configuration file (default: found upwards from the model).")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.option("--debug", is_flag=True, hidden=True)
def review_accept(model: str, links: tuple[str, ...], all_links: bool, by: str | None, on: str | None,
                  config_option: str | None, input_format: str | None, debug: bool) -> int:
    """Accept LINKS of MODEL, each written 'SOURCE RELATION TARGET' (one argument)."""
    from tracecheck.commands import review as command

    return command.accept(model, links, all_links=all_links, by=by, on=on,
                          config_option=config_option, input_format=input_format)


@review.command("status")
@click.argument("model")
@_common(["text", "json"])
@click.option("--fail-on-stale", is_flag=True, help="Exit 1 when a link is stale.")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.pass_context
def review_status(ctx: click.Context, model: str, fmt: str, output: str | None, config_option: str | None,
                  quiet: bool, no_color: bool, debug: bool, fail_on_stale: bool, input_format: str | None) -> int:
    """List the links of MODEL that changed since review, and how many are current."""
    from tracecheck.commands import review as command

    return command.status(model, fmt=fmt, output=output, fail_on_stale=fail_on_stale,
                          config_option=config_option, input_format=input_format,
                          options=_render_options(ctx, quiet, no_color, output))


@cli.command()
@click.argument("model")
@click.option("-o", "--output", required=True,
              help="Where to write: a file (.json, .graphml, .reqif), a folder for the CSV pair, or - for stdout.")
@click.option("--to", "to", default=None, help="Output format (default: from the output name): thread-json, graphml, reqif, csv.")
@click.option("--input-format", default=None, help="Read MODEL as this format instead of detecting it.")
@click.option("--config", "config_option", type=click.Path(dir_okay=False), default=None,
              help="Configuration file (its [formats] section maps fields for each format).")
@click.option("--quiet", is_flag=True, help="Do not report what was written.")
@click.option("--debug", is_flag=True, hidden=True)
@click.pass_context
def convert(ctx: click.Context, model: str, output: str, to: str | None, input_format: str | None,
            config_option: str | None, quiet: bool, debug: bool) -> int:
    """Write MODEL in another format (written atomically; the model is not checked)."""
    from tracecheck.commands import convert as command

    quiet = quiet or (ctx.find_root().obj or {}).get("quiet", False)
    return command.run(model, output=output, to=to, input_format=input_format,
                       config_option=config_option, quiet=quiet)


@cli.command()
@click.argument("path")
@_common(["text", "json", "csv", "markdown", "html"])
@click.option("--revs", default=None, metavar="A..B",
              help="Revision A, every commit after it up to B that changes PATH, and B.")
@click.option("--stages", default=None, metavar="NAMES",
              help="Comma-separated revisions to use, e.g. concept,preliminary-design (default: every tag).")
@click.option("--follow", is_flag=True, help="Follow PATH across renames.")
@click.option("--no-cache", is_flag=True, help="Neither read nor write the on-disk cache of per-revision results.")
@click.option("--input-format", default=None, help="Read every revision as this format instead of detecting it.")
@click.pass_context
def history(ctx: click.Context, path: str, fmt: str, output: str | None, config_option: str | None, quiet: bool,
            no_color: bool, debug: bool, revs: str | None, stages: str | None, follow: bool, no_cache: bool,
            input_format: str | None) -> int:
    """Element, link, finding, coverage and churn counts of PATH across git revisions.

    By default every tag whose commit has PATH in its history, oldest first. A revision
    where PATH is missing or malformed is shown as such and does not stop the walk.
    """
    from tracecheck.commands import history as command

    return command.run(
        path,
        revs=revs,
        stages=stages,
        follow=follow,
        fmt=fmt,
        output=output,
        config_option=config_option,
        input_format=input_format,
        use_cache=not no_cache,
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


