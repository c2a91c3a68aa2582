"""Tests for textkit.readers: every survey format in, every bad input refused."""

from __future__ import annotations

import hashlib
import sqlite3
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from textkit.errors import InputError
from textkit.io.config import config_from_mapping, normalise_answer
from textkit.io.readers import MISSING_LABEL, SurveyData, answered_mask, read_survey, read_table

# Invented survey: markets, places and answers are made up.
HEADER = "response_id,market,comment,weight"
ROWS = [
    "r01,Norvale,The harbour walk was lovely,1.5",
    "r02,Kestrin,Queues at the ferry,2",
    "r03,Norvale,NA,0.5",
]


def sha(path: Path) -> str:
    # independent of textkit.output.file_sha256: hashlib on the whole byte string
    return hashlib.sha256(path.read_bytes()).hexdigest()


def write_bytes(path: Path, data: bytes) -> Path:
    path.write_bytes(data)
    return path


def read_unchanged(path: Path, **options):
    """read_table, asserting the file is byte-identical afterwards and nothing was added beside it."""
    before, listing = sha(path), sorted(p.name for p in path.parent.iterdir())
    frame, notes = read_table(path, **options)
    assert sha(path) == before
    assert sorted(p.name for p in path.parent.iterdir()) == listing
    return frame, notes


def raises_naming(path: Path, match: str, **options) -> InputError:
    with pytest.raises(InputError, match=match) as caught:
        read_table(path, **options)
    assert caught.value.source == str(path)
    assert str(path) in str(caught.value)
    return caught.value


# ---------------------------------------------------------------------------
# CSV encodings and delimiters


def test_csv_utf8(tmp_path):
    path = write_bytes(tmp_path / "v.csv", ("\n".join([HEADER, *ROWS]) + "\n").encode("utf-8"))
    frame, notes = read_unchanged(path)
    assert list(frame.columns) == ["response_id", "market", "comment", "weight"]
    assert frame["market"].tolist() == ["Norvale", "Kestrin", "Norvale"]
    # "NA" in a text column is an answer, not a missing value
    assert frame["comment"].iloc[2] == "NA"
    assert frame["weight"].tolist() == ["1.5", "2", "0.5"]  # CSV cells stay text
    assert notes == []


def test_csv_utf8_bom_is_stripped(tmp_path):
    text = "\n".join([HEADER, *ROWS, "r04,Kestrin,Café crème at Lönnby pier,1"]) + "\n"
    path = write_bytes(tmp_path / "v.csv", text.encode("utf-8-sig"))
    frame, notes = read_unchanged(path)
    assert frame.columns[0] == "response_id"
    assert frame["comment"].iloc[3] == "Café crème at Lönnby pier"
    assert notes == []


def test_csv_cp1252_fallback_is_noted(tmp_path):
    text = HEADER + "\nr01,Norvale,Café – “superb”,1\n"
    data = text.encode("cp1252")
    # Windows-1252 code chart: é = 0xE9, en dash = 0x96, left double quote = 0x93 (common practice)
    assert b"\xe9" in data and b"\x96" in data and b"\x93" in data
    path = write_bytes(tmp_path / "v.csv", data)
    frame, notes = read_unchanged(path)
    assert frame["comment"].iloc[0] == "Café – “superb”"
    assert len(notes) == 1
    assert "cp1252" in notes[0] and str(path) in notes[0] and "line 2" in notes[0]


def test_csv_latin1_when_cp1252_cannot_decode(tmp_path):
    # 0x81 is undefined in Windows-1252 but a control character in ISO-8859-1 (both code charts)
    path = write_bytes(tmp_path / "v.csv", HEADER.encode() + b"\nr01,Norvale,ab\x81c \xe9,1\n")
    frame, notes = read_unchanged(path)
    assert frame["comment"].iloc[0] == "ab\x81c é"
    assert len(notes) == 1 and "Latin-1" in notes[0]


def test_csv_utf16_with_bom(tmp_path):
    # a spreadsheet's "Unicode text" export: UTF-16 with byte-order mark, tab-separated
    text = "response_id\tcomment\nr01\tSeals at Brannock Point\n"
    path = write_bytes(tmp_path / "v.txt", text.encode("utf-16"))
    frame, notes = read_unchanged(path)
    assert frame["comment"].tolist() == ["Seals at Brannock Point"]
    assert notes == [f"{path}: read as tab-separated"]


