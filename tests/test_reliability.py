"""Reliability: interrupted runs, inputs never replaced, formula-safe outputs, hostile text.

The kill test runs ``textkit code`` in a child process and stops it while it writes;
the other tests run in process.
"""

from __future__ import annotations

import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest
from hostile import LEXICON, config_text, make_project, snapshot, write_survey
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from textkit.cli.main import main
from textkit.coding.coder import ThemeCoder
from textkit.coding.lexicon import parse_lexicon
from textkit.errors import InputError, LexiconError
from textkit.io.output import FORMULA_TRIGGERS, csv_writer, safe_cell, write_outputs
from textkit.io.workbook import Sheet, workbook_writer

RUN = [sys.executable, "-c", "import sys; from textkit.cli.main import main; sys.exit(main())"]


# --------------------------------------------------------------------------- interrupted runs


def _staging(parent: Path, name: str) -> list[Path]:
    return [p for p in parent.iterdir() if p.name.startswith(f".{name}.textkit-")]


def _interrupt(config: Path, out: Path, number: int) -> int:
    """Start 'textkit code', send signal ``number`` once its temporary folder appears; the exit code."""
    before = set(_staging(out.parent, out.name))
    child = subprocess.Popen([*RUN, "code", str(config), "--out", str(out), "--quiet"],
                             stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    deadline = time.monotonic() + 120
    while child.poll() is None and time.monotonic() < deadline:
        if set(_staging(out.parent, out.name)) - before:
            child.send_signal(number)
            break
        time.sleep(0.002)
    else:
        child.kill()
        child.wait()
        pytest.fail("the run ended before it started writing; make the survey larger")
    child.wait(timeout=120)
    return child.returncode


def _files(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.iterdir())}


def test_a_killed_run_leaves_the_old_result_and_a_rerun_is_clean(tmp_path):
    config = make_project(tmp_path / "project", n=2000)
    (tmp_path / "project" / "old.yaml").write_text(config_text(survey="old.csv"), encoding="utf-8")
    write_survey(tmp_path / "project" / "old.csv", 40, seed=3)
    inputs = snapshot(tmp_path / "project")
    out, clean = tmp_path / "out", tmp_path / "clean"
    assert main(["code", str(config), "--out", str(clean), "--quiet"]) == 0
    assert main(["code", str(tmp_path / "project" / "old.yaml"), "--out", str(out), "--quiet"]) == 0
    old = _files(out)

    # SIGKILL while the new result is written leaves the old one whole (a temporary folder may remain)
    assert _interrupt(config, out, signal.SIGKILL) == -signal.SIGKILL
    assert _files(out) in (old, _files(clean))  # the new result only if the kill came after the swap
    if _files(out) != old:
        assert main(["code", str(tmp_path / "project" / "old.yaml"), "--out", str(out), "--quiet"]) == 0

    # SIGTERM is handled like SIGINT: exit 143, the old result kept, and no temporary folder left,
    # neither its own nor the one the killed run left
    assert _interrupt(config, out, signal.SIGTERM) == 143
    assert _files(out) == old
    assert not _staging(tmp_path, "out")

    # a rerun gives the same bytes as a run that was never interrupted
    assert main(["code", str(config), "--out", str(out), "--quiet"]) == 0
    assert _files(out) == _files(clean)
    assert not _staging(tmp_path, "out") and not [p for p in out.iterdir() if p.name.startswith(".")]
    assert snapshot(tmp_path / "project") == inputs


def test_a_swap_cut_short_is_put_back(tmp_path):
    # A kill between the two renames of a swap leaves the old result under a hidden name;
    # the next run puts it back before anything else.
    out = tmp_path / "out"
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [1]}))}, {"command": "test"})
    old = _files(out)
    retired = tmp_path / ".out.textkit-999999999-old-abc"  # a process id that cannot be running
    out.rename(retired)
    (tmp_path / ".out.textkit-999999999-new-abc").mkdir()
    with pytest.raises(InputError, match="would replace the input"):  # refused, after the clean-up
        write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [2]}))}, {"command": "test"},
                      inputs=[out / "a.csv"])
    assert _files(out) == old and not _staging(tmp_path, "out")


def test_a_failing_writer_changes_nothing(tmp_path):
    out = tmp_path / "out"
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [1]}))}, {"command": "test"})
    before = snapshot(tmp_path)

    def broken(path: Path) -> None:
        path.write_text("half", encoding="utf-8")
        raise OSError(28, "No space left on device")

    with pytest.raises(InputError) as caught:
        write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [2]})), "b.csv": broken}, {"command": "test"})
    assert str(caught.value) == f"{out}: cannot write 'b.csv' into the output folder: No space left on device"
    assert snapshot(tmp_path) == before


