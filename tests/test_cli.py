"""The command line end to end: the demo job, outputs, bad input, fast start."""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

from textkit.cli.main import cli, main
from textkit.pipeline import COVERAGE_COLUMNS, EVIDENCE_COLUMNS

ROOT = Path(__file__).resolve().parents[1]
DEMO_CONFIG = ROOT / "demo_comments" / "survey.yaml"
LEXICON = ROOT / "lexicons" / "visitor_experience.yaml"


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def run(argv: list[str], capsys) -> tuple[int, str, str]:
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    before = {p: sha(p) for p in (DEMO_CONFIG, DEMO_CONFIG.parent / "survey.csv", LEXICON)}
    code = main(["code", str(DEMO_CONFIG), "--out", str(out), "--quiet"])
    after = {p: sha(p) for p in before}
    return code, out, before, after


def test_help_lists_every_command_and_each_has_help():
    from click.testing import CliRunner

    runner = CliRunner()
    result = runner.invoke(cli, ["--help"])
    assert result.exit_code == 0
    for name in ("code", "lexicon", "agreement", "prevalence"):
        assert name in result.output
        assert runner.invoke(cli, [name, "--help"]).exit_code == 0


def test_help_does_not_import_the_heavy_stack():
    probe = ("import sys; from textkit.cli import main; main(['--help']); "
             "heavy = [m for m in ('pandas', 'sklearn', 'nltk', 'matplotlib', 'scipy', 'statsmodels') "
             "if m in sys.modules]; print('HEAVY', heavy)")
    output = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout
    assert "HEAVY []" in output


def test_demo_job_writes_the_four_tables_and_a_manifest(demo_run):
    code, out, before, after = demo_run
    assert code == 0
    assert before == after  # inputs untouched
    coded = pd.read_csv(out / "coded.csv", dtype={"response_id": str, "wave": str})
    lexicon_ids = json.loads((out / "manifest.json").read_text())["themes"]
    assert len(lexicon_ids) >= 25
    expected = ["response_id", "question", "weight", "stratum", "psu", "wave", "market", "age_band",
                "trip_purpose", "site", "season", "answered", *lexicon_ids, "n_themes", "uncoded"]
    assert list(coded.columns) == expected
    assert len(coded) == 2 * coded["response_id"].nunique() >= 12_000
    assert set(coded["question"]) == {"low_point", "high_point"}
    assert coded[lexicon_ids].isin([0, 1]).all().all()
    # a child's code implies its parent's
    assert (coded["toilets"] <= coded["facilities"]).all() and (coded["parking"] <= coded["transport"]).all()
    assert ((coded["uncoded"] == 1) == ((coded["answered"] == 1) & (coded["n_themes"] == 0))).all()
    parquet = pd.read_parquet(out / "coded.parquet")
    assert list(parquet.columns) == expected and len(parquet) == len(coded)
    evidence = pd.read_csv(out / "evidence.csv", dtype={"response_id": str})
    assert list(evidence.columns) == EVIDENCE_COLUMNS
    coverage = pd.read_csv(out / "coverage.csv")
    assert list(coverage.columns) == COVERAGE_COLUMNS
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["survey"]["sha256"] == before[DEMO_CONFIG.parent / "survey.csv"]
    assert manifest["lexicon"]["sha256"] == before[LEXICON]
    assert sorted(manifest["files"]) == ["coded.csv", "coded.parquet", "coverage.csv", "evidence.csv"]


def test_evidence_spans_point_at_the_matched_text(demo_run):
    _, out, _, _ = demo_run
    survey = pd.read_csv(DEMO_CONFIG.parent / "survey.csv", dtype=str, keep_default_na=False)
    texts = survey.melt(id_vars="response_id", value_vars=["low_point", "high_point"],
                        var_name="question", value_name="text").set_index(["response_id", "question"])["text"]
    evidence = pd.read_csv(out / "evidence.csv", dtype={"response_id": str}, keep_default_na=False)
    sample = evidence.sample(n=min(2000, len(evidence)), random_state=1)
    for row in sample.itertuples():
        original = texts.loc[(row.response_id, row.question)][row.start:row.end]
        assert original == row.matched_text or row.matched_text.startswith("[")
    # every evidence row belongs to a coded cell
    coded = pd.read_csv(out / "coded.csv", dtype={"response_id": str}).set_index(["response_id", "question"])
    for row in sample.head(300).itertuples():
        assert coded.loc[(row.response_id, row.question), row.theme] == 1