def test_forced_encoding(tmp_path):
    path = write_bytes(tmp_path / "v.csv", (HEADER + "\nr01,Norvale,Café,1\n").encode("cp1252"))
    frame, notes = read_unchanged(path, encoding="cp1252")
    assert frame["comment"].iloc[0] == "Café" and notes == []
    error = raises_naming(path, "cannot be read as utf-8", encoding="utf-8")
    assert error.line == 2 and "0xe9" in str(error)
    raises_naming(path, "unknown text encoding", encoding="no-such-codec")


def test_bom_but_not_utf8_is_an_error(tmp_path):
    path = write_bytes(tmp_path / "v.csv", b"\xef\xbb\xbf" + HEADER.encode() + b"\nr01,Norvale,caf\xe9,1\n")
    error = raises_naming(path, "byte-order mark")
    assert error.line == 2


@pytest.mark.parametrize(("delimiter", "name"), [(";", "semicolon"), ("\t", "tab"), ("|", "pipe")])
def test_sniffed_delimiters(tmp_path, delimiter, name):
    lines = ["response_id,market,comment,weight".replace(",", delimiter),
             # commas inside the text must not fool the detection
             delimiter.join(["r01", "Norvale", "Boats, bikes, and buses", "1,5"]),
             delimiter.join(["r02", "Kestrin", "Fine", "2"])]
    path = write_bytes(tmp_path / "v.csv", ("\n".join(lines) + "\n").encode())
    frame, notes = read_unchanged(path)
    assert list(frame.columns) == ["response_id", "market", "comment", "weight"]
    assert frame["comment"].iloc[0] == "Boats, bikes, and buses"
    assert notes == [f"{path}: read as {name}-separated"]


def test_tsv_suffix_and_forced_delimiter(tmp_path):
    path = write_bytes(tmp_path / "v.tsv", b"a,b\tc\n1,2\t3\n")
    frame, _ = read_unchanged(path)
    assert list(frame.columns) == ["a,b", "c"]
    path = write_bytes(tmp_path / "w.csv", b"a;b,c\n1;2,3\n")
    frame, notes = read_unchanged(path, delimiter=",")
    assert list(frame.columns) == ["a;b", "c"] and notes == []


def test_quoted_multiline_cells_and_empty_cells(tmp_path):
    text = ('response_id,comment,extra\n'
            'r01,"Line one\nline two, with comma\n""quoted""",x\n'
            'r02,,\n'
            'r03,"  ",y\n')
    path = write_bytes(tmp_path / "v.csv", text.encode())
    frame, _ = read_unchanged(path)
    assert len(frame) == 3
    assert frame["comment"].iloc[0] == 'Line one\nline two, with comma\n"quoted"'
    assert pd.isna(frame["comment"].iloc[1]) and pd.isna(frame["extra"].iloc[1])
    assert frame["comment"].iloc[2] == "  "  # blank is kept as read; answered_mask treats it as no answer


def test_csv_header_cleanup_is_noted(tmp_path):
    path = write_bytes(tmp_path / "v.csv", b" id ,comment,,comment\n1,a,b,c\n")
    frame, notes = read_unchanged(path)
    assert list(frame.columns) == ["id", "comment", "column_3", "comment.2"]
    assert any("column 3 has no header" in n for n in notes)
    assert any("'comment' appears more than once" in n for n in notes)


def test_trailing_empty_rows_are_dropped(tmp_path):
    path = write_bytes(tmp_path / "v.csv", b"id,comment\n1,a\n,\n2,b\n,\n,\n")
    frame, _ = read_unchanged(path)
    # the empty middle row stays so row numbers match the file; the trailing ones go
    assert len(frame) == 3 and frame["id"].isna().tolist() == [False, True, False]


def test_ragged_row_names_the_data_row(tmp_path):
    text = 'id,comment\n1,"two\nlines"\n2,ok\n3,too,many\n'
    path = write_bytes(tmp_path / "v.csv", text.encode())
    error = raises_naming(path, "3 fields but the header has 2")
    assert error.row == 3 and "(row 3)" in str(error)


