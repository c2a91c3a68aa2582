"""The finished report: safety of untrusted text, reproducibility, summaries, stages, the demo end to end."""

from __future__ import annotations

import html
import json
import re
from pathlib import Path

import html5lib
import openpyxl
import pandas as pd
import pytest
from report_fixtures import DEMO, HOSTILE_ANSWERS, HOSTILE_GROUPS, HOSTILE_MARKUP

from textkit.cli.main import main
from textkit.io.output import FORMULA_TRIGGERS, safe_cell, safe_frame
from textkit.io.workbook import Sheet, workbook_bytes
from textkit.pipeline import build_report, write_report

XHTML = "{http://www.w3.org/1999/xhtml}"


@pytest.fixture(scope="module")
def crafted(crafted_report):
    return crafted_report  # built once per session (tests/conftest.py), shared with the browser test


@pytest.fixture(scope="module")
def crafted_book(crafted):
    return openpyxl.load_workbook(crafted[2] / "tables.xlsx", read_only=True)


# ---------------------------------------------------------------------------
# Formula injection (the rule: OWASP "CSV injection" advice, common practice)
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("text", ["=1+1", "+1+1", "-1-A1", "@SUM(A1)", "\tx", "\rx"])
def test_a_text_starting_with_a_trigger_gets_an_apostrophe(text):
    assert safe_cell(text) == "'" + text


@pytest.mark.parametrize("value", ["a=b", "plain", "", "-1", "+2.5", 5, -3.5, None])
def test_other_values_are_left_alone(value):
    assert safe_cell(value) == value  # plain numbers written as text stay as they are


def test_numbers_stay_numbers_in_a_neutralised_frame():
    frame = pd.DataFrame({"text": ["=x", "ok"], "number": [-1.5, 2.0]})
    safe = safe_frame(frame)
    assert safe["text"].tolist() == ["'=x", "ok"]
    assert safe["number"].tolist() == [-1.5, 2.0] and safe["number"].dtype.kind == "f"


def test_workbook_cells_read_back_as_text_not_formulas(crafted_book):
    book = crafted_book
    seen_hostile = 0
    for sheet in book.worksheets:
        for row in sheet.iter_rows():
            for cell in row:
                assert cell.data_type != "f", (sheet.title, cell.coordinate, cell.value)
                if isinstance(cell.value, str):
                    assert not cell.value.startswith(FORMULA_TRIGGERS), (sheet.title, cell.coordinate)
                    seen_hostile += cell.value.startswith("'=HYPERLINK")
    assert seen_hostile > 0  # the hostile group value did reach the workbook, as text
    rows = book["prevalence"].iter_rows(max_row=2)
    header = [c.value for c in next(rows)]
    estimate = next(rows)[header.index("estimate")]
    assert isinstance(estimate.value, float) and estimate.number_format == "0.0%"


def test_workbook_header_is_frozen(crafted):
    book = openpyxl.load_workbook(crafted[2] / "tables.xlsx")  # frozen panes are not read in read-only mode
    assert book["prevalence"].freeze_panes == "A2" and book["prevalence"]["A1"].font.b


def test_csv_cells_are_neutralised(crafted):
    _, _, out = crafted
    text = (out / "prevalence.csv").read_text(encoding="utf-8")
    assert "'=HYPERLINK" in text and "'@SUM(1+1)" in text
    assert not re.search(r'(^|,)"?=HYPERLINK', text, flags=re.M)


def test_workbook_shows_flags_as_styles_and_explains_every_column(crafted_book):
    book = crafted_book
    rows = book["prevalence"].iter_rows()
    header = [c.value for c in next(rows)]
    flag_column = header.index("flag")
    fills = {}
    for row in rows:
        fills.setdefault(row[flag_column].value, set()).add(row[0].fill.fgColor.rgb)
    assert fills["ok"] != fills["suppress"] and fills["ok"] != fills["caution"]
    notes = pd.DataFrame(list(book["notes"].values)[1:], columns=["sheet", "column", "meaning"])
    for name in book.sheetnames[:-1]:
        columns = [c.value for c in next(book[name].iter_rows(max_row=1))]
        described = notes[notes["sheet"] == name]
        assert list(described["column"]) == columns
        assert not described["meaning"].str.contains("no description").any(), described