def test_coverage_shares_agree_with_the_coded_table(demo_run):
    _, out, _, _ = demo_run
    coded = pd.read_csv(out / "coded.csv")
    coverage = pd.read_csv(out / "coverage.csv").set_index(["question", "theme"])
    answered = coded[(coded["question"] == "low_point") & (coded["answered"] == 1)]
    weighted = (answered["weight"] * answered["queues"]).sum() / answered["weight"].sum()
    assert coverage.loc[("low_point", "queues"), "weighted_share"] == pytest.approx(weighted, rel=1e-5)
    assert coverage.loc[("low_point", "queues"), "responses_coded"] == answered["queues"].sum()


def test_same_inputs_give_identical_outputs(demo_run, tmp_path):
    _, out, _, _ = demo_run
    assert main(["code", str(DEMO_CONFIG), "--out", str(tmp_path), "--quiet"]) == 0
    for name in ("coded.csv", "evidence.csv", "coverage.csv"):
        assert sha(tmp_path / name) == sha(out / name)


def write_case(folder: Path, csv_text: str | bytes, extra: str = "", lexicon: str | None = None) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    data = folder / "answers.csv"
    data.write_bytes(csv_text if isinstance(csv_text, bytes) else csv_text.encode("utf-8"))
    lexicon_path = LEXICON
    if lexicon is not None:
        lexicon_path = folder / "lexicon.yaml"
        lexicon_path.write_text(lexicon, encoding="utf-8")
    config = folder / "survey.yaml"
    config.write_text(f"survey: answers.csv\nid: rid\nquestions: [comment]\nweight: w\n"
                      f"lexicon: {lexicon_path}\n{extra}", encoding="utf-8")
    return config


GOOD = "rid,comment,w\n1,The queue was long,1.0\n2,Lovely beach,2.0\n"
BAD_CASES = {
    "missing file": (None, "survey file not found"),
    "empty file": ("", "empty"),
    "missing column": ("rid,text,w\n1,a,1\n", "column 'comment'"),
    "duplicate ids": ("rid,comment,w\n1,a,1\n1,b,1\n", "appears twice"),
    "negative weight": ("rid,comment,w\n1,a,1\n2,b,-1\n", "negative weight"),
    "missing weight": ("rid,comment,w\n1,a,1\n2,b,\n", "missing weight"),
    "text weight": ("rid,comment,w\n1,a,1\n2,b,heavy\n", "not a number"),
    "empty text column": ("rid,comment,w\n1,,1\n2,,1\n", "empty in every row"),
}


@pytest.mark.parametrize("case", sorted(BAD_CASES))
def test_bad_input_is_one_line_exit_2_and_no_output(case, tmp_path, capsys):
    text, expected = BAD_CASES[case]
    config = write_case(tmp_path / "in", GOOD if text is None else text)
    if text is None:
        (tmp_path / "in" / "answers.csv").unlink()
    out = tmp_path / "out"
    code, stdout, stderr = run(["code", str(config), "--out", str(out), "--quiet"], capsys)
    assert code == 2
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("textkit: error: ")
    assert "answers.csv" in lines[0] and expected in lines[0]
    assert "Traceback" not in stderr
    assert not out.exists() or not any(out.iterdir())


def test_forced_encoding_that_does_not_fit_is_reported(tmp_path, capsys):
    config = write_case(tmp_path, "rid,comment,w\n1,caf\xe9 queue,1\n".encode("cp1252"), extra="encoding: utf-8\n")
    code, _, stderr = run(["code", str(config), "--out", str(tmp_path / "out"), "--quiet"], capsys)
    assert code == 2 and "answers.csv" in stderr and "utf-8" in stderr