def test_unclosed_quote_names_the_row(tmp_path):
    path = write_bytes(tmp_path / "v.csv", b'id,comment\n1,ok\n2,"never closed\n3,x\n')
    error = raises_naming(path, "never closed")
    assert error.row == 2


# ---------------------------------------------------------------------------
# Excel, Parquet, SPSS, SQLite

SAMPLE = pd.DataFrame({
    "response_id": ["r01", "r02", "r03"],
    "market": ["Norvale", "Kestrin", None],
    "comment": ["Lovely dunes", None, "Too windy at Harl Bay"],
    "weight": [1.5, 2.0, 0.5],
})


def test_xlsx_first_named_and_indexed_sheet(tmp_path):
    path = tmp_path / "v.xlsx"
    other = pd.DataFrame({"response_id": [7, 8], "comment": ["Quiet", "Busy"]})
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        SAMPLE.to_excel(writer, sheet_name="Wave 1", index=False)
        other.to_excel(writer, sheet_name="Wave 2", index=False)
    frame, notes = read_unchanged(path)
    assert frame["response_id"].tolist() == ["r01", "r02", "r03"]
    assert frame["weight"].tolist() == [1.5, 2.0, 0.5]
    assert pd.isna(frame["market"].iloc[2]) and pd.isna(frame["comment"].iloc[1])
    assert len(notes) == 1 and "'Wave 1'" in notes[0] and "'Wave 2'" in notes[0]
    for sheet in ("Wave 2", 1):
        frame, notes = read_unchanged(path, sheet=sheet)
        assert frame["comment"].tolist() == ["Quiet", "Busy"] and notes == []
        assert frame["response_id"].tolist() == [7, 8]
    error = raises_naming(path, "no sheet 'Wave 3'", sheet="Wave 3")
    assert "'Wave 1', 'Wave 2'" in str(error)
    raises_naming(path, "no sheet number 5", sheet=5)


def test_xlsx_header_only_has_no_data_rows(tmp_path):
    path = tmp_path / "v.xlsx"
    SAMPLE.iloc[:0].to_excel(path, index=False)
    raises_naming(path, "no data rows")


def test_parquet_round_trip(tmp_path):
    path = tmp_path / "v.parquet"
    SAMPLE.to_parquet(path, index=False)
    frame, notes = read_unchanged(path)
    pd.testing.assert_frame_equal(frame, SAMPLE, check_dtype=False)
    assert notes == []
    # a named index was a column for whoever wrote the file: it comes back as one
    named = tmp_path / "named.pq"
    SAMPLE.set_index("response_id").to_parquet(named)
    frame, _ = read_unchanged(named)
    assert frame["response_id"].tolist() == ["r01", "r02", "r03"]


def test_sav_value_labels_applied(tmp_path):
    import pyreadstat

    path = tmp_path / "v.sav"
    data = pd.DataFrame({"response_id": ["r01", "r02", "r03", "r04"],
                         "market": [1.0, 2.0, 3.0, np.nan],
                         "comment": ["Calm", "", "Crowded", "Fine"]})
    pyreadstat.write_sav(data, str(path), variable_value_labels={"market": {1: "Norvale", 2: "Kestrin"}})
    frame, notes = read_unchanged(path)
    market = frame["market"].astype(object).tolist()
    assert market[:2] == ["Norvale", "Kestrin"]
    assert market[2] == 3  # a value without a label keeps its code
    assert pd.isna(market[3])
    assert pd.isna(frame["comment"].iloc[1])  # SPSS stores missing text as "": read as missing
    assert any("value labels" in n and "market" in n for n in notes)


def make_db(path: Path) -> Path:
    with sqlite3.connect(path) as connection:
        connection.execute("CREATE TABLE answers (response_id TEXT, market TEXT, comment TEXT, weight REAL)")
        connection.executemany("INSERT INTO answers VALUES (?, ?, ?, ?)",
                               [("r01", "Norvale", "Clean beach", 1.0), ("r02", "Kestrin", None, 2.5),
                                ("r03", "Norvale", "No signs", 0.5)])
        connection.execute("CREATE TABLE markets (name TEXT)")
        connection.execute("INSERT INTO markets VALUES ('Norvale')")
    connection.close()
    return path


