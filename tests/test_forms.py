"""The word forms each lexicon term matches (textkit.coding.forms, `textkit lexicon forms`)."""

from __future__ import annotations

import hashlib
from pathlib import Path

import pandas as pd

from textkit.cli.main import main
from textkit.coding import inflected_forms
from textkit.coding.coder import ThemeCoder
from textkit.coding.forms import FORM_COLUMNS
from textkit.coding.lexicon import parse_lexicon

ROOT = Path(__file__).resolve().parents[1]
SHIPPED = ROOT / "lexicons" / "visitor_experience.yaml"


def lexicon_of(terms: str, language: str = "en", exclude: str = "", settings: str = ""):
    extra = f"    exclude: [{exclude}]\n" if exclude else ""
    return parse_lexicon(f"lexicon: t\nlanguage: {language}\n{settings}themes:\n"
                         f"  - id: a\n    label: A\n    terms: [{terms}]\n{extra}")


def forms_of(table: pd.DataFrame, word: str) -> set[str]:
    return set(table.loc[table["word"] == word, "form"])


def test_a_queue_lists_its_inflections_and_nothing_derived():
    table = inflected_forms(lexicon_of("queue, break, child, go, friend"))
    assert list(table.columns) == list(FORM_COLUMNS)
    # the inflections of queue (Oxford English Dictionary, from memory: queuing and queueing both stand)
    assert {"queues", "queued", "queuing", "queueing"} <= forms_of(table, "queue")
    assert forms_of(table, "child") == {"children"}
    assert "went" in forms_of(table, "go")
    # "broken" is an adjective in its own right: lemminflect gives it its own lemma, so the matcher keeps it apart
    assert "broken" not in forms_of(table, "break") and "breaks" in forms_of(table, "break")
    assert not {"friendly", "friendship"} & forms_of(table, "friend")
    assert "queue" not in forms_of(table, "queue")  # the word itself is not one of its other forms


def test_every_listed_form_codes_the_theme_and_no_other_candidate_does():
    # the table must show exactly what the matcher conflates: code each candidate alone
    lexicon = lexicon_of("queue, break, child, wait, staff, toilet, price, parking")
    table = inflected_forms(lexicon)
    candidates = sorted(set(table["form"]) | {"broken", "breakable", "priceless", "parks", "parked", "waiter",
                                              "staffer", "toiletries", "childish", "queuer"})
    result = ThemeCoder(lexicon).fit(candidates).code(candidates)
    coded = {word for word, hit in zip(candidates, result.matrix.toarray()[:, 0], strict=True) if hit}
    assert coded == set(table["form"])


def test_terms_that_do_not_inflect_list_nothing():
    lexicon = lexicon_of("{term: queue, inflect: false}, queu*, {term: walk, inflect: stem}, wait")
    table = inflected_forms(lexicon)
    assert set(table["term"]) == {"wait"}


def test_phrases_list_each_word_and_skip_wildcards():
    table = inflected_forms(lexicon_of("long queue, bus stop*"))
    assert set(table["word"]) == {"long", "queue", "bus"}
    assert "longer" in forms_of(table, "long") and "buses" in forms_of(table, "bus")
    assert set(table.loc[table["word"] == "queue", "term"]) == {"long queue"}


def test_rows_follow_the_lexicon_and_repeat_exactly():
    lexicon = parse_lexicon("lexicon: t\nlanguage: en\nthemes:\n"
                            "  - id: z\n    label: Z\n    terms: [wait]\n    exclude: [waiting list]\n"
                            "  - id: b\n    label: B\n    terms: [queue, child]\n")
    table = inflected_forms(lexicon)
    assert list(dict.fromkeys(table["theme"])) == ["z", "b"]
    assert list(dict.fromkeys(table.loc[table["theme"] == "b", "word"])) == ["queue", "child"]
    for _, rows in table.groupby(["theme", "term", "word"], sort=False):
        assert list(rows["form"]) == sorted(rows["form"])
    assert table.loc[table["term"] == "waiting list", "exclusion"].all()
    assert table.loc[table["term"] == "wait", "line"].iloc[0] == 6
    pd.testing.assert_frame_equal(table, inflected_forms(lexicon))
    assert not inflected_forms(lexicon, exclusions=False)["exclusion"].any()


def test_a_vocabulary_lists_the_forms_that_occur():
    lexicon = lexicon_of("queue, child")
    vocabulary = ["Queues", "queued", "queue", "children", "childish", "broken", "queues", ","]
    table = inflected_forms(lexicon, vocabulary)
    assert forms_of(table, "queue") == {"queues", "queued"}  # folded, once each, the word itself left out
    assert forms_of(table, "child") == {"children"}
    # a stem term is listed from a vocabulary (Snowball: friendly -> friend, as the matcher does with stem)
    stem = inflected_forms(lexicon_of("{term: friend, inflect: stem}"), ["friends", "friendly", "fries"])
    assert forms_of(stem, "friend") == {"friends", "friendly"}


