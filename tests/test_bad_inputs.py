"""A corpus of bad and hostile inputs, generated on the fly, run through every command.

Each case must end with exit status 2 and exactly one line on stderr (no traceback),
write nothing, and leave every input byte-for-byte as it was.
"""

from __future__ import annotations

import io
import os
import re
import shutil
import zipfile
from collections.abc import Callable
from pathlib import Path

import openpyxl
import pytest
from hostile import config_text, make_project, snapshot

from textkit.cli.main import main

BOMB = "a: &a [x, x, x, x, x, x, x, x, x]\n" + "".join(
    f"{n}: &{n} [{', '.join([f'*{p}'] * 9)}]\n" for p, n in zip("abcdefg", "bcdefgh", strict=True))
DEEP = "[" * 5000 + "]" * 5000 + "\n"

Setup = Callable[[Path], None]


def put(name: str, content: str | bytes) -> Setup:
    def setup(folder: Path) -> None:
        path = folder / name
        path.write_bytes(content if isinstance(content, bytes) else content.encode("utf-8"))
    return setup


def fifo(name: str) -> Setup:
    def setup(folder: Path) -> None:
        (folder / name).unlink(missing_ok=True)
        os.mkfifo(folder / name)
    return setup


def edit(name: str, old: str, new: str) -> Setup:
    def setup(folder: Path) -> None:
        path = folder / name
        text = path.read_text(encoding="utf-8")
        assert old in text, (name, old)
        path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return setup


def survey_rows(*lines: str) -> Setup:
    header = "response_id,low_point,high_point,weight,wave,market\n"
    return put("survey.csv", header + "".join(line + "\n" for line in lines))


def workbook(kind: str) -> Setup:
    def setup(folder: Path) -> None:
        book = openpyxl.Workbook()
        sheet = book.active
        sheet.append(["response_id", "low_point", "high_point", "weight", "wave", "market"])
        for i in range(5):
            sheet.append([f"r{i}", "long queue", "=B2" if kind == "formula" and i == 2 else "view", 1, 2026, "A"])
        buffer = io.BytesIO()
        book.save(buffer)
        if kind == "nosheets":
            source = zipfile.ZipFile(buffer)
            buffer = io.BytesIO()
            with zipfile.ZipFile(buffer, "w") as target:
                for item in source.infolist():
                    data = source.read(item.filename)
                    if item.filename == "xl/workbook.xml":
                        data = re.sub(rb"<sheets>.*</sheets>", b"<sheets/>", data)
                    target.writestr(item, data)
        (folder / "survey.xlsx").write_bytes(buffer.getvalue())
        (folder / "survey.yaml").write_text(config_text(survey="survey.xlsx"), encoding="utf-8")
    return setup


def steps(*setups: Setup) -> Setup:
    def setup(folder: Path) -> None:
        for step in setups:
            step(folder)
    return setup


def symlink(name: str, target: str) -> Setup:
    def setup(folder: Path) -> None:
        (folder / name).symlink_to(folder / target, target_is_directory=(folder / target).is_dir())
    return setup


def coded_folder(name: str) -> Setup:
    def setup(folder: Path) -> None:
        shutil.copytree(CODED_TEMPLATE, folder / name)
    return setup