def test_sqlite_table_and_query(tmp_path):
    path = make_db(tmp_path / "v.sqlite")
    frame, notes = read_unchanged(path, table="answers")
    assert frame["comment"].iloc[0] == "Clean beach" and pd.isna(frame["comment"].iloc[1])
    assert frame["weight"].tolist() == [1.0, 2.5, 0.5]
    assert notes == []
    frame, _ = read_unchanged(path, query="SELECT response_id, weight * 2 AS w2 FROM answers "
                                          "WHERE market = 'Norvale' ORDER BY response_id")
    assert frame["response_id"].tolist() == ["r01", "r03"]
    assert frame["w2"].tolist() == [2.0, 1.0]


def test_sqlite_table_choice_errors(tmp_path):
    path = make_db(tmp_path / "v.db")
    error = raises_naming(path, "has 2 tables")
    assert "'answers', 'markets'" in str(error)
    error = raises_naming(path, "no table 'answer'", table="answer")
    assert "'answers', 'markets'" in str(error)


def test_sqlite_single_table_is_read_with_note(tmp_path):
    path = tmp_path / "one.sqlite3"
    with sqlite3.connect(path) as connection:
        connection.execute('CREATE TABLE "visitor ""log""" (id TEXT)')
        connection.execute('INSERT INTO "visitor ""log""" VALUES (\'a\')')
    connection.close()
    frame, notes = read_unchanged(path)
    assert frame["id"].tolist() == ["a"] and "only table" in notes[0]


@pytest.mark.parametrize("query", ["DELETE FROM answers", "UPDATE answers SET weight = 0",
                                   "DROP TABLE answers", "ATTACH DATABASE 'other.db' AS o"])
def test_sqlite_writing_queries_are_refused_and_db_unchanged(tmp_path, query):
    path = make_db(tmp_path / "v.sqlite")
    before = sha(path)
    raises_naming(path, "query failed", query=query)
    assert sha(path) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["v.sqlite"]


def test_sqlite_bad_query(tmp_path):
    path = make_db(tmp_path / "v.sqlite")
    raises_naming(path, "query failed.*no such column", query="SELECT colour FROM answers")
    raises_naming(path, "no data rows", query="SELECT * FROM answers WHERE 0")


# ---------------------------------------------------------------------------
# Bad files


def test_missing_file_folder_and_suffix(tmp_path):
    raises_naming(tmp_path / "absent.csv", "not found")
    folder = tmp_path / "folder.csv"
    folder.mkdir()
    raises_naming(folder, "found a folder")
    raises_naming(write_bytes(tmp_path / "v.xls", b"x"), "unknown file type '.xls'.*save it as .xlsx")


@pytest.mark.parametrize("name", ["v.csv", "v.xlsx", "v.parquet", "v.sav", "v.sqlite"])
def test_zero_byte_files(tmp_path, name):
    raises_naming(write_bytes(tmp_path / name, b""), "empty")


@pytest.mark.parametrize(("data", "match"), [
    (b"response_id,comment\n", "no data rows"),
    (b"response_id,comment\n\n\n", "no data rows"),
    (b"\n\n  \n", "no text"),
    (b"id,comment\n1,\x00\x00\n", "NUL"),
])
def test_csv_without_data(tmp_path, data, match):
    raises_naming(write_bytes(tmp_path / "v.csv", data), match)


@pytest.mark.parametrize(("name", "match"), [
    ("v.xlsx", "not a readable Excel workbook"),
    ("v.parquet", "not a readable Parquet file"),
    ("v.sav", "not a readable SPSS file"),
    ("v.sqlite", "not a SQLite database"),
])
def test_corrupt_binary_files(tmp_path, name, match):
    path = write_bytes(tmp_path / name, b"PK\x03\x04 this is not really a file of that kind" * 20)
    before = sha(path)
    raises_naming(path, match)
    assert sha(path) == before


def test_sqlite_header_but_damaged(tmp_path):
    path = write_bytes(tmp_path / "v.db", b"SQLite format 3\x00" + b"\xff" * 200)
    raises_naming(path, "SQLite")


def test_options_that_do_not_fit_the_format(tmp_path):
    path = write_bytes(tmp_path / "v.csv", b"a\n1\n")
    raises_naming(path, "'sheet' applies only to excel", sheet=0)
    raises_naming(path, "'table' applies only to sqlite", table="t")
    parquet = tmp_path / "v.parquet"
    SAMPLE.to_parquet(parquet)
    raises_naming(parquet, "'encoding' applies only to csv", encoding="utf-8")
    db = make_db(tmp_path / "v.db")
    raises_naming(db, "either a table or a query", table="answers", query="SELECT 1")


