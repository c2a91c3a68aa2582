"""`textkit topics` on bad input, and keyness / suggest / topics reading a folder written by `textkit code`."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest
from topic_fixtures import write_small_survey

from textkit.cli.main import main


def run(argv: list[str], capsys) -> tuple[int, str, str]:
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def assert_refused(code: int, stderr: str, out: Path, *expected: str) -> None:
    """Exit 2, one line naming the problem, no traceback, nothing written."""
    assert code == 2
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("textkit: error: "), stderr
    assert "Traceback" not in stderr
    for piece in expected:
        assert piece in lines[0], lines[0]
    assert not out.exists()


def write_survey(folder: Path, answers: list[str]) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    pd.DataFrame({"rid": range(1, len(answers) + 1), "comment": answers,
                  "w": 1.0}).to_csv(folder / "answers.csv", index=False)
    config = folder / "survey.yaml"
    lexicon = Path(__file__).resolve().parents[1] / "lexicons" / "visitor_experience.yaml"
    config.write_text(f"survey: answers.csv\nid: rid\nquestions: [comment]\nweight: w\nlexicon: {lexicon}\n",
                      encoding="utf-8")
    return config


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """The small invented survey and the folder `textkit code` wrote for it."""
    folder = tmp_path_factory.mktemp("small")
    config = write_small_survey(folder / "in")
    coded = folder / "coded"
    assert main(["code", str(config), "--out", str(coded), "--quiet"]) == 0
    return config, coded


def test_too_few_answers_for_the_k_range(tmp_path, capsys):
    config = write_survey(tmp_path / "in", ["wrackheap brinemat saltrot"] * 3 + ["quaylamp tollpike capstan"] * 3)
    out = tmp_path / "out"
    code, _, stderr = run(["topics", str(config), "--out", str(out), "--min-df", "1", "--quiet"], capsys)
    # 6 answers, 2 distinct: every word is in half of them (above --max-df 20%), none is left
    assert_refused(code, stderr, out, "comment (unexplained)", "6 answers", "0 terms", "smallest k=3",
                   "lower")


def test_too_small_a_vocabulary_for_k(tmp_path, capsys):
    import numpy as np

    rng = np.random.default_rng(0)
    words = ["wrackheap", "brinemat", "saltrot", "tidewort"]
    # 80 answers whose only words in 5+ answers are these four (each number is in one answer): once
    # filtered, four distinct answers and four terms
    answers = [f"{rng.choice(words)} {i}" for i in range(80)]
    config = write_survey(tmp_path / "in", answers)
    out = tmp_path / "out"
    code, _, stderr = run(["topics", str(config), "--out", str(out), "--k", "3", "--max-df", "0.5", "--quiet"],
                          capsys)
    assert_refused(code, stderr, out, "80 answers", "4 distinct", "4 terms", "support at most k=0",
                   "k=3 refused", "lower --k")


@pytest.mark.parametrize("k", ["400", "0"])
def test_k_outside_what_the_data_supports_is_refused(small, tmp_path, capsys, k):
    config, _ = small
    out = tmp_path / "out"
    code, _, stderr = run(["topics", str(config), "--out", str(out), "--k", k, "--question", "low",
                           "--quiet"], capsys)
    expected = ("k=400 refused", "support at most k=") if k == "400" else ("at least 1",)
    assert_refused(code, stderr, out, *expected)


def test_keyness_reads_a_coded_folder(small, tmp_path, capsys):
    config, coded = small
    out = tmp_path / "keyness"
    code, _, stderr = run(["keyness", str(coded), "--out", str(out), "--question", "low", "--by", "wave",
                           "--quiet"], capsys)
    assert code == 0, stderr
    table = pd.read_csv(out / "keyness.csv")
    assert set(table["question"]) == {"low"}
    assert "skyglider" in set(table["term"])          # the wave-2026 subject is key for 2026
    # the same as from the config
    again = tmp_path / "again"
    assert run(["keyness", str(config), "--out", str(again), "--question", "low", "--by", "wave", "--quiet"],
               capsys)[0] == 0
    assert (again / "keyness.csv").read_bytes() == (out / "keyness.csv").read_bytes()


def test_suggest_reads_a_coded_folder(small, tmp_path, capsys):
    _, coded = small
    out = tmp_path / "suggest"
    code, _, stderr = run(["suggest", str(coded), "--out", str(out), "--question", "high", "--by", "market",
                           "--quiet"], capsys)
    assert code == 0, stderr
    draft = (out / "lexicon-suggestions.yaml").read_text(encoding="utf-8")
    assert "skyglider" not in draft                   # a low-point subject: not in the high-point draft
    assert (out / "suggestions.csv").exists()


def test_topics_reads_a_coded_folder(small, tmp_path, capsys):
    _, coded = small
    out = tmp_path / "topics"
    code, stdout, stderr = run(["topics", str(coded), "--out", str(out), "--question", "low", "--by", "market",
                                "--k", "4"], capsys)
    assert code == 0, stderr
    summary = pd.read_csv(out / "topic_summary.csv")
    assert set(summary["question"]) == {"low"} and len(summary) == 4
    assert set(summary["top_group_var"]) <= {"market"}
    terms = pd.read_csv(out / "topics.csv")
    assert terms["term"].str.contains("skyglider").any()
    assert "low: 4 topics (given)" in stdout


def test_unknown_question_or_group_from_a_coded_folder(small, tmp_path, capsys):
    _, coded = small
    for extra, expected in ((["--question", "middle"], "no question 'middle'"),
                            (["--by", "planet"], "no group variable 'planet'")):
        out = tmp_path / "out"
        code, _, stderr = run(["topics", str(coded), "--out", str(out), "--quiet", *extra], capsys)
        assert_refused(code, stderr, out, expected)
