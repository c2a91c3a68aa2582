"""Command line: the ``textkit`` group, its lazy command table, and ``main``.

Each command parses its options, calls public functions and prints a short
summary. Any :class:`textkit.errors.TextkitError` becomes one line on stderr
and exit status 2. Heavy libraries are imported inside the commands, so
``textkit --help`` starts fast.
"""

from __future__ import annotations

import importlib
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager

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
    "review": "textkit.cli.review:review_command",
    "sample": "textkit.cli.review:sample_command",
    "charts": "textkit.cli.present:charts_command",
    "quotes": "textkit.cli.present:quotes_command",
}


class _Commands(click.Group):
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
    if quiet:
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


@click.group(cls=_Commands, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="textkit")
def cli() -> None:
    """Code, count and compare the free-text answers of visitor surveys.

    Start with `textkit code SURVEY.yaml --out DIR` to code every answer with the
    survey's theme lexicon, then estimate prevalence and keyness from the result.
    """


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``textkit`` console script."""
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
    except click.exceptions.Abort:
        click.echo("textkit: aborted", err=True)
        return 130
    except click.ClickException as error:
        error.show()
        return 2
    except click.exceptions.Exit as exit_request:
        return exit_request.exit_code
    return 0


if __name__ == "__main__":
    sys.exit(main())
