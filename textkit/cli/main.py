"""Command line: the ``textkit`` group, its lazy command table, and ``main``.

Each command parses its options, calls public functions and prints a short
summary. Any :class:`textkit.errors.TextkitError` becomes one line on stderr
and exit status 2. Heavy libraries are imported inside the commands, so
``textkit --help`` starts fast.
"""

from __future__ import annotations

import difflib
import importlib
import signal
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import click

from ..errors import TextkitError

#: Commands kept in their own modules, loaded when first needed.
_LAZY_COMMANDS = {
    "code": "textkit.cli.coding:code_command",
    "lexicon": "textkit.cli.coding:lexicon_group",
    "agreement": "textkit.cli.coding:agreement_command",
    "prevalence": "textkit.cli.stats:prevalence_command",
    "keyness": "textkit.cli.discover:keyness_command",
    "suggest": "textkit.cli.discover:suggest_command",
    "report": "textkit.cli.report:report_command",
    "demo": "textkit.cli.report:demo_command",
    "review": "textkit.cli.review:review_command",
    "sample": "textkit.cli.review:sample_command",
    "charts": "textkit.cli.present:charts_command",
    "quotes": "textkit.cli.present:quotes_command",
    "topics": "textkit.cli.discover:topics_command",
    "train": "textkit.cli.learn:train_command",
    "mend": "textkit.cli.learn:mend_command",
}


class SuggestingGroup(click.Group):
    """A group that answers a mistyped command with the closest ones it has."""

    def resolve_command(self, ctx: click.Context, args: list[str]) -> tuple[str | None, Any, list[str]]:
        name = args[0] if args else ""
        if args and not name.startswith("-") and self.get_command(ctx, name) is None:
            known = self.list_commands(ctx)
            close = difflib.get_close_matches(name, known, n=2, cutoff=0.5)
            close += [c for c in known if c not in close and (c.startswith(name[:3]) or name in c)][:2]
            hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
            ctx.fail(f"no command {name!r}; {hint}(commands: {', '.join(known)})")
        return super().resolve_command(ctx, args)


class OutputFolder(click.ParamType):
    """A ``--out`` folder: any path but the empty one (which would mean the current folder)."""

    name = "folder"

    def convert(self, value: Any, param: click.Parameter | None, ctx: click.Context | None) -> Path:
        if isinstance(value, Path):
            return value
        if not str(value).strip():
            self.fail("the folder name is empty; name the folder to write into", param, ctx)
        return Path(value)


#: The type of every command's ``--out`` option.
OUTPUT_FOLDER = OutputFolder()


class _Commands(SuggestingGroup):
    """A group that imports the modules of some commands only when they are used."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted(set(super().list_commands(ctx)) | set(_LAZY_COMMANDS))

    def get_command(self, ctx: click.Context, name: str) -> click.Command | None:
        command = super().get_command(ctx, name)
        if command is not None or name not in _LAZY_COMMANDS:
            return command
        module, attribute = _LAZY_COMMANDS[name].split(":")
        return getattr(importlib.import_module(module), attribute)


@contextmanager
def steps(total: int, quiet: bool) -> Iterator[Callable[[str], None]]:
    """A progress bar over named steps (on stderr; nothing when ``quiet``)."""
    if quiet or not _is_terminal(sys.stderr):  # a redirected log gets no bar fragments
        yield lambda name: None
        return
    from tqdm import tqdm

    bar = tqdm(total=total, file=sys.stderr, leave=False, bar_format="{desc:<22} {bar} {n}/{total}")
    started = False

    def advance(name: str) -> None:
        nonlocal started
        if started:
            bar.update(1)
        started = True
        bar.set_description_str(name)

    try:
        yield advance
        bar.update(bar.total - bar.n)
    finally:
        bar.close()


def _is_terminal(stream: Any) -> bool:
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


@click.group(cls=_Commands, invoke_without_command=True,
             context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="textkit")
@click.pass_context
def cli(ctx: click.Context) -> None:
    """Code, count and compare the free-text answers of visitor surveys.

    Start with `textkit code SURVEY.yaml --out DIR` to code every answer with the
    survey's theme lexicon, then estimate prevalence and keyness from the result.
    """
    if ctx.invoked_subcommand is None:
        click.echo(ctx.get_help())


def _usage_line(error: click.UsageError) -> str:
    """A click usage error as one line: the problem, then where to find help."""
    message = " ".join(error.format_message().split())
    context = error.ctx
    if context is not None and context.command.get_help_option(context) is not None:
        message += f" (see '{context.command_path} --help')"
    return message


class _Terminated(KeyboardInterrupt):
    """SIGTERM, delivered like SIGINT so that every clean-up runs."""


def _on_sigterm(number: int, frame: Any) -> None:
    raise _Terminated()


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``textkit`` console script."""
    terminated = False
    try:
        previous = signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread: leave signals alone
        previous = None
    try:
        cli.main(args=argv, prog_name="textkit", standalone_mode=False)
    except TextkitError as error:
        click.echo(f"textkit: error: {error}", err=True)
        for line in getattr(error, "detail_lines", ()):  # DataProblemsError: one problem a line
            click.echo(f"  {line}", err=True)
        return 2
    except OSError as error:  # a disk full or a folder we may not write: still one line
        where = f"{error.filename}: " if error.filename else ""
        click.echo(f"textkit: error: {where}{error.strerror or error}", err=True)
        return 2
    except click.exceptions.Abort as error:
        terminated = isinstance(error.__cause__ or error.__context__, _Terminated)
        click.echo("textkit: stopped" if terminated else "textkit: aborted", err=True)
        return 143 if terminated else 130
    except click.UsageError as error:
        click.echo(f"textkit: error: {_usage_line(error)}", err=True)
        return 2
    except click.ClickException as error:
        click.echo(f"textkit: error: {' '.join(error.format_message().split())}", err=True)
        return 2
    except click.exceptions.Exit as exit_request:
        return exit_request.exit_code
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
    return 0


if __name__ == "__main__":
    sys.exit(main())