def test_other_languages_need_a_vocabulary():
    lexicon = lexicon_of("Warteschlange, warten", language="de")
    assert inflected_forms(lexicon).empty  # simplemma cannot generate forms
    table = inflected_forms(lexicon, ["Warteschlangen", "wartete", "gewartet", "Wartung"])
    # German inflections (common practice): Warteschlange -> Warteschlangen, warten -> wartete, gewartet
    assert forms_of(table, "warteschlange") == {"warteschlangen"}
    assert {"wartete", "gewartet"} <= forms_of(table, "warten")
    assert "wartung" not in forms_of(table, "warten")


def test_accents_follow_the_lexicon_setting():
    # French (common practice): "élevé" (high, of prices) and "élève" (pupil) differ only by accents
    vocabulary = ["Élevés", "élèves", "élevé", "ELEVE"]
    folded = inflected_forms(lexicon_of("élevé", language="fr"), vocabulary)
    assert forms_of(folded, "élevé") == {"élevés", "élèves"}  # listed as spelled; the word itself left out
    kept = inflected_forms(lexicon_of("élevé", language="fr", settings="settings:\n  accents: keep\n"), vocabulary)
    assert forms_of(kept, "élevé") == {"élevés"}


def test_the_shipped_lexicon_lists_forms_and_respects_its_pins():
    from textkit.coding.lexicon import load_lexicon

    lexicon = load_lexicon(SHIPPED)
    table = inflected_forms(lexicon)
    pinned = {(theme.id, term.text) for theme in lexicon.themes for term in (*theme.terms, *theme.exclusions)
              if term.inflect is not True}
    assert pinned and not pinned & set(zip(table["theme"], table["term"], strict=True))
    assert not table.duplicated().any()


# --------------------------------------------------------------------------- the command


def run(argv: list[str], capsys) -> tuple[int, str, str]:
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_the_command_lists_and_writes_a_table(tmp_path, capsys):
    lexicon = tmp_path / "lexicon.yaml"
    lexicon.write_text("lexicon: t\nlanguage: en\nthemes:\n  - id: q\n    label: Q\n    terms: [queue, wait*]\n",
                       encoding="utf-8")
    code, stdout, _ = run(["lexicon", "forms", str(lexicon)], capsys)
    assert code == 0 and "q / queue [line 6]: queue: " in stdout and "queued" in stdout
    out = tmp_path / "tables" / "forms.csv"
    code, stdout, _ = run(["lexicon", "forms", str(lexicon), "--out", str(out)], capsys)
    assert code == 0 and str(out) in stdout
    written = pd.read_csv(out)
    pd.testing.assert_frame_equal(written, inflected_forms(parse_lexicon(lexicon.read_text())))


def test_the_command_never_overwrites_the_lexicon(tmp_path, capsys):
    lexicon = tmp_path / "lexicon.csv"  # a lexicon file whose name ends in .csv is still refused
    lexicon.write_text("lexicon: t\nlanguage: en\nthemes:\n  - id: q\n    label: Q\n    terms: [queue]\n",
                       encoding="utf-8")
    before = sha(lexicon)
    for target in (lexicon, tmp_path / "forms.txt"):
        code, _, stderr = run(["lexicon", "forms", str(lexicon), "--out", str(target)], capsys)
        assert code == 2 and len(stderr.strip().splitlines()) == 1 and str(target) in stderr
    assert sha(lexicon) == before and not (tmp_path / "forms.txt").exists()


def test_the_command_reads_forms_from_a_survey(tmp_path, capsys):
    lexicon = tmp_path / "lexicon.yaml"
    lexicon.write_text("lexicon: t\nlanguage: de\nthemes:\n  - id: q\n    label: Q\n    terms: [warten]\n",
                       encoding="utf-8")
    (tmp_path / "answers.csv").write_text("rid,comment\n1,Wir warteten lange\n2,Kein Warten\n", encoding="utf-8")
    config = tmp_path / "survey.yaml"
    config.write_text(f"survey: answers.csv\nid: rid\nquestions: [comment]\nlexicon: {lexicon}\n", encoding="utf-8")
    code, _, stderr = run(["lexicon", "forms", str(lexicon)], capsys)
    assert code == 0 and "--survey" in stderr  # German forms cannot come from the dictionary
    out = tmp_path / "forms.csv"
    code, stdout, _ = run(["lexicon", "forms", str(lexicon), "--survey", str(config), "--out", str(out),
                           "--quiet"], capsys)
    assert code == 0 and stdout == ""
    assert set(pd.read_csv(out)["form"]) == {"warteten"}
    answers = tmp_path / "answers.csv"
    before = sha(answers)
    code, _, stderr = run(["lexicon", "forms", str(lexicon), "--survey", str(config), "--out", str(answers),
                           "--quiet"], capsys)
    assert code == 2 and "answers.csv" in stderr and sha(answers) == before  # the survey is an input too