# ---------------------------------------------------------------------------
# read_survey


def survey_csv(tmp_path: Path, rows: list[str], header: str = "rid,stratum,psu,N,wave,market,low,high,w",
               name: str = "visitors.csv") -> Path:
    path = tmp_path / name
    path.write_text("\n".join([header, *rows]) + "\n", encoding="utf-8")
    return path


GOOD = [
    "101,North,n1,40,2026a,Norvale,Long queue at the pier,Views,1.5",
    "102,North,n2,40,2026a,,n/a,Food,2",
    "103,South,s1,30,,Kestrin,Parking,Staff,0",
    "104,South,s2,30,2026b,Kestrin,,Sunsets,1",
]


def mapping(**overrides):
    base = {"survey": "visitors.csv", "id": "rid", "questions": {"low_point": "low", "high_point": "high"},
            "weight": "w", "design": {"strata": "stratum", "cluster": "psu", "fpc": "N"},
            "wave": "wave", "groups": ["market"]}
    base.update(overrides)
    return base


def survey_error(tmp_path, rows, header=None, **overrides) -> InputError:
    path = survey_csv(tmp_path, rows, **({"header": header} if header else {}))
    config = config_from_mapping(mapping(**overrides), tmp_path)
    with pytest.raises(InputError) as caught:
        read_survey(config)
    assert str(path) in str(caught.value)
    return caught.value


def test_read_survey_converts_and_notes(tmp_path):
    path = survey_csv(tmp_path, GOOD)
    before = sha(path)
    data = read_survey(config_from_mapping(mapping(), tmp_path))
    assert isinstance(data, SurveyData)
    assert sha(path) == before
    assert data.source_sha256 == before
    frame = data.frame
    assert frame["rid"].tolist() == ["101", "102", "103", "104"]
    assert frame["w"].dtype == np.float64 and frame["N"].dtype == np.float64
    np.testing.assert_array_equal(data.weights, [1.5, 2.0, 0.0, 1.0])
    assert frame["wave"].tolist() == ["2026a", "2026a", MISSING_LABEL, "2026b"]
    assert frame["market"].tolist() == ["Norvale", MISSING_LABEL, "Kestrin", "Kestrin"]
    assert data.texts("low_point").iloc[1] == "n/a"
    assert any("1 response(s) have weight 0" in n for n in data.notes)
    assert any("column 'wave'" in n and MISSING_LABEL in n for n in data.notes)
    assert data.n_responses == 4


def test_read_survey_without_weight_gives_unit_weights(tmp_path):
    survey_csv(tmp_path, GOOD)
    data = read_survey(config_from_mapping(mapping(weight=None, design=None), tmp_path))
    np.testing.assert_array_equal(data.weights, np.ones(4))
    assert data.frame["w"].tolist() == ["1.5", "2", "0", "1"]  # unconfigured columns stay as read


def test_missing_column_suggests_close_matches(tmp_path):
    error = survey_error(tmp_path, GOOD, weight="weight", groups=["Market", "age_band"])
    assert error.column == "weight" and "column 'weight'" in str(error)
    assert "did you mean" not in str(error)  # nothing is close to 'weight'
    assert "the columns are: 'rid', 'stratum'" in str(error)
    assert "also missing: 'Market', 'age_band'" in str(error)
    error = survey_error(tmp_path, GOOD, groups=["markt"])
    assert error.column == "markt" and "did you mean 'market'" in str(error)
    error = survey_error(tmp_path, GOOD, groups=["MARKET"])
    assert "'market'" in str(error)