def test_workbook_bytes_depend_only_on_content():
    frame = pd.DataFrame({"estimate": [0.1, 0.2], "flag": ["ok", "caution"]})
    notes = pd.DataFrame({"sheet": ["t", "t"], "column": ["estimate", "flag"], "meaning": ["a", "b"]})
    def sheets(table):
        return [Sheet("t", table, percent=frozenset({"estimate"})), Sheet("notes", notes, flag_column=None)]

    first = workbook_bytes(sheets(frame))
    assert first == workbook_bytes(sheets(frame.copy()))
    assert first != workbook_bytes(sheets(frame.assign(estimate=[0.1, 0.3])))  # the content does change the bytes


# ---------------------------------------------------------------------------
# HTML: escaped, self-contained, complete
# ---------------------------------------------------------------------------
def _elements(path: Path):
    document = html5lib.parse(path.read_bytes(), treebuilder="etree", namespaceHTMLElements=True)
    return document, list(document.iter())


@pytest.mark.parametrize("page", ["index.html", "summaries"])
def test_no_hostile_string_becomes_markup(crafted, page):
    _, _, out = crafted
    paths = [out / "index.html"] if page == "index.html" else sorted((out / "summaries").glob("*.html"))
    assert paths
    script = (Path(__import__("textkit.present.report").present.report.__file__).parent
              / "templates" / "report.js").read_text(encoding="utf-8")
    texts = []
    for path in paths:
        raw = path.read_text(encoding="utf-8")
        document, elements = _elements(path)
        scripts = [e for e in elements if e.tag == f"{XHTML}script"]
        assert len(scripts) == 1 and scripts[0].text == script  # only our own script
        for element in elements:
            assert element.tag != f"{XHTML}a" or not element.get("href", "").startswith("javascript")
            assert element.get("id") != "injected"
            for name, value in element.attrib.items():
                assert not name.lower().startswith("on"), (path.name, element.tag, name)
                if name in ("src", "href"):
                    assert value.startswith(("data:", "#")), (path.name, name, value[:40])
        assert "<img id=injected" not in raw and "<script>document" not in raw
        texts.append("".join(document.itertext()))
        assert 'onmouseover="' not in raw
    for group in HOSTILE_GROUPS:
        assert any(group in text for text in texts), group  # every hostile value arrived, as text
    if page == "index.html":  # hostile answers reach the page through the quotes (two per theme), as text
        arrived = [fragment for fragment in HOSTILE_MARKUP if fragment in texts[0]]
        assert len(arrived) >= 2, arrived


def test_hostile_answers_are_quoted_as_text(crafted):
    _, report, out = crafted
    document, elements = _elements(out / "index.html")
    table = next(e for e in elements if e.get("id") == "quotes-table")
    cells = ["".join(cell.itertext()) for cell in table.iter(f"{XHTML}td")]
    quoted = [c for c in cells if "zephyrgate" in c]
    assert len(quoted) >= 2  # the crafted 'gate' theme's quotes are all hostile answers
    assert any("<script>" in c or "<img id=injected" in c or "javascript:" in c for c in quoted)
    assert not list(table.iter(f"{XHTML}script")) and not list(table.iter(f"{XHTML}img"))
    assert not list(table.iter(f"{XHTML}a"))
    # quotes.csv: the answers that start with a formula trigger are written with the text mark
    rows = pd.read_csv(out / "quotes.csv", dtype=str, keep_default_na=False)
    gate = rows[rows["theme"] == "gate"]["quote"].tolist()
    assert gate and all(not q.startswith(FORMULA_TRIGGERS) for q in gate)
    starts = {a.split(" ")[0].strip() for a in HOSTILE_ANSWERS if a.startswith(("=", "+", "-", "@"))}
    assert any(q.startswith("'") and q[1:].split(" ")[0] in starts for q in gate), gate