BAD_CONFIGS: dict[str, Setup] = {
    "config missing": lambda folder: (folder / "survey.yaml").unlink(),
    "config a folder": lambda folder: ((folder / "survey.yaml").unlink(), (folder / "survey.yaml").mkdir()),
    "config a fifo": fifo("survey.yaml"),
    "config empty": put("survey.yaml", ""),
    "config not yaml": put("survey.yaml", "survey: [unclosed\n"),
    "config tab indent": put("survey.yaml", "survey: survey.csv\nquestions:\n\tq: low_point\n"),
    "config alias bomb": put("survey.yaml", BOMB),
    "config deep nesting": put("survey.yaml", DEEP),
    "config a list": put("survey.yaml", "- survey.csv\n"),
    "config not utf-8": put("survey.yaml", b"survey: caf\xe9.csv\n"),
    "config unknown key": edit("survey.yaml", "seed: 1", "sede: 1"),
    "config missing survey": edit("survey.yaml", "survey: survey.csv\n", ""),
    "config survey missing": edit("survey.yaml", "survey: survey.csv", "survey: nowhere.csv"),
    "config id column wrong": edit("survey.yaml", "id: response_id", "id: respondent"),
    "config lexicon missing": edit("survey.yaml", "lexicon: lexicon.yaml", "lexicon: nowhere.yaml"),
}
BAD_SURVEYS: dict[str, Setup] = {
    "survey unclosed quote": survey_rows('r1,"long queue,ok,1,2026,A', "r2,staff,ok,1,2026,A", "r3,a,b,1,2026,A"),
    "survey stray quote": survey_rows('r1,"long" queue,ok,1,2026,A', "r2,staff,ok,1,2026,A"),
    "survey repeated id": survey_rows("r1,queue,ok,1,2026,A", "r1,staff,ok,1,2026,A"),
    "survey negative weight": survey_rows("r1,queue,ok,-1,2026,A", "r2,staff,ok,1,2026,A"),
    "survey weight text": survey_rows("r1,queue,ok,heavy,2026,A", "r2,staff,ok,1,2026,A"),
    "survey missing weight": survey_rows("r1,queue,ok,,2026,A", "r2,staff,ok,1,2026,A"),
    "survey header only": survey_rows(),
    "survey empty": put("survey.csv", ""),
    "survey NUL bytes": put("survey.csv", b"response_id,low_point\x00\n"),
    "survey a fifo": fifo("survey.csv"),
    "survey too many fields": survey_rows("r1,queue,ok,1,2026,A,extra,more"),
    "survey xlsx no sheets": workbook("nosheets"),
    "survey xlsx formula": workbook("formula"),
}
BAD_LEXICONS: dict[str, Setup] = {
    "lexicon not yaml": put("lexicon.yaml", "lexicon: x\nthemes: [\n"),
    "lexicon unknown key": edit("lexicon.yaml", "label: Queues", "labl: Queues"),
    "lexicon alias bomb": put("lexicon.yaml", BOMB),
    "lexicon a fifo": fifo("lexicon.yaml"),
    "lexicon missing": lambda folder: (folder / "lexicon.yaml").unlink(),
}
BAD_HAND_CODES: dict[str, Setup] = {
    "hand code 2": put("hand.csv", "response_id,question,text,themes\nH1,low_point,long queue,queues\n"
                                   "H2,low_point,rude staff,2\n"),
    "hand code yes": put("hand.csv", "response_id,question,text,themes\nH1,low_point,long queue,yes\n"),
    "hand code no": put("hand.csv", "response_id,question,text,themes\nH1,low_point,long queue,queues;no\n"),
    "hand codes without ids": put("hand.csv", "text,themes\nlong queue,queues\n"),
}

CONFIG_COMMANDS = {
    "code": ["code", "survey.yaml", "--out", "out"],
    "keyness": ["keyness", "survey.yaml", "--out", "out"],
    "suggest": ["suggest", "survey.yaml", "--out", "out"],
    "prevalence": ["prevalence", "survey.yaml", "--out", "out"],
    "lexicon check": ["lexicon", "check", "lexicon.yaml", "--survey", "survey.yaml"],
}
LEXICON_COMMANDS = {
    "code": ["code", "survey.yaml", "--lexicon", "lexicon.yaml", "--out", "out"],
    "lexicon check": ["lexicon", "check", "lexicon.yaml"],
    "agreement": ["agreement", "hand.csv", "--lexicon", "lexicon.yaml", "--out", "out"],
}
AGREEMENT = ["agreement", "hand.csv", "--lexicon", "lexicon.yaml", "--out", "out"]

CASES: list[tuple[str, Setup, list[str]]] = []
for name, setup in BAD_CONFIGS.items():
    CASES += [(f"{command}: {name}", setup, argv) for command, argv in CONFIG_COMMANDS.items()
              if not (command == "lexicon check" and "lexicon" in name)]  # it checks the lexicon it is given
for name, setup in BAD_SURVEYS.items():
    CASES += [(f"{command}: {name}", setup, CONFIG_COMMANDS[command]) for command in ("code", "keyness")]
for name, setup in BAD_LEXICONS.items():
    CASES += [(f"{command}: {name}", setup, argv) for command, argv in LEXICON_COMMANDS.items()]
CASES += [(f"agreement: {name}", setup, AGREEMENT) for name, setup in BAD_HAND_CODES.items()]

