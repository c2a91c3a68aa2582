"""Coding accuracy against hand-coded samples, for each matching default.

For each sample (a CSV with ``text`` and ``themes`` columns: theme ids joined
by ";") and each setting, the shipped lexicon codes the answers and the codes
are compared with the hand codes (parents implied on both sides; micro
average over every theme decision, themes the lexicon lacks included):

* ``exact``: every term's words as written (wildcards kept), no inflection,
  negation ignored (negated mentions count, unmarked): a plain matcher;
* ``inflect {lemma, stem, off} x negation {keep, drop}``: inflection and the
  negation policy forced on every term and theme.

The lexicon is used as shipped; nothing here is tuned to the samples.

    python benchmarks/accuracy.py                       # both demo samples
    python benchmarks/accuracy.py SAMPLE.csv --lexicon L.yaml --markdown
"""

from __future__ import annotations

import argparse
import dataclasses
from pathlib import Path

import numpy as np
import pandas as pd

from textkit.coding.agreement import agreement_table, codes_to_matrix
from textkit.coding.coder import ThemeCoder
from textkit.coding.lexicon import Lexicon, load_lexicon

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = [ROOT / "demo_comments" / "hand_coded.csv", ROOT / "demo_comments" / "hand_coded_second.csv"]


def with_settings(lexicon: Lexicon, inflect: bool | str, negated: str) -> Lexicon:
    """``lexicon`` with ``inflect`` on every term and ``negated`` on every theme."""
    themes = tuple(dataclasses.replace(
        theme, negated=negated,
        terms=tuple(dataclasses.replace(term, inflect=inflect) for term in theme.terms),
        exclusions=tuple(dataclasses.replace(term, inflect=inflect) for term in theme.exclusions))
        for theme in lexicon.themes)
    return dataclasses.replace(lexicon, themes=themes)


def settings(lexicon: Lexicon) -> dict[str, Lexicon]:
    table = {"exact (no inflection, negation ignored)": with_settings(lexicon, False, "keep")}
    for inflect, name in ((True, "lemma"), ("stem", "stem"), (False, "off")):
        for negated in ("keep", "drop"):
            table[f"inflect {name}, negation {negated}"] = with_settings(lexicon, inflect, negated)
    table["shipped lexicon as written"] = lexicon
    return table


def score(frame: pd.DataFrame, lexicon: Lexicon) -> dict[str, float]:
    texts = [t if isinstance(t, str) else None for t in frame["text"]]
    codes = frame["themes"].tolist()
    extra = sorted({c.strip() for v in codes if isinstance(v, str) for c in v.split(";")
                    if c.strip() and c.strip() not in lexicon.ids})
    themes = list(lexicon.ids) + extra
    hand = codes_to_matrix(codes, themes, lexicon=lexicon)
    machine = np.zeros_like(hand)
    machine[:, :len(lexicon.ids)] = ThemeCoder(lexicon).fit(texts).transform(texts).toarray()
    table = agreement_table(hand, machine, themes)
    total = table.loc[table["theme"] == "(micro)"].iloc[0]
    return {"precision": total.precision, "recall": total.recall, "f1": total.f1}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("samples", nargs="*", type=Path, default=[s for s in SAMPLES if s.exists()])
    parser.add_argument("--lexicon", type=Path, default=ROOT / "lexicons" / "visitor_experience.yaml")
    options = parser.parse_args()
    lexicon = load_lexicon(options.lexicon)
    rows = []
    for sample in options.samples:
        frame = pd.read_csv(sample, dtype=str, keep_default_na=False)
        for name, variant in settings(lexicon).items():
            rows.append({"sample": f"{sample.name} (n={len(frame)})", "setting": name,
                         **score(frame, variant)})
    table = pd.DataFrame(rows)
    header = "| sample | setting | precision | recall | F1 |\n|---|---|---|---|---|"
    lines = [f"| {r.sample} | {r.setting} | {r.precision:.3f} | {r.recall:.3f} | {r.f1:.3f} |"
             for r in table.itertuples()]
    print("\n".join([header, *lines]))


if __name__ == "__main__":
    main()
