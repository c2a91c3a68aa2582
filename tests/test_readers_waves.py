"""Survey reading for a first real use: many problems in one run, one file per wave, coding without a design."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from textkit.errors import MAX_PROBLEMS, DataProblemsError, InputError
from textkit.io.config import config_from_mapping, load_config
from textkit.io.readers import read_survey

LEXICON = Path(__file__).resolve().parents[1] / "lexicons" / "visitor_experience.yaml"
HEADER = "rid,comment,w,stratum,psu,N,market"


def write(path: Path, rows: list[str], header: str = HEADER) -> Path:
    path.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8")
    return path


def good_rows(start: int, n: int) -> list[str]:
    """n clean rows: two strata of two PSUs each, fpc 100."""
    return [f"{start + i},the queue was long and the toilets dirty,1.5,{'ns'[i % 2]},{'ns'[i % 2]}{i % 4 // 2},100,"
            f"{'ab'[i % 2]}" for i in range(n)]


def mapping(**changes) -> dict:
    base = {"survey": "s.csv", "id": "rid", "questions": {"low": "comment"}, "weight": "w",
            "design": {"strata": "stratum", "cluster": "psu", "fpc": "N"}, "groups": ["market"]}
    base.update(changes)
    return base


# ------------------------------------------------------------------ problems collected
def test_one_run_reports_every_kind_of_row_problem(tmp_path):
    rows = good_rows(1, 8)
    rows[1] = ",no id here,1,n,n0,100,a"                    # row 2: missing id
    rows[2] = "1,repeats the first id,1,s,s1,100,b"          # row 3: id 1 again
    rows[3] = "4,weight is a word,heavy,n,n1,100,a"          # row 4: weight not a number
    rows[4] = "5,negative weight,-2,s,s0,100,b"              # row 5: negative weight
    rows[5] = "6,no stratum,1,,n0,100,a"                     # row 6: missing stratum
    rows[6] = "7,fpc is text,1,s,s1,many,b"                  # row 7: fpc not a number
    write(tmp_path / "s.csv", rows)
    with pytest.raises(DataProblemsError) as caught:
        read_survey(config_from_mapping(mapping(), tmp_path))
    error = caught.value
    places = [(p.row, p.column) for p in error.problems]
    assert places == [(2, "rid"), (3, "rid"), (4, "w"), (5, "w"), (6, "stratum"), (7, "N")]
    assert str(error).endswith("6 problems in the data (all listed below); fix them and run again")
    assert str(error).startswith(str(tmp_path / "s.csv"))
    assert "response id '1' appears twice, in rows 1 and 3" in error.detail_lines[1]
    assert "weight 'heavy' is not a number" in error.detail_lines[2]
    assert all(line.startswith(str(tmp_path / "s.csv") + " (row ") for line in error.detail_lines)


def test_at_most_twenty_problems_are_listed_and_the_rest_counted(tmp_path):
    rows = [f"{i},text,-1,n,n0,100,a" for i in range(1, 31)]   # 30 negative weights
    write(tmp_path / "s.csv", rows)
    with pytest.raises(DataProblemsError) as caught:
        read_survey(config_from_mapping(mapping(), tmp_path))
    error = caught.value
    assert error.total == 30 and len(error.problems) == MAX_PROBLEMS == 20
    assert [p.row for p in error.problems] == list(range(1, 21))
    assert "the first 20 listed below" in str(error)
    assert error.detail_lines[-1] == "... and 10 more problem(s) of the same kinds"


def test_a_single_problem_keeps_its_own_one_line_message(tmp_path):
    rows = good_rows(1, 4)
    rows[2] = "3,text,-1,n,n0,100,a"
    write(tmp_path / "s.csv", rows)
    with pytest.raises(InputError) as caught:
        read_survey(config_from_mapping(mapping(), tmp_path))
    assert (caught.value.row, caught.value.column) == (3, "w") and caught.value.detail_lines == []
    assert "negative weight -1" in str(caught.value)


def test_cli_prints_the_summary_then_one_problem_a_line(tmp_path, capsys):
    from textkit.cli.main import main

    rows = good_rows(1, 6)
    rows[0] = "1,text,,n,n0,100,a"
    rows[3] = "4,text,1,n,,100,a"
    rows[4] = "5,text,1,n,n0,-3,a"
    write(tmp_path / "s.csv", rows)
    config = tmp_path / "s.yaml"
    config.write_text(json.dumps(mapping(lexicon=str(LEXICON))), encoding="utf-8")
    assert main(["code", str(config), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    lines = capsys.readouterr().err.splitlines()
    assert lines[0].startswith("textkit: error: ") and "3 problems in the data" in lines[0]
    assert [line.split("): ")[0].rsplit("(", 1)[1] for line in lines[1:]] == [
        "row 1, column 'w'", "row 4, column 'psu'", "row 5, column 'N'"]
    assert "missing cluster value" in lines[2] and "fpc -3 is not a positive population size" in lines[3]
    assert not (tmp_path / "out").exists()


# ------------------------------------------------------------------ coding without the design
def test_code_warns_about_absent_design_columns_and_prevalence_refuses_them(tmp_path, capsys):
    from textkit.cli.main import main

    write(tmp_path / "s.csv", [r.rsplit(",", 5)[0] + "," + r.rsplit(",", 1)[1] for r in good_rows(1, 40)],
          header="rid,comment,market")
    config = tmp_path / "s.yaml"
    config.write_text(json.dumps(mapping(lexicon=str(LEXICON))), encoding="utf-8")
    out = tmp_path / "coded"
    assert main(["code", str(config), "--out", str(out), "--quiet"]) == 0
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("warning: ")
    assert "weight 'w', strata 'stratum', cluster 'psu', fpc 'N'" in err[0] and "goes on" in err[0]
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["roles"]["weight"] == "w"          # the config's roles are kept for prevalence
    assert main(["prevalence", str(out), "--out", str(tmp_path / "stats"), "--quiet"]) == 2
    assert "prevalence needs every design column" in capsys.readouterr().err
    # the Python default still refuses (other commands need the design)
    with pytest.raises(InputError, match="no such column"):
        read_survey(load_config(config))


# ------------------------------------------------------------------ one file per wave
def test_wave_files_are_read_given_their_wave_and_stacked(tmp_path):
    write(tmp_path / "a.csv", good_rows(1, 6))
    write(tmp_path / "b.csv", good_rows(101, 4))
    (tmp_path / "s.yaml").write_text("survey:\n  2025: a.csv\n  2026: b.csv\nid: rid\nquestions: [comment]\n"
                                     "weight: w\n", encoding="utf-8")
    data = read_survey(load_config(tmp_path / "s.yaml"))
    assert data.config.wave == "wave"                   # default name of the wave column
    assert data.frame["wave"].tolist() == ["2025"] * 6 + ["2026"] * 4
    assert data.frame["rid"].tolist()[5:7] == ["6", "101"]
    assert [(f["wave"], Path(f["path"]).name, f["rows"]) for f in data.files] == [("2025", "a.csv", 6),
                                                                               ("2026", "b.csv", 4)]
    listed = config_from_mapping(mapping(survey=[{"file": "a.csv", "wave": 2025}, {"file": "b.csv", "wave": "2026"}],
                                         wave="round"), tmp_path)
    assert read_survey(listed).frame["round"].tolist() == ["2025"] * 6 + ["2026"] * 4


def test_wave_files_must_agree_on_columns_ids_and_waves(tmp_path):
    write(tmp_path / "a.csv", good_rows(1, 4))
    write(tmp_path / "b.csv", [r + ",x" for r in good_rows(11, 4)], header=HEADER + ",extra")
    config = config_from_mapping(mapping(survey={2025: "a.csv", 2026: "b.csv"}), tmp_path)
    with pytest.raises(InputError, match="column 'extra' is not in the first wave file a.csv") as caught:
        read_survey(config)
    assert caught.value.source == str((tmp_path / "b.csv").resolve()) and caught.value.column == "extra"
    # an id used in both files, and a wave cell that contradicts the config: both rows named, in their files
    write(tmp_path / "a.csv", good_rows(1, 4), header=HEADER + ",wave")
    write(tmp_path / "b.csv", [r + ",2026" for r in good_rows(3, 4)], header=HEADER + ",wave")
    rows = (tmp_path / "b.csv").read_text().splitlines()
    rows[4] = rows[4].replace(",2026", ",2024")
    (tmp_path / "b.csv").write_text("\n".join(rows) + "\n")
    with pytest.raises(DataProblemsError) as caught:
        read_survey(config)
    lines = caught.value.detail_lines
    assert any("b.csv (row 1, column 'rid')" in line and "a.csv row 3 and here" in line for line in lines)
    assert any("b.csv (row 4, column 'wave')" in line and "'2024' differs from the wave '2026'" in line
               for line in lines)


def test_wave_file_config_errors_name_the_line(tmp_path):
    write(tmp_path / "a.csv", good_rows(1, 2))
    (tmp_path / "s.yaml").write_text("survey:\n  - {file: a.csv, wave: 2025}\n  - {file: a.csv}\nid: rid\n"
                                     "questions: [comment]\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"s.yaml:3: an item of 'survey' needs 'wave:'"):
        load_config(tmp_path / "s.yaml")
    (tmp_path / "s.yaml").write_text("survey:\n  2025: a.csv\n  2026: a.csv\nid: rid\nquestions: [comment]\n",
                                     encoding="utf-8")
    with pytest.raises(InputError, match="file a.csv is given twice"):
        load_config(tmp_path / "s.yaml")


def test_cli_codes_and_estimates_a_survey_given_as_wave_files(tmp_path, capsys):
    from textkit.cli.main import main

    write(tmp_path / "a.csv", good_rows(1, 40))
    write(tmp_path / "b.csv", good_rows(101, 40))
    config = tmp_path / "s.yaml"
    config.write_text(json.dumps(mapping(survey={"2025": "a.csv", "2026": "b.csv"}, lexicon=str(LEXICON))),
                      encoding="utf-8")
    assert main(["code", str(config), "--out", str(tmp_path / "coded"), "--quiet"]) == 0
    manifest = json.loads((tmp_path / "coded" / "manifest.json").read_text())
    assert [f["wave"] for f in manifest["survey"]["wave_files"]] == ["2025", "2026"]
    assert manifest["roles"]["wave"] == "wave"
    assert main(["prevalence", str(tmp_path / "coded"), "--out", str(tmp_path / "stats"), "--quiet",
                 "--theme", "queues"]) == 0
    import pandas as pd

    table = pd.read_csv(tmp_path / "stats" / "prevalence.csv", encoding="utf-8-sig", dtype={"wave": str})
    assert set(table.wave) == {"2025", "2026", "(all)"}


def test_max_answer_chars_in_the_config_cuts_long_answers_and_counts_the_rest(tmp_path):
    # The cap is the config's; the note counts what was left out (issue: nothing silently dropped).
    from textkit.io.config import load_config
    from textkit.io.readers import read_survey

    (tmp_path / "s.csv").write_text("id,answer\n1," + "queue " * 100 + "\n2,short\n", encoding="utf-8")
    (tmp_path / "s.yaml").write_text("survey: s.csv\nid: id\nquestions: {q: answer}\nmax_answer_chars: 120\n",
                                     encoding="utf-8")
    data = read_survey(load_config(tmp_path / "s.yaml"))
    assert len(data.frame["answer"].iloc[0]) == 120
    assert data.frame["answer"].iloc[1] == "short"
    assert any("480 characters left out" in note for note in data.notes)


def test_max_answer_chars_below_100_is_refused_with_its_line(tmp_path):
    import pytest

    from textkit.errors import InputError
    from textkit.io.config import load_config

    (tmp_path / "s.yaml").write_text("survey: s.csv\nid: id\nquestions: {q: answer}\nmax_answer_chars: 5\n",
                                     encoding="utf-8")
    (tmp_path / "s.csv").write_text("id,answer\n1,a\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"s.yaml:4.*max_answer_chars"):
        load_config(tmp_path / "s.yaml")
