"""Command line for the finished report: ``textkit report`` and ``textkit demo``.

Only click is imported here; the pipeline loads inside the commands.
"""

from __future__ import annotations

from pathlib import Path

import click


def _print_stage(name: str, seconds: float) -> None:
    click.echo(f"  {name:<12} {seconds:7.2f} s", err=True)


def _check_paths(out_dir: Path, hand_coded: Path | None) -> None:
    """The cheap checks of --out and --hand-coded, before any stage runs."""
    from ..errors import InputError

    if out_dir.exists() and not out_dir.is_dir():
        raise InputError("expected an output folder, found a file; choose another --out", source=out_dir)
    if hand_coded is not None and not hand_coded.is_file():
        raise InputError("the hand-coded sample was not found" if not hand_coded.exists()
                         else "the hand-coded sample is not a file", source=hand_coded, option="--hand-coded")


def _run(config: Path, out_dir: Path, summaries: str | None, hand_coded: Path | None, quiet: bool) -> None:
    import time

    from ..io.config import load_config
    from ..pipeline import build_report, check_summary_variable, write_report

    loaded = load_config(config)
    check_summary_variable(loaded, summaries)  # before any work
    _check_paths(out_dir, hand_coded)
    started = time.perf_counter()
    stages: list[tuple[str, float]] = []  # printed once the report is written: an error stays one line
    report = build_report(loaded, summaries=summaries, hand_coded=hand_coded,
                          progress=None if quiet else lambda name, seconds: stages.append((name, seconds)))
    write_started = time.perf_counter()
    write_report(report, out_dir, inputs=[loaded.path, loaded.survey, loaded.lexicon, loaded.corrections,
                                          hand_coded])
    if quiet:
        return
    for name, seconds in stages:
        _print_stage(name, seconds)
    _print_stage("write", time.perf_counter() - write_started)
    for name, reason in report.manifest["left_out"].items():
        click.echo(f"note: {name}: {reason}", err=True)
    click.echo(f"report: {len(report.files)} files in {time.perf_counter() - started:.1f} s -> {out_dir}; "
               f"open {out_dir / 'index.html'} first"
               + (f"; {len(report.summaries)} one-page summaries in {out_dir / 'summaries'}" if summaries else ""))


@click.command("report")
@click.argument("config", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Folder for index.html, tables.xlsx, the CSV tables, charts/, summaries/ and manifest.json.")
@click.option("--summaries", default=None, metavar="GROUP_VAR",
              help="Also write a one-page summary (PDF and HTML) for each group of this group variable.")
@click.option("--hand-coded", type=click.Path(path_type=Path), default=None,
              help="A hand-coded sample (columns text, themes) whose agreement figures the report shows.")
@click.option("--quiet", is_flag=True, help="No stage times and no summary.")
def report_command(config: Path, out_dir: Path, summaries: str | None, hand_coded: Path | None,
                   quiet: bool) -> None:
    """Run every stage on the survey CONFIG and write the finished report to --out."""
    _run(config, out_dir, summaries, hand_coded, quiet)


def demo_folder() -> Path:
    """The shipped demo: ``demo_comments/`` in the working folder or beside the package's source."""
    from ..errors import InputError

    candidates = [Path.cwd() / "demo_comments", Path(__file__).resolve().parents[2] / "demo_comments"]
    for folder in candidates:
        if (folder / "survey.yaml").exists():
            return folder
    raise InputError("cannot find the demo survey (demo_comments/survey.yaml); run textkit demo from the "
                     "textkit source folder", source=candidates[0])


@click.command("demo")
@click.option("--out", "out_dir", required=True, type=click.Path(path_type=Path),
              help="Folder for the demo report.")
@click.option("--quiet", is_flag=True, help="No stage times and no summary.")
def demo_command(out_dir: Path, quiet: bool) -> None:
    """The full report on the shipped invented demo survey, with one-page summaries per market."""
    folder = demo_folder()
    _run(folder / "survey.yaml", out_dir, "market", folder / "hand_coded.csv", quiet)
