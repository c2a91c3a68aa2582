"""Tests for textkit.config: the YAML survey config."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from textkit.errors import InputError
from textkit.io.config import (
    DEFAULT_NON_ANSWERS,
    SurveyConfig,
    config_from_mapping,
    load_config,
    normalise_answer,
)

FULL = """\
survey: data/visitors.csv
id: response_id
questions:
  low_point: low_point_text
  high_point: high_point_text
weight: weight
design:
  strata: stratum
  cluster: psu
  fpc: stratum_population
  one_cluster_stratum: centre
wave: wave
groups: [market, age_band, stratum]
lexicon: ../lexicons/harbour.yaml
seed: 20261202
non_answers: ["N/A", "  No   Comment ", "-"]
"""


def write(tmp_path: Path, text: str, name: str = "survey.yaml") -> Path:
    path = tmp_path / "configs" / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def error_of(tmp_path: Path, text: str) -> InputError:
    path = write(tmp_path, text)
    with pytest.raises(InputError) as caught:
        load_config(path)
    assert caught.value.source == str(path)
    assert str(path) in str(caught.value)
    return caught.value


MINIMAL = "survey: v.csv\nid: rid\nquestions: [comment]\n"


def test_full_config_fields_and_relative_paths(tmp_path):
    path = write(tmp_path, FULL)
    config = load_config(path)
    assert config.path == path.resolve()
    # relative paths are resolved against the config's folder, not the working directory
    assert config.survey == (tmp_path / "configs" / "data" / "visitors.csv").resolve()
    assert config.lexicon == (tmp_path / "lexicons" / "harbour.yaml").resolve()
    assert config.id_column == "response_id"
    assert list(config.questions.items()) == [("low_point", "low_point_text"),
                                              ("high_point", "high_point_text")]
    assert (config.weight, config.strata, config.cluster, config.fpc) == (
        "weight", "stratum", "psu", "stratum_population")
    assert config.one_cluster_stratum == "centre"
    assert config.wave == "wave"
    assert config.groups == ("market", "age_band", "stratum")
    assert config.seed == 20261202
    assert config.non_answers == ("n/a", "no comment", "-")


def test_roles_are_json_serialisable_and_design_columns_unique(tmp_path):
    config = load_config(write(tmp_path, FULL))
    roles = config.roles()
    assert set(roles) == {"id", "questions", "weight", "strata", "cluster", "fpc", "one_cluster_stratum",
                          "cluster_ids_restart", "wave", "groups", "nets", "question_text"}
    assert roles["one_cluster_stratum"] == config.one_cluster_stratum and roles["cluster_ids_restart"] is False
    assert json.loads(json.dumps(roles)) == roles
    assert roles["groups"] == ["market", "age_band", "stratum"]
    # stratum is both a design column and a group: listed once
    assert config.design_columns() == ["weight", "stratum", "psu", "stratum_population", "wave",
                                       "market", "age_band"]


def test_defaults(tmp_path):
    config = load_config(write(tmp_path, MINIMAL))
    assert config.questions == {"comment": "comment"}
    assert config.weight is None and config.strata is None and config.fpc is None
    assert config.one_cluster_stratum == "refuse"
    assert config.cluster_ids_restart is False
    assert config.groups == ()
    assert config.lexicon is None
    assert config.seed == 0
    assert config.non_answers == DEFAULT_NON_ANSWERS
    assert config.design_columns() == []
    assert config.reading_options() == {}
    with pytest.raises(AttributeError):
        config.seed = 3  # frozen


def test_explicit_empty_non_answers_and_single_group(tmp_path):
    config = load_config(write(tmp_path, MINIMAL + "non_answers: []\ngroups: market\n"))
    assert config.non_answers == ()
    assert config.groups == ("market",)


def test_numeric_column_names_keep_their_written_text(tmp_path):
    # a spreadsheet column may be headed 2026 or 01; YAML would read those as numbers
    config = load_config(write(tmp_path, MINIMAL + "wave: 2026\ngroups: [01]\n"))
    assert config.wave == "2026"
    assert config.groups == ("01",)


def test_reading_options(tmp_path):
    config = load_config(write(tmp_path, "survey: v.xlsx\nsheet: 2\nid: rid\nquestions: [c]\n"))
    assert config.reading_options() == {"sheet": 2}
    config = load_config(write(tmp_path, "survey: v.db\nquery: SELECT * FROM t\nid: rid\nquestions: [c]\n"))
    assert config.reading_options() == {"query": "SELECT * FROM t"}
    config = load_config(write(tmp_path, 'survey: v.txt\ndelimiter: "\\t"\nencoding: cp1252\n'
                                         "id: rid\nquestions: [c]\n"))
    assert config.reading_options() == {"delimiter": "\t", "encoding": "cp1252"}


def test_utf8_bom_config_is_read(tmp_path):
    path = tmp_path / "bom.yaml"
    path.write_bytes(b"\xef\xbb\xbf" + MINIMAL.encode())
    assert load_config(path).id_column == "rid"


@pytest.mark.parametrize(("text", "line", "words"), [
    (MINIMAL + "colour: blue\n", 4, ["unknown key 'colour'", "valid keys are", "questions"]),
    (MINIMAL + "design:\n  strata: s\n  clusters: c\n", 6, ["unknown key 'clusters'", "cluster"]),
    ("survey: v.csv\nquestions: [c]\n", 1, ["required key 'id'"]),
    ("id: rid\nquestions: [c]\n", 1, ["required key 'survey'"]),
    (MINIMAL + "seed: lots\n", 4, ["'seed'", "whole number"]),
    (MINIMAL + "seed: true\n", 4, ["'seed'"]),
    (MINIMAL + "seed: -1\n", 4, ["'seed'"]),
    (MINIMAL + "seed: 1.5\n", 4, ["'seed'"]),
    ("survey: v.csv\nid: rid\nquestions: 7\n", 3, ["'questions'"]),
    ("survey: v.csv\nid: rid\nquestions: []\n", 3, ["'questions' is empty"]),
    ("survey: v.csv\nid: [a, b]\nquestions: [c]\n", 2, ["'id' must be a column name"]),
    (MINIMAL + "weight: yes\n", 4, ["'weight'", "quote it"]),
    (MINIMAL + "groups: {a: b}\n", 4, ["'groups'"]),
    (MINIMAL + "groups: [a, b, a]\n", 4, ["listed twice"]),
    (MINIMAL + "design: [strata]\n", 4, ["'design' must be a mapping"]),
    (MINIMAL + "design:\n  one_cluster_stratum: average\n", 5,
     ["one_cluster_stratum", "refuse, centre, merge", "average"]),
    (MINIMAL + "lexicon: 3\n", 4, ["'lexicon'"]),
    (MINIMAL + "non_answers: [[n/a]]\n", 4, ["'non_answers'"]),
    ("survey: v.doc\nid: rid\nquestions: [c]\n", 1, ["unknown file type '.doc'"]),
    (MINIMAL + "sheet: Visitors\n", 4, ["'sheet' applies only to excel"]),
    (MINIMAL + "table: answers\n", 4, ["'table' applies only to sqlite"]),
    ("survey: v.xlsx\nid: rid\nquestions: [c]\nencoding: utf-8\n", 4, ["'encoding' applies only to csv"]),
    ("survey: v.db\ntable: t\nquery: SELECT 1\nid: rid\nquestions: [c]\n", 3, ["either 'table' or 'query'"]),
    ("survey: v.xlsx\nsheet: -1\nid: rid\nquestions: [c]\n", 2, ["'sheet' index"]),
    (MINIMAL + "encoding: klingon-8\n", 4, ["unknown text encoding"]),
    (MINIMAL + "delimiter: ';;'\n", 4, ["'delimiter' must be one character"]),
    (MINIMAL + "id: other\n", 4, ["key 'id' is given twice", "first on line 2"]),
])
def test_bad_values_name_the_line(tmp_path, text, line, words):
    error = error_of(tmp_path, text)
    assert error.line == line
    assert f":{line}:" in str(error)
    for word in words:
        assert word in str(error)


@pytest.mark.parametrize(("text", "line", "words"), [
    ("survey: v.csv\nid: rid\nquestions: [rid]\n", 3, ["'rid'", "already the id column (line 2)"]),
    (MINIMAL + "weight: rid\n", 4, ["column 'rid' is used as weight", "id column"]),
    (MINIMAL + "design:\n  strata: s\n  cluster: s\n", 6, ["used as cluster", "strata column (line 5)"]),
    (MINIMAL + "design:\n  fpc: N\ngroups: [N]\n", 6, ["used as group", "fpc column"]),
    ("survey: v.csv\nid: rid\nquestions:\n  a: t\n  b: t\n", 5, ["question 'b'", "question 'a'"]),
    (MINIMAL + "groups: [comment]\n", 4, ["used as group", "question 'comment'"]),
])
def test_columns_in_incompatible_roles(tmp_path, text, line, words):
    error = error_of(tmp_path, text)
    assert error.line == line
    for word in words:
        assert word in str(error)


def test_compatible_shared_roles_are_allowed(tmp_path):
    text = MINIMAL + "design:\n  strata: region\n  cluster: site\nwave: wave\ngroups: [region, site, wave]\n"
    config = load_config(write(tmp_path, text))
    assert config.groups == ("region", "site", "wave")


def test_yaml_syntax_error_names_the_line(tmp_path):
    error = error_of(tmp_path, "survey: v.csv\nid: rid\nquestions: [a, b\nweight: w\n")
    assert error.line is not None and error.line >= 3
    assert "not valid YAML" in str(error)


@pytest.mark.parametrize(("text", "words"), [
    ("- survey\n- id\n", "must be a mapping"),
    ("just words\n", "must be a mapping"),
    ("", "empty"),
    ("# only a comment\n", "empty"),
])
def test_not_a_mapping(tmp_path, text, words):
    assert words in str(error_of(tmp_path, text))


def test_missing_file_and_folder(tmp_path):
    with pytest.raises(InputError, match="not found") as caught:
        load_config(tmp_path / "absent.yaml")
    assert "absent.yaml" in str(caught.value)
    with pytest.raises(InputError, match="folder"):
        load_config(tmp_path)


def test_not_utf8(tmp_path):
    path = tmp_path / "latin.yaml"
    path.write_bytes(MINIMAL.encode() + b"groups: [caf\xe9]\n")
    with pytest.raises(InputError, match="UTF-8") as caught:
        load_config(path)
    assert str(path) in str(caught.value)


def test_config_from_mapping_matches_load_config(tmp_path):
    loaded = load_config(write(tmp_path, FULL))
    mapping = {
        "survey": "data/visitors.csv", "id": "response_id",
        "questions": {"low_point": "low_point_text", "high_point": "high_point_text"},
        "weight": "weight",
        "design": {"strata": "stratum", "cluster": "psu", "fpc": "stratum_population",
                   "one_cluster_stratum": "centre"},
        "wave": "wave", "groups": ["market", "age_band", "stratum"],
        "lexicon": "../lexicons/harbour.yaml", "seed": 20261202,
        "non_answers": ["N/A", "  No   Comment ", "-"],
    }
    built = config_from_mapping(mapping, tmp_path / "configs")
    assert isinstance(built, SurveyConfig)
    assert built.path is None
    assert {k: v for k, v in vars(built).items() if k != "path"} == \
        {k: v for k, v in vars(loaded).items() if k != "path"}


def test_config_from_mapping_errors_without_lines(tmp_path):
    with pytest.raises(InputError, match="unknown key 'colour'") as caught:
        config_from_mapping({"survey": "a.csv", "id": "r", "questions": ["c"], "colour": 1}, tmp_path)
    assert caught.value.line is None
    with pytest.raises(InputError, match="required key 'questions'"):
        config_from_mapping({"survey": "a.csv", "id": "r"}, tmp_path)
    config = config_from_mapping({"survey": tmp_path / "a.parquet", "id": "r", "questions": ["c"]})
    assert config.survey == (tmp_path / "a.parquet").resolve()


def test_normalise_answer():
    # trimming + collapsing whitespace runs (str.split semantics: tabs, newlines, no-break space) + lower
    assert normalise_answer("  No \t Comment\n") == "no comment"
    assert normalise_answer("N/A\u00a0") == "n/a"
    assert normalise_answer("Nil") == normalise_answer("NIL") == "nil"


def test_design_nest_flag(tmp_path):
    text = MINIMAL + "design:\n  cluster_ids_restart: true\n"
    assert load_config(write(tmp_path, text)).cluster_ids_restart is True
    bad = MINIMAL + "design:\n  cluster_ids_restart: sometimes\n"
    with pytest.raises(InputError, match=r"design.cluster_ids_restart' must be true or false") as info:
        load_config(write(tmp_path, bad))
    assert info.value.line == bad.count("\n")