def test_page_is_self_contained_and_has_every_section(crafted):
    _, report, out = crafted
    raw = (out / "index.html").read_text(encoding="utf-8")
    assert not re.search(r"(src|href)=\"(https?:)?//", raw)
    _, elements = _elements(out / "index.html")
    policy = [e.get("content") for e in elements if e.get("http-equiv") == "Content-Security-Policy"]
    assert policy and policy[0].startswith("default-src 'none'; img-src data:;")
    ids = {e.get("id") for e in elements}
    for table_id in ("summary-differences", "prevalence-low_point-table", "prevalence-high_point-table",
                     "comparisons-table", "keyness-table", "quotes-table"):
        assert table_id in ids
    for section in ("summary", "comparisons", "keyness", "topics", "quotes", "method"):
        assert section in ids
    assert "not available in this build" not in raw
    # every chart is embedded (as an SVG data URI) and written as PNG and SVG
    images = [e.get("src") for e in elements if e.tag == f"{XHTML}img"]
    charts = report.manifest["charts"]
    kinds = {name.split("__")[0] for name in charts}
    assert {"prevalence", "differences", "keyness", "keyness-cloud", "cooccurrence"} <= kinds, kinds
    assert len(images) == len(charts) and all(i.startswith("data:image/svg+xml;base64,") for i in images)
    for name in charts:
        assert (out / "charts" / f"{name}.svg").read_bytes()[:5] in (b"<?xml", b"<svg ")
        assert (out / "charts" / f"{name}.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # topics: found in the uncoded answers, or the section says why not
    if report.manifest["topics"] is None:
        assert report.manifest["left_out"]["topics"] in html.unescape(raw)
    else:
        assert "topics-table" in ids and "k-selection" in kinds


# ---------------------------------------------------------------------------
# Summaries
# ---------------------------------------------------------------------------
def test_every_summary_pdf_is_one_a4_page_naming_its_group(crafted):
    import pypdf

    from textkit.present.summary import file_stems

    _, report, out = crafted
    stems = file_stems([s.group for s in report.summaries])
    assert len(list((out / "summaries").glob("*.pdf"))) == len(report.summaries) == len(set(HOSTILE_GROUPS))
    for summary in report.summaries:
        reader = pypdf.PdfReader(out / "summaries" / f"{stems[summary.group]}.pdf")
        assert len(reader.pages) == 1
        box = reader.pages[0].mediabox  # A4 is 595 x 842 points (ISO 216)
        assert abs(float(box.width) - 595.3) < 1 and abs(float(box.height) - 841.9) < 1
        assert _squash(summary.group) in _squash(reader.pages[0].extract_text())
        assert 2 <= len(summary.quotes) <= 3, summary.group  # two or three of the group's quotes
        first_quote = summary.quotes[0][0].split()[:4]
        assert _squash(" ".join(first_quote)) in _squash(reader.pages[0].extract_text())


def _squash(text: str) -> str:
    return re.sub(r"\s+", "", text)


def test_unknown_summary_variable_is_refused_before_any_work(tmp_path, monkeypatch, capsys):
    import textkit.pipeline as pipeline

    def no_work(*args, **kwargs):
        raise AssertionError("work started")

    monkeypatch.setattr(pipeline, "code_survey", no_work)
    out = tmp_path / "out"
    assert main(["report", str(DEMO / "survey.yaml"), "--out", str(out), "--summaries", "nation"]) == 2
    message = capsys.readouterr().err
    assert "nation" in message and "market, age_band, trip_purpose" in message
    assert not out.exists()


# ---------------------------------------------------------------------------
# Reproducible, staged, all or nothing
# ---------------------------------------------------------------------------
def test_rerun_gives_the_same_bytes(crafted, tmp_path):
    config, first, out = crafted
    second = build_report(config, summaries="market")
    write_report(second, tmp_path / "again")
    names = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file())
    assert names == sorted(p.relative_to(tmp_path / "again").as_posix()
                           for p in (tmp_path / "again").rglob("*") if p.is_file())
    for name in names:
        if name != "manifest.json":
            assert (out / name).read_bytes() == (tmp_path / "again" / name).read_bytes(), name
    manifests = [json.loads((folder / "manifest.json").read_text()) for folder in (out, tmp_path / "again")]
    for manifest in manifests:
        assert set(manifest["timings_seconds"]) >= {"code", "statistics", "keyness", "summaries", "report"}
        del manifest["timings_seconds"]
    assert manifests[0] == manifests[1]