@pytest.mark.parametrize(("rows", "row", "column", "words"), [
    (GOOD[:1] + [",North,n2,40,2026a,Norvale,a,b,1"], 2, "rid", "missing response id"),
    (GOOD[:3] + ["102,South,s2,30,2026b,Kestrin,x,y,1"], 4, "rid", "'102' appears twice, in rows 2 and 4"),
    (GOOD[:2] + ["103,South,s1,30,w,Kestrin,a,b,heavy"], 3, "w", "weight 'heavy' is not a number"),
    (GOOD[:3] + ["104,South,s2,30,w,Kestrin,a,b,-1"], 4, "w", "negative weight"),
    (GOOD[:1] + ["102,North,n2,40,w,Kestrin,a,b,"], 2, "w", "missing weight"),
    (GOOD[:1] + ["102,North,n2,40,w,Kestrin,a,b,inf"], 2, "w", "infinite weight"),
    (GOOD[:1] + ["102,,n2,40,w,Kestrin,a,b,1"], 2, "stratum", "missing stratum"),
    (GOOD[:1] + ["102,North,,40,w,Kestrin,a,b,1"], 2, "psu", "missing cluster"),
    (GOOD[:1] + ["102,North,n2,forty,w,Kestrin,a,b,1"], 2, "N", "fpc 'forty' is not a number"),
    (GOOD[:1] + ["102,North,n2,,w,Kestrin,a,b,1"], 2, "N", "missing fpc"),
    (GOOD[:1] + ["102,North,n2,0,w,Kestrin,a,b,1"], 2, "N", "not a positive population size"),
    (GOOD[:1] + ["102,North,n2,41,w,Kestrin,a,b,1"], 2, "N", "differs from 40"),
])
def test_row_errors(tmp_path, rows, row, column, words):
    error = survey_error(tmp_path, rows)
    assert (error.row, error.column) == (row, column)
    assert f"(row {row}, column '{column}')" in str(error)
    assert words in str(error)


def test_fpc_smaller_than_sample(tmp_path):
    rows = ["1,North,n1,2,w,K,a,b,1", "2,North,n2,2,w,K,a,b,1", "3,North,n3,2,w,K,a,b,1"]
    error = survey_error(tmp_path, rows)
    assert error.row == 1 and "smaller than the 3 PSUs" in str(error)
    # without clusters the sample count is responses: 3 responses in a population of 2
    error = survey_error(tmp_path, ["1,North,n1,2,w,K,a,b,1", "2,North,n1,2,w,K,a,b,1",
                                    "3,North,n1,2,w,K,a,b,1"], design={"strata": "stratum", "fpc": "N"})
    assert "smaller than the 3 responses" in str(error)
    # with clusters, 3 responses in 1 PSU of a stratum with 2 PSUs is possible
    survey_csv(tmp_path, ["1,North,n1,2,w,K,a,b,1", "2,North,n1,2,w,K,a,b,1", "3,North,n1,2,w,K,a,b,1"])
    read_survey(config_from_mapping(mapping(), tmp_path))


def test_all_zero_weights(tmp_path):
    rows = [r.rsplit(",", 1)[0] + ",0" for r in GOOD]
    error = survey_error(tmp_path, rows)
    assert error.column == "w" and "every weight is 0" in str(error)


def test_empty_text_column(tmp_path):
    rows = [r.split(",") for r in GOOD]
    for r in rows:
        r[6] = '" "' if r[0] == "101" else ""
    error = survey_error(tmp_path, [",".join(r) for r in rows])
    assert error.column == "low" and "question 'low_point'" in str(error) and "empty" in str(error)


def test_decimal_commas_in_semicolon_file(tmp_path):
    header = "rid;low;w"
    path = tmp_path / "visitors.csv"
    path.write_text(f"{header}\n1;Quiet;1,5\n2;Busy;2\n3;Calm;0,25\n", encoding="utf-8")
    config = config_from_mapping({"survey": "visitors.csv", "id": "rid", "questions": ["low"], "weight": "w"},
                                 tmp_path)
    data = read_survey(config)
    np.testing.assert_array_equal(data.weights, [1.5, 2.0, 0.25])
    assert any("decimal commas" in n for n in data.notes)


def test_survey_from_sav_with_labels_and_float_ids(tmp_path):
    import pyreadstat

    path = tmp_path / "visitors.sav"
    data = pd.DataFrame({"rid": [1.0, 2.0, 3.0], "market": [1.0, 2.0, 2.0], "low": ["Calm", "Busy", ""],
                         "w": [1.0, 2.0, 1.0]})
    pyreadstat.write_sav(data, str(path), variable_value_labels={"market": {1: "Norvale", 2: "Kestrin"}})
    config = config_from_mapping({"survey": "visitors.sav", "id": "rid", "questions": ["low"], "weight": "w",
                                  "groups": ["market"]}, tmp_path)
    survey = read_survey(config)
    assert survey.frame["rid"].tolist() == ["1", "2", "3"]  # whole-number float ids lose ".0"
    assert survey.frame["market"].tolist() == ["Norvale", "Kestrin", "Kestrin"]
    assert survey.frame["w"].dtype == np.float64


