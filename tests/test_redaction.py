"""Redaction: one step for every output that carries answer text."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from textkit.cli.main import main
from textkit.text.redact import redact, redact_all

ROOT = Path(__file__).resolve().parents[1]

# Invented contact details; each must vanish from every output file, and so must its
# distinctive pieces (SEEN_AS).
PLANTED = {
    "email": "rosalind.quayle@example.com",
    "phone": "07700 900461",
    "booking": "HX4417829",
    "postcode": "TR19 7ZQ",
    "address": "27 Quillby Lane",
    "titled name": "Mrs Pennyworth",
    "listed name": "Bramwell",
}
SEEN_AS = {"email": ["rosalind", "quayle"], "phone": ["900461"], "booking": ["4417829"],
           "postcode": ["tr19", "7zq"], "address": ["quillby"], "titled name": ["pennyworth"],
           "listed name": ["bramwell"]}
CARRIERS = [
    "The guide {listed name} was rude, call me on {phone}",
    "queue for ages, email {email} please",
    "Lost my booking {booking} and the toilets were dirty",
    "We stayed at {address}, {postcode}; parking was awful",
    "{titled name} at the cafe overcharged us, expensive",
]


def test_redact_catches_each_kind():
    # expected placeholders: common practice for a redaction safety net
    text = ("Ask Mrs Jones at 12 Harbour Road, SW1A 1AA, call +44 7700 900123 or a.b@example.com, "
            "ref AB1234567, open 9.30-17.00; guide Tomas")
    out = redact(text, names=["tomas"])
    assert out == ("Ask [name] at [address], [postcode], call [phone] or [email], ref [number], "
                   "open 9.30-17.00; guide [name]")
    assert redact("K1A 0B1, 1012 AB, 12345-6789") == "[postcode], [postcode], [postcode]"
    assert redact_all(["Dr. Okafor helped", None, "nothing here"]) == ["[name] helped", None, "nothing here"]


@pytest.fixture(scope="module")
def planted_survey(tmp_path_factory):
    folder = tmp_path_factory.mktemp("planted")
    frame = pd.read_csv(ROOT / "demo_comments" / "survey.csv", dtype=str, keep_default_na=False).iloc[::10]
    # each carrier in 8 answers of one market, so that keyness or suggestions would surface any
    # planted word that escaped redaction
    rows = frame.index[frame["market"] == frame["market"].iloc[0]][:40]
    for number, row in enumerate(rows):
        frame.loc[row, "low_point"] = CARRIERS[number % len(CARRIERS)].format(**PLANTED)
    frame.to_csv(folder / "survey.csv", index=False)
    config = (ROOT / "demo_comments" / "survey.yaml").read_text(encoding="utf-8")
    config = config.replace("../lexicons/", str(ROOT / "lexicons") + "/")
    (folder / "survey.yaml").write_text(config + "redact_names: [Bramwell]\n", encoding="utf-8")
    hand = frame.loc[rows, ["response_id"]].assign(question="low_point", themes="staff")
    hand.to_csv(folder / "hand.csv", index=False)
    return folder


def test_no_output_of_any_command_shows_a_planted_detail(planted_survey, capsys):
    folder = planted_survey
    config = str(folder / "survey.yaml")
    lexicon = str(ROOT / "lexicons" / "visitor_experience.yaml")
    commands = {
        "code": ["code", config, "--out", str(folder / "out-code"), "--quiet"],
        "check": ["lexicon", "check", lexicon, "--survey", config, "--out", str(folder / "out-check"), "--quiet"],
        "agreement": ["agreement", str(folder / "hand.csv"), "--survey", config, "--out",
                      str(folder / "out-agreement"), "--resamples", "0", "--quiet"],
        "prevalence": ["prevalence", str(folder / "out-code"), "--out", str(folder / "out-prevalence"), "--quiet"],
        "keyness": ["keyness", config, "--out", str(folder / "out-keyness"), "--quiet"],
        "suggest": ["suggest", config, "--out", str(folder / "out-suggest"), "--quiet"],
    }
    for name, argv in commands.items():
        assert main(argv) == 0, (name, capsys.readouterr().err)
    printed = capsys.readouterr()
    files = [path for path in folder.glob("out-*/*") if path.suffix != ".parquet"]
    assert len(files) >= 12
    texts = {path: path.read_text(encoding="utf-8", errors="replace").lower() for path in files}
    texts["(printed)"] = (printed.out + printed.err).lower()
    parquet = pd.read_parquet(folder / "out-code" / "coded.parquet")
    texts["coded.parquet"] = parquet.to_csv().lower()
    for kind, detail in PLANTED.items():
        pieces = {detail.lower(), *SEEN_AS[kind]}
        for path, text in texts.items():
            for piece in pieces:
                assert piece not in text, (kind, piece, str(path))
    # the evidence still shows (redacted) answers, and the disagreements carry placeholders
    evidence = pd.read_csv(folder / "out-code" / "evidence.csv")
    assert len(evidence) > 100
    disagreements = pd.read_csv(folder / "out-agreement" / "disagreements.csv")
    assert disagreements["text"].str.contains(r"\[phone\]|\[email\]|\[name\]").any()