NOTHING: Setup = lambda folder: None  # noqa: E731
CASES += [
    # options and usage
    ("prevalence: --min-base -5", coded_folder("coded"), ["prevalence", "coded", "--out", "out", "--min-base", "-5"]),
    ("prevalence: --confidence 1.5", coded_folder("coded"),
     ["prevalence", "coded", "--out", "out", "--confidence", "1.5"]),
    ("prevalence: --caution-rse -1", coded_folder("coded"),
     ["prevalence", "coded", "--out", "out", "--caution-rse", "-1"]),
    ("prevalence: unknown rule", coded_folder("coded"), ["prevalence", "coded", "--out", "out", "--rule", "strict"]),
    ("prevalence: folder without a result", lambda folder: (folder / "empty").mkdir(),
     ["prevalence", "empty", "--out", "out"]),
    ("keyness: --min-respondents 0", NOTHING, ["keyness", "survey.yaml", "--out", "out", "--min-respondents", "0"]),
    ("keyness: unknown group", NOTHING, ["keyness", "survey.yaml", "--out", "out", "--by", "planet"]),
    ("code: unknown option", NOTHING, ["code", "survey.yaml", "--out", "out", "--fast"]),
    ("code: no --out", NOTHING, ["code", "survey.yaml"]),
    ("code: empty --out", NOTHING, ["code", "survey.yaml", "--out", ""]),
    ("code: --out is a file", NOTHING, ["code", "survey.yaml", "--out", "survey.csv"]),
    ("mistyped command", NOTHING, ["cdoe", "survey.yaml"]),
    ("mistyped subcommand", NOTHING, ["lexicon", "chek", "lexicon.yaml"]),
    # outputs that would replace an input
    ("code: survey named coded.csv in --out",
     steps(lambda folder: (folder / "data").mkdir(), lambda folder: shutil.move(folder / "survey.csv",
                                                                               folder / "data" / "coded.csv"),
           edit("survey.yaml", "survey: survey.csv", "survey: data/coded.csv")),
     ["code", "survey.yaml", "--out", "data"]),
    ("code: --out links to the survey's folder",
     steps(lambda folder: (folder / "data").mkdir(), lambda folder: shutil.move(folder / "survey.csv",
                                                                               folder / "data" / "coded.csv"),
           edit("survey.yaml", "survey: survey.csv", "survey: data/coded.csv"), symlink("link", "data")),
     ["code", "survey.yaml", "--out", "link"]),
    ("code: lexicon named evidence.csv in --out",
     steps(lambda folder: (folder / "data").mkdir(),
           lambda folder: shutil.move(folder / "lexicon.yaml", folder / "data" / "evidence.csv")),
     ["code", "survey.yaml", "--lexicon", "data/evidence.csv", "--out", "data"]),
    ("code: config named manifest.json in --out",
     steps(lambda folder: (folder / "data").mkdir(),
           lambda folder: (folder / "data" / "manifest.json").write_text(
               config_text(survey="../survey.csv", lexicon="../lexicon.yaml"), encoding="utf-8")),
     ["code", "data/manifest.json", "--out", "data"]),
    ("prevalence: --out is its input folder", coded_folder("coded"), ["prevalence", "coded", "--out", "coded"]),
    ("prevalence: --out is its input file's folder", coded_folder("coded"),
     ["prevalence", "coded/coded.parquet", "--out", "coded"]),
    ("agreement: hand codes named agreement.csv",
     steps(lambda folder: (folder / "data").mkdir(),
           lambda folder: shutil.move(folder / "hand.csv", folder / "data" / "agreement.csv")),
     ["agreement", "data/agreement.csv", "--lexicon", "lexicon.yaml", "--out", "data"]),
    ("agreement: hand codes hard-linked as disagreements.csv",
     steps(lambda folder: (folder / "data").mkdir(),
           lambda folder: os.link(folder / "hand.csv", folder / "data" / "disagreements.csv")),
     ["agreement", "hand.csv", "--lexicon", "lexicon.yaml", "--out", "data"]),
    ("keyness: --out holds another command's result", coded_folder("coded"),
     ["keyness", "survey.yaml", "--out", "coded"]),
]



def stats_folder(name: str, *edits: tuple[str, str, str]) -> Setup:
    """A copy of the template's prevalence results as ``name``, with (file, old, new) edits applied."""
    def setup(folder: Path) -> None:
        shutil.copytree(STATS_TEMPLATE, folder / name)
        for file, old, new in edits:
            edit(f"{name}/{file}", old, new)(folder)
    return setup


def into(folder_name: str, source: str, target: str) -> Setup:
    """Move ``source`` to ``folder_name/target`` (making the folder) and point the config at it."""
    def setup(folder: Path) -> None:
        (folder / folder_name).mkdir(exist_ok=True)
        shutil.move(folder / source, folder / folder_name / target)
        key = "survey" if source == "survey.csv" else "lexicon"
        edit("survey.yaml", f"{key}: {source}", f"{key}: {folder_name}/{target}")(folder)
    return setup