def test_survey_from_xlsx_sheet_via_config(tmp_path):
    path = tmp_path / "visitors.xlsx"
    with pd.ExcelWriter(path, engine="openpyxl") as writer:
        SAMPLE.iloc[:1].to_excel(writer, sheet_name="old", index=False)
        SAMPLE.to_excel(writer, sheet_name="current", index=False)
    config = config_from_mapping({"survey": "visitors.xlsx", "sheet": "current", "id": "response_id",
                                  "questions": ["comment"], "weight": "weight", "groups": ["market"]},
                                 tmp_path)
    survey = read_survey(config)
    assert survey.frame["market"].tolist() == ["Norvale", "Kestrin", MISSING_LABEL]
    np.testing.assert_array_equal(survey.weights, [1.5, 2.0, 0.5])


# ---------------------------------------------------------------------------
# answered_mask


def test_answered_mask():
    texts = pd.Series(["Lovely", None, "", "   ", "N/A", " no   Comment ", "None of it was good", "-", "NA",
                       "nil", "."], dtype=object)
    non_answers = ("n/a", "na", "none", "-", "nil", "no comment", ".")
    mask = answered_mask(texts, non_answers)
    assert mask.dtype == bool and mask.shape == (11,)
    assert mask.tolist() == [True, False, False, False, False, False, True, False, False, False, False]
    # with no non-answers only missing/blank answers are unanswered
    assert answered_mask(texts, ()).tolist() == [True, False, False, False] + [True] * 7
    assert answered_mask(pd.Series([], dtype="str"), non_answers).shape == (0,)


_PIECES = st.sampled_from(["n/a", "N/A", "No", "comment", "nil", "x", "é", " ", "  ", "\t", "\n", "\u00a0",
                           "\u2003", "\u3000", "\x1f", "\x85", "\x0b", "-", "."])


@settings(max_examples=150, deadline=None)
@given(st.lists(st.one_of(st.none(), st.lists(_PIECES, max_size=6).map("".join)), max_size=20))
def test_answered_mask_agrees_with_plain_python(answers):
    # reference: the definition written out in plain Python (str.split whitespace, str.lower)
    non_answers = ("n/a", "no comment", "nil", "-")
    expected = [a is not None and normalise_answer(a) != "" and normalise_answer(a) not in non_answers
                for a in answers]
    assert answered_mask(pd.Series(answers, dtype=object), non_answers).tolist() == expected


@pytest.mark.parametrize("suffix", ["csv", "xlsx"])
def test_line_breaks_inside_a_cell_stay_clause_breaks(tmp_path, suffix):
    # A cell typed over two lines ("long" / "wait") is two clauses: the phrase "long wait" must not
    # match across the line break, while the word on each line still does.
    from textkit.coding.coder import ThemeCoder
    from textkit.coding.lexicon import parse_lexicon

    frame = pd.DataFrame({"response_id": ["r1", "r2"], "comment": ["a long\nwait", "a long\r\nwait"]})
    path = tmp_path / f"v.{suffix}"
    if suffix == "csv":
        frame.to_csv(path, index=False)
    else:
        frame.to_excel(path, index=False, engine="openpyxl")
    read, _ = read_unchanged(path)
    assert "\n" in read["comment"].iloc[0] and "\n" in read["comment"].iloc[1]
    lexicon = parse_lexicon("lexicon: x\nthemes:\n  - {id: phrase, label: P, terms: [long wait]}\n"
                            "  - {id: word, label: W, terms: [wait]}\n")
    texts = read["comment"].tolist()
    matrix = ThemeCoder(lexicon).fit(texts).transform(texts).toarray()
    assert matrix[:, 0].tolist() == [0, 0] and matrix[:, 1].tolist() == [1, 1]
    one_line = ["a long wait"]
    assert ThemeCoder(lexicon).fit(one_line).transform(one_line).toarray()[0, 0] == 1
