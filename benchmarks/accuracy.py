"""Coding accuracy against hand-coded samples, for each matching default.

For each sample (a CSV with ``text`` and ``themes`` columns: theme ids joined
by ";") and each setting, the shipped lexicon codes the answers and the codes
are compared with the hand codes (parents implied on both sides; micro
average over every theme decision, themes the lexicon lacks included):

* ``exact``: every term's words as written (wildcards kept), no inflection,
  negation ignored (negated mentions count, unmarked): a plain matcher;
* ``inflect {lemma, stem, off} x negation {keep, drop}``: inflection and the
  negation policy forced on every term and theme (overriding the lexicon's own
  per-term ``inflect: false``);
* ``defaults``: the lexicon as written under textkit's defaults (lemmas,
  negated mentions kept), with its per-term choices - what a user gets.

A second table gives the difference defaults minus exact in precision and F1
with a paired bootstrap 95% interval (answers resampled, 2,000 times, seed 0),
so that a small difference can be read against the samples' noise.

The lexicon is used as shipped; nothing here is tuned to the samples.

    python benchmarks/accuracy.py                       # the three demo samples
    python benchmarks/accuracy.py SAMPLE.csv --lexicon L.yaml
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
EXACT = "exact (no inflection, negation ignored)"
DEFAULTS = "defaults (lexicon as written: lemmas, negation kept)"
SAMPLES = [ROOT / "demo_comments" / name
           for name in ("hand_coded.csv", "hand_coded_second.csv", "hand_coded_third.csv")]


def with_settings(lexicon: Lexicon, inflect: bool | str, negated: str) -> Lexicon:
    """``lexicon`` with ``inflect`` on every term and ``negated`` on every theme."""
    themes = tuple(dataclasses.replace(
        theme, negated=negated,
        terms=tuple(dataclasses.replace(term, inflect=inflect) for term in theme.terms),
        exclusions=tuple(dataclasses.replace(term, inflect=inflect) for term in theme.exclusions))
        for theme in lexicon.themes)
    return dataclasses.replace(lexicon, themes=themes)


def settings(lexicon: Lexicon) -> dict[str, Lexicon]:
    table = {EXACT: with_settings(lexicon, False, "keep")}
    for inflect, name in ((True, "lemma"), ("stem", "stem"), (False, "off")):
        for negated in ("keep", "drop"):
            table[f"inflect {name}, negation {negated}"] = with_settings(lexicon, inflect, negated)
    table[DEFAULTS] = lexicon
    return table


def decisions(frame: pd.DataFrame, lexicon: Lexicon) -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Hand and machine codes (n_answers, n_themes), themes the lexicon lacks included as all-0 machine columns."""
    texts = [t if isinstance(t, str) else None for t in frame["text"]]
    codes = frame["themes"].tolist()
    extra = sorted({c.strip() for v in codes if isinstance(v, str) for c in v.split(";")
                    if c.strip() and c.strip() not in lexicon.ids})
    themes = list(lexicon.ids) + extra
    hand = codes_to_matrix(codes, themes, lexicon=lexicon)
    machine = np.zeros_like(hand)
    machine[:, :len(lexicon.ids)] = ThemeCoder(lexicon).fit(texts).transform(texts).toarray()
    return hand, machine, themes


def score(hand: np.ndarray, machine: np.ndarray, themes: list[str]) -> dict[str, float]:
    table = agreement_table(hand, machine, themes)
    total = table.loc[table["theme"] == "(micro)"].iloc[0]
    return {"precision": total.precision, "recall": total.recall, "f1": total.f1}


def paired_difference(hand: np.ndarray, first: np.ndarray, second: np.ndarray, n_resamples: int = 2000,
                      seed: int = 0) -> dict[str, tuple[float, float, float]]:
    """Micro precision and F1 of ``first`` minus ``second``: (point, low, high), answers resampled in pairs."""
    coded = ~np.isnan(hand)
    truth = np.where(coded, hand, 0) == 1

    def per_answer(machine):
        said = (machine == 1) & coded
        return np.stack([(said & truth).sum(1), (said & ~truth).sum(1), (~said & truth & coded).sum(1)])

    counts = np.stack([per_answer(first), per_answer(second)])  # (2 settings, tp/fp/fn, n answers)
    weights = np.random.default_rng(seed).multinomial(len(hand), np.full(len(hand), 1 / len(hand)),
                                                      size=n_resamples)
    every = np.concatenate([np.ones((1, len(hand))), weights])  # row 0: the sample itself
    tp, fp, fn = (np.einsum("rn,sn->sr", every, counts[:, k]) for k in range(3))
    figures = {"precision": tp / (tp + fp), "f1": 2 * tp / (2 * tp + fp + fn)}
    result = {}
    for name, values in figures.items():
        difference = values[0] - values[1]
        low, high = np.percentile(difference[1:], [2.5, 97.5])
        result[name] = (float(difference[0]), float(low), float(high))
    return result


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("samples", nargs="*", type=Path, default=[s for s in SAMPLES if s.exists()])
    parser.add_argument("--lexicon", type=Path, default=ROOT / "lexicons" / "visitor_experience.yaml")
    options = parser.parse_args()
    lexicon = load_lexicon(options.lexicon)
    rows, differences = [], []
    for sample in options.samples:
        frame = pd.read_csv(sample, dtype=str, keep_default_na=False)
        label = f"{sample.name} (n={len(frame)})"
        coded = {name: decisions(frame, variant) for name, variant in settings(lexicon).items()}
        for name, (hand, machine, themes) in coded.items():
            rows.append({"sample": label, "setting": name, **score(hand, machine, themes)})
        hand = coded[DEFAULTS][0]
        change = paired_difference(hand, coded[DEFAULTS][1], coded[EXACT][1])
        differences.append((label, change["precision"], change["f1"]))
    header = "| sample | setting | precision | recall | F1 |\n|---|---|---|---|---|"
    lines = [f"| {r['sample']} | {r['setting']} | {r['precision']:.3f} | {r['recall']:.3f} | {r['f1']:.3f} |"
             for r in rows]
    print("\n".join([header, *lines]))
    print("\n| sample | defaults - exact: precision (95% CI) | F1 (95% CI) |\n|---|---|---|")
    for label, precision, f1 in differences:
        print(f"| {label} | {precision[0]:+.3f} ({precision[1]:+.3f} to {precision[2]:+.3f}) "
              f"| {f1[0]:+.3f} ({f1[1]:+.3f} to {f1[2]:+.3f}) |")


if __name__ == "__main__":
    main()