def test_a_read_only_folder_is_named_not_a_temporary_file(tmp_path):
    if os.geteuid() == 0:
        pytest.skip("root may write anywhere")
    parent = tmp_path / "locked"
    parent.mkdir()
    parent.chmod(0o500)
    try:
        with pytest.raises(InputError, match=r"locked/out: cannot write to the output folder: Permission"):
            write_outputs(parent / "out", {"a.csv": csv_writer(pd.DataFrame({"x": [1]}))})
    finally:
        parent.chmod(0o700)


def test_a_parent_that_refuses_the_temporary_folder_falls_back_to_writing_inside(tmp_path, monkeypatch):
    # Root may write anywhere, so a read-only parent is simulated: making the temporary folder
    # beside --out fails as a locked parent makes it fail. An existing folder is then written in
    # place, file by file; a folder that does not exist yet is refused with its name.
    import textkit.io.output as output

    out = tmp_path / "out"
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [1]}))}, {"command": "test"})
    real = output._temporary_folder  # (a previous result: replaced as a whole when the parent allows)

    def parent_locked(parent, stem, target):
        if parent == target.parent:
            raise output._fail(target, None, PermissionError(13, "Permission denied"))
        return real(parent, stem, target)

    monkeypatch.setattr(output, "_temporary_folder", parent_locked)
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [2]}))}, {"command": "test"})
    assert (out / "a.csv").read_text(encoding="utf-8") == "x\n2\n"
    assert sorted(p.name for p in out.iterdir()) == ["a.csv", "manifest.json"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]  # no temporary folder left anywhere
    with pytest.raises(InputError, match=r"new: cannot write to the output folder: Permission denied"):
        write_outputs(tmp_path / "new", {"a.csv": csv_writer(pd.DataFrame({"x": [1]}))})
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


def test_other_files_in_the_folder_are_kept(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "notes.txt").write_text("mine", encoding="utf-8")
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [1]}))}, {"command": "test"})
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [2]}))}, {"command": "test"})
    assert (out / "notes.txt").read_text(encoding="utf-8") == "mine"
    assert (out / "a.csv").read_text(encoding="utf-8") == "x\n2\n"
    assert sorted(p.name for p in out.iterdir()) == ["a.csv", "manifest.json", "notes.txt"]


def test_a_previous_result_is_replaced_as_a_whole(tmp_path):
    out = tmp_path / "out"
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [1]})),
                        "b.csv": csv_writer(pd.DataFrame({"x": [1]}))}, {"command": "test"})
    write_outputs(out, {"a.csv": csv_writer(pd.DataFrame({"x": [2]}))}, {"command": "test"})
    assert sorted(p.name for p in out.iterdir()) == ["a.csv", "manifest.json"]  # b.csv was the old run's
    with pytest.raises(InputError, match="holds the result of 'textkit test'"):
        write_outputs(out, {"c.csv": csv_writer(pd.DataFrame({"x": [2]}))}, {"command": "other"})


@pytest.mark.parametrize("link", [False, True])
def test_an_input_is_never_replaced_even_through_a_link(tmp_path, link):
    folder = tmp_path / "data"
    folder.mkdir()
    survey = folder / "coded.csv"
    survey.write_text("precious\n", encoding="utf-8")
    out = folder
    if link:
        out = tmp_path / "link"
        out.symlink_to(folder, target_is_directory=True)
    with pytest.raises(InputError, match="would replace the input"):
        write_outputs(out, {"coded.csv": csv_writer(pd.DataFrame({"x": [1]}))}, inputs=[survey])
    assert survey.read_text(encoding="utf-8") == "precious\n"
    assert sorted(p.name for p in folder.iterdir()) == ["coded.csv"]


# --------------------------------------------------------------------------- formula injection


TRIGGER_TEXTS = ["=HYPERLINK(\"http://x.invalid\",\"y\")", "+1+2", "-2+3", "@SUM(A1)", "\tqueue", "\rqueue",
                 "\nqueue", "\uff1dcmd|' /C calc'!A0", "\uff0b1", "\uff0d1", "\uff20x"]


def _starts_badly(cell: str) -> bool:
    return cell.startswith(FORMULA_TRIGGERS) and safe_cell(cell) != cell