def test_a_failing_stage_is_named_and_writes_nothing(tmp_path, capsys):
    bad = tmp_path / "hand.csv"
    bad.write_text("answer,codes\nhello,staff\n", encoding="utf-8")
    out = tmp_path / "out"
    status = main(["report", str(DEMO / "survey.yaml"), "--out", str(out), "--hand-coded", str(bad), "--quiet"])
    message = capsys.readouterr().err.strip()
    assert status == 2 and "in stage 'agreement'" in message and str(bad) in message
    assert len(message.splitlines()) == 1
    assert not out.exists() or not any(out.iterdir())


def test_a_failing_writer_leaves_the_folder_as_it_was(crafted, tmp_path):
    _, report, _ = crafted
    out = tmp_path / "out"
    out.mkdir()
    (out / "index.html").write_text("earlier", encoding="utf-8")
    broken = dict(report.files)
    broken["summaries/zz.pdf"] = object()  # not bytes: its writer fails after others were staged
    with pytest.raises(TypeError):
        write_report(type(report)(files=broken, manifest=report.manifest, timings=report.timings), out)
    assert sorted(p.name for p in out.iterdir()) == ["index.html"]
    assert (out / "index.html").read_text(encoding="utf-8") == "earlier"


# ---------------------------------------------------------------------------
# The demo, end to end through the command line
# ---------------------------------------------------------------------------
def test_demo_end_to_end(tmp_path, capsys):
    import pypdf

    out = tmp_path / "demo"
    assert main(["demo", "--out", str(out)]) == 0
    captured = capsys.readouterr()
    for stage in ("code", "topics", "statistics", "keyness", "agreement", "quotes", "charts", "summaries", "report",
                  "write"):
        assert re.search(rf"^\s+{stage}\s+\d+\.\d\d s$", captured.err, flags=re.M), stage
    for name in ("index.html", "tables.xlsx", "prevalence.csv", "comparisons.csv", "group_tests.csv",
                 "keyness.csv", "agreement.csv", "quotes.csv", "topics.csv", "topic_terms.csv", "k_selection.csv",
                 "manifest.json"):
        assert (out / name).stat().st_size > 0, name
    assert len(list((out / "charts").glob("*.png"))) == len(list((out / "charts").glob("*.svg"))) >= 10
    markets = sorted(pd.read_csv(DEMO / "survey.csv", usecols=["market"])["market"].unique())
    assert sorted(p.stem for p in (out / "summaries").glob("*.pdf")) == markets
    for market in markets:
        page = pypdf.PdfReader(out / "summaries" / f"{market}.pdf")
        assert len(page.pages) == 1 and market in page.pages[0].extract_text()
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["survey"]["sha256"] and manifest["lexicon"]["sha256"] and manifest["settings"]["seed"]
    assert manifest["hand_coded"]["sha256"]
    raw = html.unescape((out / "index.html").read_text(encoding="utf-8"))
    # agreement figures from the hand-coded sample appear in the cautions (kappa over all decisions)
    from textkit.present.report import overall_agreement

    kappa = overall_agreement(pd.read_csv(out / "agreement.csv"))["kappa"]
    assert f"Cohen's kappa {kappa:.2f}" in raw


def test_report_refuses_a_missing_config(tmp_path, capsys):
    assert main(["report", str(tmp_path / "nope.yaml"), "--out", str(tmp_path / "o")]) == 2
    assert "nope.yaml" in capsys.readouterr().err