CHARTS = ["charts", "stats", "--out", "out", "--jobs", "1"]
TOPICS_INTO_DATA = ["topics", "survey.yaml", "--out", "data", "--scope", "all", "--k", "2", "--max-df", "1"]
CASES += [
    # charts: results folders and filters
    ("charts: folder without tables", lambda folder: (folder / "empty").mkdir(), ["charts", "empty", "--out", "out"]),
    ("charts: no such folder", NOTHING, ["charts", "nowhere", "--out", "out"]),
    ("charts: a file as the results folder", NOTHING, ["charts", "survey.csv", "--out", "out"]),
    ("charts: group variable not in the data", stats_folder("stats"), [*CHARTS, "--group-var", "planet"]),
    ("charts: theme not in the data", stats_folder("stats"), [*CHARTS, "--theme", "sunburn"]),
    ("charts: wave not in the data", stats_folder("stats"), [*CHARTS, "--wave", "1999"]),
    ("charts: unknown format", stats_folder("stats"), [*CHARTS, "--format", "gif"]),
    ("charts: --dpi 72", stats_folder("stats"), [*CHARTS, "--dpi", "72"]),
    ("charts: --question-text without wording", stats_folder("stats"), [*CHARTS, "--question-text", "low_point"]),
    ("charts: prevalence.csv lacks a column", stats_folder("stats", ("prevalence.csv", "ci_high", "upper")), CHARTS),
    ("charts: prevalence.csv not CSV", steps(stats_folder("stats"), put("stats/prevalence.csv", b"\x00\xff\x00")),
     CHARTS),
    ("charts: prevalence.csv empty", steps(stats_folder("stats"), put("stats/prevalence.csv", "")), CHARTS),
    ("charts: estimate column is text",
     steps(stats_folder("stats"), lambda folder: _replace_column(folder / "stats" / "prevalence.csv", "estimate",
                                                                 "high")), CHARTS),
    ("charts: manifest.json broken", steps(stats_folder("stats"), put("stats/manifest.json", "{not json")), CHARTS),
    ("charts: --out is the results folder", stats_folder("stats"), ["charts", "stats", "--out", "stats"]),
    ("charts: --out is the second results folder", steps(stats_folder("stats"), coded_folder("coded")),
     ["charts", "stats", "coded", "--out", "coded", "--jobs", "1"]),
    # quotes
    ("quotes: config not yaml", put("survey.yaml", "survey: [unclosed\n"), ["quotes", "survey.yaml", "--out", "out"]),
    ("quotes: config missing", lambda folder: (folder / "survey.yaml").unlink(), ["quotes", "survey.yaml", "--out",
                                                                                   "out"]),
    ("quotes: unknown theme", NOTHING, ["quotes", "survey.yaml", "--out", "out", "--theme", "sunburn"]),
    ("quotes: unknown group variable", NOTHING, ["quotes", "survey.yaml", "--out", "out", "--group-var", "planet"]),
    ("quotes: --by-wave without a wave", edit("survey.yaml", "wave: wave\n", ""),
     ["quotes", "survey.yaml", "--out", "out", "--by-wave"]),
    ("quotes: --min-words above --max-words", NOTHING,
     ["quotes", "survey.yaml", "--out", "out", "--min-words", "20", "--max-words", "5"]),
    ("quotes: --out is the survey file", NOTHING, ["quotes", "survey.yaml", "--out", "survey.csv"]),
    ("quotes: survey named quotes.csv in --out", into("data", "survey.csv", "quotes.csv"),
     ["quotes", "survey.yaml", "--out", "data"]),
    # review
    ("review: config missing", lambda folder: (folder / "survey.yaml").unlink(),
     ["review", "survey.yaml", "--out", "review.xlsx"]),
    ("review: survey has a repeated id", survey_rows("r1,queue,ok,1,2026,A", "r1,staff,ok,1,2026,A"),
     ["review", "survey.yaml", "--out", "review.xlsx"]),
    ("review: unknown theme", NOTHING, ["review", "survey.yaml", "--out", "review.xlsx", "--theme", "sunburn"]),
    ("review: --group without a value", NOTHING, ["review", "survey.yaml", "--out", "review.xlsx", "--group",
                                                  "market"]),
    ("review: unknown question", NOTHING, ["review", "survey.yaml", "--out", "review.xlsx", "--question", "mood"]),
    ("review: --out is the survey", NOTHING, ["review", "survey.yaml", "--out", "survey.csv"]),
    ("review: --out is the lexicon", NOTHING, ["review", "survey.yaml", "--out", "lexicon.yaml"]),
    ("review: --out is the survey workbook",
     steps(workbook("plain"), lambda folder: shutil.move(folder / "survey.xlsx", folder / "review.xlsx"),
           edit("survey.yaml", "survey: survey.xlsx", "survey: review.xlsx")),
     ["review", "survey.yaml", "--out", "review.xlsx"]),
    ("review: --out is a folder", lambda folder: (folder / "sheets").mkdir(),
     ["review", "survey.yaml", "--out", "sheets"]),
    ("review: --out exists (codes may have been typed into it)", put("review.xlsx", b"typed-in corrections"),
     ["review", "survey.yaml", "--out", "review.xlsx"]),
    ("sample: --out exists (hand codes may have been typed into it)", put("codes.csv", "id,queue\nr1,1\n"),
     ["sample", "survey.yaml", "--n", "2", "--out", "codes.csv"]),
    # sample
    ("sample: config not yaml", put("survey.yaml", "survey: [unclosed\n"),
     ["sample", "survey.yaml", "--n", "10", "--out", "sample.xlsx"]),
    ("sample: --n 0", NOTHING, ["sample", "survey.yaml", "--n", "0", "--out", "sample.xlsx"]),
    ("sample: unknown stratum column", NOTHING,
     ["sample", "survey.yaml", "--n", "10", "--out", "sample.xlsx", "--stratify", "planet"]),
    ("sample: --enrich 1", NOTHING, ["sample", "survey.yaml", "--n", "10", "--out", "sample.xlsx", "--enrich", "1"]),
    ("sample: a coder named twice", NOTHING,
     ["sample", "survey.yaml", "--n", "10", "--out", "sample.xlsx", "--coders", "Ilse,Maro,Ilse"]),
    ("sample: --out neither xlsx nor csv", NOTHING, ["sample", "survey.yaml", "--n", "10", "--out", "sample.txt"]),
    ("sample: --out is the survey", NOTHING, ["sample", "survey.yaml", "--n", "10", "--out", "survey.csv"]),
    ("sample: --out is the config", NOTHING, ["sample", "survey.yaml", "--n", "10", "--out", "survey.yaml"]),
    ("sample: --out is the lexicon as CSV", into("data", "lexicon.yaml", "lexicon.csv"),
     ["sample", "survey.yaml", "--n", "10", "--out", "data/lexicon.csv"]),
    # lexicon diff
    ("lexicon diff: old lexicon missing", NOTHING,
     ["lexicon", "diff", "nowhere.yaml", "lexicon.yaml", "--survey", "survey.yaml"]),
    ("lexicon diff: new lexicon not yaml", put("new.yaml", "themes: [\n"),
     ["lexicon", "diff", "lexicon.yaml", "new.yaml", "--survey", "survey.yaml"]),
    ("lexicon diff: survey config missing", NOTHING,
     ["lexicon", "diff", "lexicon.yaml", "lexicon.yaml", "--survey", "nowhere.yaml"]),
    ("lexicon diff: --examples -1", NOTHING,
     ["lexicon", "diff", "lexicon.yaml", "lexicon.yaml", "--survey", "survey.yaml", "--examples", "-1"]),
    ("lexicon diff: --out is a file", NOTHING,
     ["lexicon", "diff", "lexicon.yaml", "lexicon.yaml", "--survey", "survey.yaml", "--out", "survey.csv"]),
    ("lexicon diff: lexicon named lexicon_diff.csv in --out",
     steps(lambda folder: (folder / "data").mkdir(),
           lambda folder: shutil.copy(folder / "lexicon.yaml", folder / "data" / "lexicon_diff.csv")),
     ["lexicon", "diff", "lexicon.yaml", "data/lexicon_diff.csv", "--survey", "survey.yaml", "--out", "data"]),
    # topics
    ("topics: config missing", lambda folder: (folder / "survey.yaml").unlink(),
     ["topics", "survey.yaml", "--out", "out"]),
    ("topics: --scope theme without --theme", NOTHING, ["topics", "survey.yaml", "--out", "out", "--scope", "theme"]),
    ("topics: --k-range upside down", NOTHING, ["topics", "survey.yaml", "--out", "out", "--k-range", "9", "3"]),
    ("topics: unknown question", NOTHING, ["topics", "survey.yaml", "--out", "out", "--question", "mood"]),
    ("topics: unknown group variable", NOTHING, ["topics", "survey.yaml", "--out", "out", "--by", "planet"]),
    ("topics: --max-df 0", NOTHING, ["topics", "survey.yaml", "--out", "out", "--max-df", "0"]),
    ("topics: too little text for any topic", NOTHING, ["topics", "survey.yaml", "--out", "out"]),
    # (--scope all --k 2 --max-df 1: settings under which this small survey does give topics)
    ("topics: --out is its input folder", coded_folder("coded"),
     ["topics", "coded", "--out", "coded", "--scope", "all", "--k", "2", "--max-df", "1"]),
    ("topics: survey named topics.csv in --out", into("data", "survey.csv", "topics.csv"), TOPICS_INTO_DATA),
    ("topics: lexicon named k_selection.csv in --out", into("data", "lexicon.yaml", "k_selection.csv"),
     TOPICS_INTO_DATA),
    # report
    ("report: config not yaml", put("survey.yaml", "survey: [unclosed\n"), ["report", "survey.yaml", "--out", "out"]),
    ("report: survey has a negative weight", survey_rows("r1,queue,ok,-1,2026,A", "r2,staff,ok,1,2026,A"),
     ["report", "survey.yaml", "--out", "out"]),
    ("report: unknown summaries group", NOTHING, ["report", "survey.yaml", "--out", "out", "--summaries", "planet"]),
    ("report: hand codes missing", NOTHING, ["report", "survey.yaml", "--out", "out", "--hand-coded", "nowhere.csv"]),
    ("report: --out is the survey", NOTHING, ["report", "survey.yaml", "--out", "survey.csv"]),
    ("report: survey named prevalence.csv in --out", into("data", "survey.csv", "prevalence.csv"),
     ["report", "survey.yaml", "--out", "data"]),
    ("report: lexicon named manifest.json in --out", into("data", "lexicon.yaml", "manifest.json"),
     ["report", "survey.yaml", "--out", "data"]),
]