def test_safe_cell_rule():
    # OWASP "CSV injection" guidance: cells starting = + - @ tab CR (and LF) are prefixed with '.
    for text in TRIGGER_TEXTS:
        assert safe_cell(text) == "'" + text.translate({0x0D: 0x0D})
    assert safe_cell("-5") == "-5" and safe_cell("+1.5e3") == "+1.5e3" and safe_cell(3.5) == 3.5
    assert safe_cell("plain") == "plain" and safe_cell(None) is None
    assert safe_cell("a\x00b\u202ec\x1b") == "a\u2400b\ufffdc\u241b"  # one visible character for each
    assert len(safe_cell("x\u2066y\x7f\x85")) == 5


def test_no_output_cell_starts_with_a_trigger(tmp_path):
    rows = [{"response_id": trigger.strip() or "t", "low_point": f"{trigger} long queue here",
             "high_point": trigger, "weight": "1", "wave": "2026", "market": trigger}
            for trigger in TRIGGER_TEXTS if trigger.strip()]
    rows = [dict(row, response_id=f"{row['response_id']}{i}") for i, row in enumerate(rows)]
    rows.append({"response_id": "=ctl", "low_point": "queue \x00 \u202e evil \x1b[31m long wait",
                 "high_point": "staff", "weight": "1", "wave": "2026", "market": "-"})
    config = make_project(tmp_path / "project", n=60, rows=rows[:-1])
    # Parquet carries what a CSV reader refuses (NUL) into the answers
    survey = pd.read_csv(tmp_path / "project" / "survey.csv", dtype=str, keep_default_na=False)
    survey = pd.concat([survey, pd.DataFrame([rows[-1]])], ignore_index=True)
    survey.to_parquet(tmp_path / "project" / "survey.parquet", index=False)
    config.write_text(config_text(survey="survey.parquet"), encoding="utf-8")
    hand = tmp_path / "project" / "hand.csv"
    with open(hand, "a", encoding="utf-8", newline="") as handle:
        csv.writer(handle).writerows([[f"{trigger}{i}", "low_point", trigger, "queues"]
                                      for i, trigger in enumerate(TRIGGER_TEXTS)])
    outs = {name: tmp_path / name for name in ("coded", "stats", "keyness", "suggest", "agreement")}
    assert main(["code", str(config), "--out", str(outs["coded"]), "--quiet"]) == 0
    assert main(["prevalence", str(outs["coded"]), "--out", str(outs["stats"]), "--quiet"]) == 0
    assert main(["keyness", str(config), "--out", str(outs["keyness"]), "--min-respondents", "1",
                 "--quiet"]) == 0
    assert main(["suggest", str(config), "--out", str(outs["suggest"]), "--min-respondents", "1",
                 "--quiet"]) == 0
    assert main(["agreement", str(hand), "--lexicon", str(tmp_path / "project" / "lexicon.yaml"),
                 "--out", str(outs["agreement"]), "--quiet"]) == 0
    checked = 0
    for folder in outs.values():
        for path in folder.glob("*.csv"):
            with open(path, encoding="utf-8", newline="") as handle:
                for row in csv.reader(handle):
                    for cell in row:
                        assert not _starts_badly(cell), (path.name, cell)
                        assert "\x00" not in cell and "\u202e" not in cell and "\x1b" not in cell
                        checked += 1
    assert checked > 1000
    coded = pd.read_csv(outs["coded"] / "coded.csv", dtype=str, keep_default_na=False)
    assert "'=HYPERLINK(\"http://x.invalid\",\"y\")0" in set(coded["response_id"])
    assert "'-" in set(coded["market"])
    # the planted text reaches the outputs, made safe, and spans still index the original answer
    evidence = pd.read_csv(outs["coded"] / "evidence.csv", dtype={"response_id": str}, keep_default_na=False)
    hostile = evidence[evidence["response_id"] == "'=ctl"]
    original = rows[-1]["low_point"]
    for row in hostile[hostile["question"] == "low_point"].itertuples():
        assert len(row.matched_text) == row.end - row.start
        assert safe_cell(original[row.start:row.end]).lstrip("'") == row.matched_text.lstrip("'")
    assert set(hostile["term"]) >= {"queue", "long wait"}


def test_xlsx_cells_read_back_as_text(tmp_path):
    frame = pd.DataFrame({"text": TRIGGER_TEXTS, "n": np.arange(len(TRIGGER_TEXTS)), "x": -1.5})
    write_outputs(tmp_path / "out", {"book.xlsx": workbook_writer([Sheet("=sheet", frame)])})
    book = openpyxl.load_workbook(tmp_path / "out" / "book.xlsx")
    cells = [cell for sheet in book for row in sheet.iter_rows() for cell in row]
    assert all(cell.data_type != "f" for cell in cells)
    assert not any(isinstance(c.value, str) and _starts_badly(c.value) for c in cells)
    assert [c.value for c in book.worksheets[0]["B"][1:4]] == [0, 1, 2]  # numbers stay numbers
    assert book.worksheets[0]["C2"].value == -1.5