def test_cp1252_fallback_is_reported_not_silent(tmp_path, capsys):
    config = write_case(tmp_path, "rid,comment,w\n1,caf\xe9 queue too long,1\n2,ok,1\n".encode("cp1252"))
    code, stdout, stderr = run(["code", str(config), "--out", str(tmp_path / "out")], capsys)
    assert code == 0
    assert "cp1252" in stderr
    coded = pd.read_csv(tmp_path / "out" / "coded.csv")
    assert coded.loc[0, "queues"] == 1


def test_malformed_lexicon_names_its_line(tmp_path, capsys):
    lexicon = "lexicon: t\nversion: '1'\nlanguage: en\nthemes:\n  - id: q\n    label: Q\n    terms: ['*ueue']\n"
    config = write_case(tmp_path, GOOD, lexicon=lexicon)
    code, _, stderr = run(["code", str(config), "--out", str(tmp_path / "out"), "--quiet"], capsys)
    assert code == 2
    assert "lexicon.yaml:7" in stderr and len(stderr.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()


def test_lexicon_check_prints_lint_and_every_problem(tmp_path, capsys):
    code, stdout, _ = run(["lexicon", "check", str(LEXICON)], capsys)
    assert code == 0 and "valid" in stdout
    broken = tmp_path / "broken.yaml"
    broken.write_text("lexicon: t\nversion: '1'\nlanguage: en\nthemes:\n  - id: a\n    label: A\n"
                      "    terms: [x*y]\n  - id: a\n    label: B\n    terms: [z]\n", encoding="utf-8")
    code, _, stderr = run(["lexicon", "check", str(broken)], capsys)
    assert code == 2
    assert "broken.yaml:7" in stderr and "broken.yaml:8" in stderr


def test_lexicon_check_with_a_survey_lists_unused_terms(capsys):
    code, stdout, _ = run(["lexicon", "check", str(LEXICON), "--survey", str(DEMO_CONFIG), "--quiet"], capsys)
    assert code == 0
    assert "terms that matched no answer" in stdout.lower()


def test_agreement_command_writes_tables(tmp_path, capsys):
    code, stdout, _ = run(["agreement", str(ROOT / "demo_comments" / "hand_coded.csv"), "--lexicon",
                           str(LEXICON), "--out", str(tmp_path)], capsys)
    assert code == 0 and "kappa" in stdout
    table = pd.read_csv(tmp_path / "agreement.csv")
    assert table["theme"].tolist()[-3:] == ["(no theme)", "(micro)", "(macro)"]
    # intervals were drawn (1,000 resamples by default) and hold the point estimate
    micro = table.set_index("theme").loc["(micro)"]
    assert micro.f1_low < micro.f1 < micro.f1_high


def test_prevalence_from_the_coded_folder(demo_run, tmp_path, capsys):
    _, out, _, _ = demo_run
    code, _, stderr = run(["prevalence", str(out), "--out", str(tmp_path), "--quiet"], capsys)
    assert code == 0, stderr
    table = pd.read_csv(tmp_path / "prevalence.csv")
    assert {"estimate", "ci_low", "ci_high", "flag"} <= set(table.columns)
    assert set(table["flag"]) <= {"ok", "caution", "suppress"}


def test_code_reads_other_formats_and_codes_every_answer(tmp_path, capsys):
    frame = pd.DataFrame({"rid": ["a1", "a2", "a3"], "txt": ["The queue was far too long", None, "Parking fees"],
                          "score": [5, 7, 9], "w": [1.0, 2.0, 0.5]})
    frame.to_parquet(tmp_path / "s.parquet")
    config = tmp_path / "s.yaml"
    config.write_text(f"survey: s.parquet\nid: rid\nquestions: [txt, score]\nweight: w\nlexicon: {LEXICON}\n",
                      encoding="utf-8")
    code, _, stderr = run(["code", str(config), "--out", str(tmp_path / "out"), "--quiet"], capsys)
    assert code == 0, stderr
    coded = pd.read_parquet(tmp_path / "out" / "coded.parquet")
    assert coded["question"].tolist() == ["txt", "score"] * 3
    assert coded["answered"].tolist() == [1, 1, 0, 1, 1, 1]  # a number is an answer, a missing text is not
    assert coded.loc[0, "queues"] == 1 and coded.loc[4, "parking"] == 1