def _replace_column(path: Path, column: str, value: str) -> None:
    import csv

    with open(path, encoding="utf-8-sig", newline="") as handle:
        rows = list(csv.DictReader(handle))
    with open(path, "w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows({**row, column: value} for row in rows)


CODED_TEMPLATE: Path
STATS_TEMPLATE: Path


@pytest.fixture(scope="module", autouse=True)
def coded_template(tmp_path_factory):
    global CODED_TEMPLATE, STATS_TEMPLATE
    project = tmp_path_factory.mktemp("template")
    make_project(project)
    assert main(["code", str(project / "survey.yaml"), "--out", str(project / "coded"), "--quiet"]) == 0
    CODED_TEMPLATE = project / "coded"
    assert main(["prevalence", str(project / "coded"), "--out", str(project / "stats"), "--quiet"]) == 0
    STATS_TEMPLATE = project / "stats"


def test_the_corpus_is_large_and_covers_every_command():
    assert len(CASES) >= 60
    commands = {argv[0] for _, _, argv in CASES}
    assert commands >= {"code", "prevalence", "keyness", "suggest", "agreement", "lexicon", "charts", "quotes",
                        "review", "sample", "topics", "report"}
    for command in ("charts", "quotes", "review", "sample", "topics", "report"):
        named = [name for name, _, _ in CASES if name.startswith(f"{command}:")]
        assert len(named) >= 4 and any("--out" in name or "in --out" in name for name in named), command
    assert sum(name.startswith("lexicon diff:") for name, _, _ in CASES) >= 4


@pytest.mark.parametrize("name, setup, argv", CASES, ids=[name for name, _, _ in CASES])
def test_bad_input_is_refused_cleanly(name, setup, argv, tmp_path, capsys, monkeypatch):
    make_project(tmp_path)
    setup(tmp_path)
    before = snapshot(tmp_path)
    monkeypatch.chdir(tmp_path)
    status = main(argv)
    captured = capsys.readouterr()
    lines = captured.err.strip("\n").split("\n")
    assert status == 2, (name, captured.err)
    assert len(lines) == 1 and lines[0].startswith("textkit: error: "), (name, captured.err)
    assert "Traceback" not in captured.err + captured.out
    assert snapshot(tmp_path) == before  # nothing written, nothing changed, no temporary folder left