# --------------------------------------------------------------------------- hostile text, properties

PROPERTY_LEXICON = parse_lexicon(LEXICON, source="property-tests.yaml")
ODD = st.sampled_from(["\u200d", "\u200c", "\u200b", "\x00", "\u202e", "\ufeff", "\r\n", "\u0301", "\U0001F600",
                       "queue", "wait", "long", "not", "-", "'", "staff", "price", "\t", " "])
TEXTS = st.lists(st.one_of(st.text(max_size=40), st.lists(ODD, max_size=12).map("".join)), min_size=1, max_size=6)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(texts=TEXTS)
def test_any_text_codes_and_every_span_indexes_the_original(texts):
    result = ThemeCoder(PROPERTY_LEXICON).fit(texts).code(texts)
    assert result.matrix.shape == (len(texts), len(PROPERTY_LEXICON.ids))
    for row in result.evidence.itertuples():
        assert texts[row.document][row.start:row.end] == row.matched_text


THEME_TERMS = {"queues": ("drop", ["queue", "long wait", "waiting"]), "cost": ("drop", ["expensive", "price*"]),
               "staff": ("keep", ["staff", "rude"])}


def _lexicon_with(theme: str | None, extra: str):
    body = "lexicon: grow\nthemes:\n"
    for theme_id, (negated, terms) in THEME_TERMS.items():
        listed = [*terms, extra] if theme_id == theme else terms
        body += (f"  - id: {theme_id}\n    label: {theme_id}\n    negated: {negated}\n    terms:\n"
                 + "".join(f"      - {json.dumps(term, ensure_ascii=False)}\n" for term in listed))
    return parse_lexicon(body)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(texts=TEXTS, extra=st.one_of(st.sampled_from(["view", "long queue", "ferr*", "not wait", "wait"]),
                                     st.text(alphabet=st.characters(categories=["L"]), min_size=1, max_size=8)),
       theme=st.sampled_from(sorted(THEME_TERMS)))
def test_adding_any_term_never_removes_a_match(texts, extra, theme):
    try:
        grown = _lexicon_with(theme, extra)
    except LexiconError:  # a term the lexicon rules refuse cannot be added
        return
    before = ThemeCoder(_lexicon_with(None, "")).fit(texts).transform(texts).toarray()
    after = ThemeCoder(grown).fit(texts).transform(texts).toarray()
    assert (after >= before).all()


# --------------------------------------------------------------------------- single files (review, sample)

_SLOW_FILE_WRITE = """
import sys, time
from pathlib import Path
from textkit.io.workbook import write_file

def slow(path):
    Path(path).write_bytes(b"half a workbook")
    print("writing", flush=True)
    time.sleep(120)

write_file(sys.argv[1], slow, replace=True)
"""


def test_a_killed_single_file_write_leaves_no_part_file_and_the_next_write_clears_it(tmp_path):
    from textkit.io.workbook import write_file

    target = tmp_path / "review.xlsx"
    target.write_bytes(b"the earlier workbook")
    (tmp_path / ".review.xlsx.k2j4.part").write_bytes(b"left by an older version")
    (tmp_path / "other.txt").write_text("not ours", encoding="utf-8")
    process = subprocess.Popen([sys.executable, "-c", _SLOW_FILE_WRITE, str(target)], stdout=subprocess.PIPE,
                               text=True)
    assert process.stdout.readline().strip() == "writing"
    process.kill()
    assert process.wait() == -signal.SIGKILL
    leftovers = sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".review.xlsx.textkit-"))
    assert len(leftovers) == 1 and not leftovers[0].endswith(".part")  # a name the next run knows as ours
    assert target.read_bytes() == b"the earlier workbook"  # the kill left the old file whole
    with pytest.raises(InputError, match="already exists"):
        write_file(target, lambda path: Path(path).write_bytes(b"the new workbook"))
    write_file(target, lambda path: Path(path).write_bytes(b"the new workbook"), replace=True)
    assert target.read_bytes() == b"the new workbook"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["other.txt", "review.xlsx"]  # no debris


def test_a_failing_single_file_writer_leaves_nothing(tmp_path):
    from textkit.io.workbook import write_file

    def broken(path):
        Path(path).write_bytes(b"half")
        raise OSError(28, "No space left on device")

    with pytest.raises(InputError, match="No space left"):
        write_file(tmp_path / "sample.xlsx", broken)
    assert list(tmp_path.iterdir()) == []
