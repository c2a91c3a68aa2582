"""Agreement between hand codes and machine codes, and between people.

Before reporting, a researcher codes a sample of answers by hand and checks the
lexicon against it. Per theme we report precision (share of machine codes the
coder agrees with), recall (share of hand codes the machine found), F1 and
Cohen's kappa (agreement beyond chance on the yes/no decision), each with a
bootstrap 95% percentile interval (answers resampled with replacement through
:func:`scipy.stats.bootstrap`, 1,000 resamples by default; resamples where a
ratio is undefined are left out of its interval), and the theme's prevalence in
the sample. ``(no theme)`` scores "no theme applies" as a category of its own;
``(micro)`` pools every theme decision, ``(macro)`` averages the themes' figures
(themes where a figure is undefined left out). Rows may carry sample weights
(inverse selection probabilities, from an enriched sample): every count is then
weighted, so the figures estimate agreement in the population sampled.

Counts are built with matrix products over resample counts rather than calling
scikit-learn once per theme and resample (30 themes x 4 figures x 1,000 resamples
would take minutes); the tests check the figures against ``sklearn.metrics``.

Several coders: Krippendorff's alpha (nominal) per theme over every coder,
Cohen's kappa for each pair of coders, and a majority consensus (ties left
uncoded) that the machine is scored against.
"""

from __future__ import annotations

import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from itertools import combinations

import numpy as np
import pandas as pd

from ..text.redact import redact_all
from .handcodes import HandCodes, long_hand_codes
from .lexicon import Lexicon
from .review import terms_by_answer

#: Columns of the agreement table.
AGREEMENT_COLUMNS = ["theme", "in_lexicon", "n", "hand", "machine", "both", "prevalence",
                     "precision", "precision_low", "precision_high", "recall", "recall_low", "recall_high",
                     "f1", "f1_low", "f1_high", "kappa", "kappa_low", "kappa_high"]
#: Columns of the disagreements table.
DISAGREEMENT_COLUMNS = ["response_id", "question", "text", "hand", "machine", "missed", "extra", "terms_fired",
                        "terms_nearly"]
#: Columns of the per-theme agreement between coders, and of the coder pairs.
CODER_COLUMNS = ["theme", "units", "coders", "alpha"]
PAIR_COLUMNS = ["theme", "coder_a", "coder_b", "n", "agreement", "kappa"]
_FIGURES = ("precision", "recall", "f1", "kappa")
NO_THEME = "(no theme)"


def codes_to_matrix(codes: Sequence[str | None], themes: Sequence[str], *, separator: str = ";",
                    source: str = "hand codes", lexicon: Lexicon | None = None) -> np.ndarray:
    """Turn code lists like ``"toilets;staff"`` into a 0/1 matrix of shape (n, len(themes)), int8.

    Every id must be among ``themes`` (else :class:`InputError` naming the row);
    with ``lexicon``, codes roll up to their ancestors.
    """
    from ..errors import InputError

    position = {theme: column for column, theme in enumerate(themes)}
    matrix = np.zeros((len(codes), len(themes)), dtype=np.int8)
    for row, value in enumerate(codes):
        if not isinstance(value, str):
            continue
        for code in filter(None, (part.strip() for part in value.split(separator))):
            if code not in position:
                raise InputError(f"unknown theme id '{code}' in the hand codes; known ids: "
                                 f"{', '.join(themes)}", source=source, row=row + 1, column="themes")
            matrix[row, position[code]] = 1
            if lexicon is not None and code in lexicon.ids:
                for ancestor in lexicon.ancestors(code):
                    matrix[row, position[ancestor]] = 1
    return matrix


# --------------------------------------------------------------------------- figures from counts

def _confusion(row_weights: np.ndarray, hand: np.ndarray, machine: np.ndarray) -> tuple[np.ndarray, ...]:
    """Weighted (tp, fp, fn, tn) per theme; ``row_weights`` (B, n) -> each (B, k). NaN hand cells count nowhere."""
    coded = np.isfinite(hand)
    positive = np.where(coded, hand, 0.0)
    negative = coded & (hand == 0)
    machine = machine.astype(float)
    tp = row_weights @ (positive * machine)
    fn = row_weights @ (positive * (1 - machine))
    fp = row_weights @ (negative * machine)
    tn = row_weights @ (negative * (1 - machine))
    return tp, fp, fn, tn


def _figures(tp: np.ndarray, fp: np.ndarray, fn: np.ndarray, tn: np.ndarray) -> dict[str, np.ndarray]:
    """Precision, recall, F1, Cohen's kappa (binary, closed form) and prevalence from counts; NaN where undefined."""
    with np.errstate(divide="ignore", invalid="ignore"):
        n = tp + fp + fn + tn
        precision = tp / (tp + fp)
        recall = tp / (tp + fn)
        f1 = 2 * tp / (2 * tp + fp + fn)
        # kappa = (p_o - p_e) / (1 - p_e) written for a 2x2 table
        kappa = 2 * (tp * tn - fn * fp) / ((tp + fp) * (fp + tn) + (tp + fn) * (fn + tn))
        prevalence = (tp + fn) / n
    return {"precision": precision, "recall": recall, "f1": f1, "kappa": kappa, "prevalence": prevalence}


def _all_figures(row_weights: np.ndarray, hand: np.ndarray, machine: np.ndarray, n_themes: int) -> np.ndarray:
    """Every figure of the table for each row-weight vector: array (B, 4, n_themes + 3).

    Columns: the themes, ``(no theme)``, ``(micro)`` over the themes, ``(macro)``.
    """
    tp, fp, fn, tn = _confusion(row_weights, hand, machine)
    per = _figures(tp, fp, fn, tn)
    micro = _figures(*(c[:, :n_themes].sum(axis=1, keepdims=True) for c in (tp, fp, fn, tn)))
    out = []
    for name in _FIGURES:
        with np.errstate(all="ignore"), _quiet():
            macro = np.nanmean(per[name][:, :n_themes], axis=1, keepdims=True)
        out.append(np.concatenate([per[name], micro[name], macro], axis=1))
    return np.stack(out, axis=1)


@contextmanager
def _quiet() -> Iterator[None]:
    """Silence numpy's warnings for empty or all-NaN slices (those figures are NaN by design)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        yield


def _with_no_theme(hand: np.ndarray, machine: np.ndarray, in_lexicon: Sequence[bool]) -> tuple[np.ndarray, ...]:
    """Append the ``(no theme)`` column: hand 1 when every theme is 0, 0 when any is 1, else not coded."""
    coded_all = np.isfinite(hand).all(axis=1)
    any_one = (hand == 1).any(axis=1)
    none = np.where(any_one, 0.0, np.where(coded_all, 1.0, np.nan))
    machine_none = (machine[:, np.asarray(in_lexicon, dtype=bool)] == 0).all(axis=1).astype(float)
    return np.column_stack([hand, none]), np.column_stack([machine, machine_none])


def agreement_table(hand: np.ndarray, machine: np.ndarray, themes: Sequence[str],
                    in_lexicon: Sequence[bool] | None = None, *, weights: np.ndarray | None = None,
                    n_resamples: int = 0, seed: int = 0, confidence: float = 0.95) -> pd.DataFrame:
    """Per-theme agreement of machine codes with hand codes.

    Parameters
    ----------
    hand : array of shape (n, k)
        1, 0, or NaN for a cell not coded (left out of that theme's figures).
    machine : array of shape (n, k), 0/1
    themes : sequence of str, length k
    in_lexicon : sequence of bool, length k, optional
        False for hand-code themes the lexicon lacks (machine all 0).
    weights : array of shape (n,), optional
        Sample weights of the answers (default 1).
    n_resamples : int, default 0
        Bootstrap resamples for the 95% intervals (0: no intervals, columns NaN).
    seed : int, default 0

    Returns
    -------
    DataFrame with :data:`AGREEMENT_COLUMNS`: one row per theme, then ``(no theme)``,
    ``(micro)`` and ``(macro)``. ``n``, ``hand``, ``machine``, ``both`` are
    unweighted counts of coded decisions; ``prevalence`` is the (weighted) share
    of coded answers the hand codes give the theme. Undefined figures are NaN.
    """
    hand = np.asarray(hand, dtype=float)
    machine = np.asarray(machine, dtype=np.int8)
    if hand.shape != machine.shape:
        raise ValueError(f"hand codes {hand.shape} and machine codes {machine.shape} differ in shape")
    k = hand.shape[1]
    in_lexicon = list(in_lexicon) if in_lexicon is not None else [True] * k
    weights = np.ones(len(hand)) if weights is None else np.asarray(weights, dtype=float)
    hand_all, machine_all = _with_no_theme(hand, machine, in_lexicon)
    point = _all_figures(weights[None, :], hand_all, machine_all, k)[0]
    counts = _confusion(np.ones((1, len(hand))), hand_all, machine_all)
    tp, fp, fn, tn = (np.append(c[0], [c[0, :k].sum(), np.nan]) for c in counts)
    weighted = [c[0] for c in _confusion(weights[None, :], hand_all, machine_all)]
    prevalence = _figures(*weighted)["prevalence"]
    micro = _figures(*(np.array([c[:k].sum()]) for c in weighted))["prevalence"]
    table = pd.DataFrame({
        "theme": [*themes, NO_THEME, "(micro)", "(macro)"],
        "in_lexicon": [*in_lexicon, True, all(in_lexicon), all(in_lexicon)],
        "n": tp + fp + fn + tn, "hand": tp + fn, "machine": tp + fp, "both": tp,
        "prevalence": np.concatenate([prevalence, micro, [np.nan]]),
    })
    for index, name in enumerate(_FIGURES):
        table[name] = point[index]
    intervals = _bootstrap_intervals(hand_all, machine_all, weights, k, n_resamples, seed, confidence)
    for index, name in enumerate(_FIGURES):
        table[f"{name}_low"], table[f"{name}_high"] = intervals[:, index, 0], intervals[:, index, 1]
    for column in ("n", "hand", "machine", "both"):
        table[column] = table[column].astype("Int64")
    return table[AGREEMENT_COLUMNS]


def _bootstrap_intervals(hand: np.ndarray, machine: np.ndarray, weights: np.ndarray, n_themes: int,
                         n_resamples: int, seed: int, confidence: float) -> np.ndarray:
    """Percentile intervals (n_columns, 4 figures, 2) from :func:`scipy.stats.bootstrap` resampling answers."""
    n_columns = n_themes + 3
    if n_resamples <= 0 or len(hand) < 2:
        return np.full((n_columns, len(_FIGURES), 2), np.nan)
    from scipy.stats import bootstrap

    n = len(hand)

    def statistic(rows: np.ndarray, axis: int = -1) -> np.ndarray:
        batch = np.atleast_2d(rows)
        counts = np.zeros((batch.shape[0], n))  # how often each answer is drawn in each resample
        np.add.at(counts, (np.arange(batch.shape[0])[:, None], batch), 1.0)
        figures = _all_figures(counts * weights[None, :], hand, machine, n_themes)  # (B, 4, n_columns)
        out = np.moveaxis(figures, 0, -1).reshape(len(_FIGURES) * n_columns, -1)
        return out[:, 0] if rows.ndim == 1 else out

    with np.errstate(all="ignore"), _quiet():
        result = bootstrap((np.arange(n),), statistic, vectorized=True, n_resamples=n_resamples, batch=250,
                           method="percentile", confidence_level=confidence, rng=np.random.default_rng(seed))
    distribution = result.bootstrap_distribution.reshape(len(_FIGURES), n_columns, -1)
    alpha = (1 - confidence) / 2
    with _quiet():
        low = np.nanquantile(distribution, alpha, axis=-1)
        high = np.nanquantile(distribution, 1 - alpha, axis=-1)
    return np.stack([low.T, high.T], axis=-1)


# --------------------------------------------------------------------------- between people

def krippendorff_alpha_nominal(data: np.ndarray) -> float:
    """Krippendorff's alpha for nominal data.

    Parameters
    ----------
    data : array of shape (n_coders, n_units)
        Category codes (any numbers), NaN where a coder gave no value.

    Returns
    -------
    float
        ``1 - (n - 1) * sum_{c != k} o_ck / sum_{c != k} n_c n_k`` over the coincidence
        matrix ``o`` of the units with two or more values (Krippendorff 2011, "Computing
        Krippendorff's Alpha-Reliability"); NaN when there is no variation to judge.
    """
    data = np.asarray(data, dtype=float)
    values = np.unique(data[np.isfinite(data)])
    if len(values) == 0:
        return float("nan")
    counts = np.stack([(data == v).sum(axis=0) for v in values], axis=1).astype(float)  # (units, categories)
    paired = counts.sum(axis=1)
    counts, paired = counts[paired >= 2], paired[paired >= 2]
    if len(counts) == 0:
        return float("nan")
    scaled = counts / (paired - 1)[:, None]
    coincidence = counts.T @ scaled - np.diag(scaled.sum(axis=0))
    n_c = coincidence.sum(axis=1)
    n = n_c.sum()
    expected = n * n - (n_c**2).sum()
    if expected == 0:
        return float("nan")
    observed = n - np.trace(coincidence)
    return float(1 - (n - 1) * observed / expected)


def _units(hand: HandCodes) -> tuple[pd.DataFrame, np.ndarray]:
    """Answers (unique response_id, question, in first-seen order) and each row's unit index."""
    unit_keys = hand.keys[["response_id", "question"]]
    codes, uniques = pd.factorize(pd.MultiIndex.from_frame(unit_keys))
    return uniques.to_frame(index=False), codes


def coder_cube(hand: HandCodes) -> tuple[pd.DataFrame, list[str], np.ndarray]:
    """(units table, coders, array (n_coders, n_units, n_themes) with NaN where not coded)."""
    units, unit_index = _units(hand)
    coders = hand.coders
    coder_index = pd.Index(coders).get_indexer(hand.keys["coder"])
    cube = np.full((len(coders), len(units), len(hand.themes)), np.nan)
    cube[coder_index, unit_index] = hand.values
    return units, coders, cube


def between_coders(hand: HandCodes) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Agreement between the coders of ``hand``.

    Returns
    -------
    alpha : DataFrame (:data:`CODER_COLUMNS`)
        Per theme (and ``(no theme)``): units coded by two or more coders, coders, alpha.
    pairs : DataFrame (:data:`PAIR_COLUMNS`)
        Per theme and pair of coders: answers both coded, share agreeing, Cohen's kappa
        (scikit-learn), plus ``(all)`` pooling the pair's theme decisions.
    """
    from sklearn.metrics import cohen_kappa_score

    _, coders, cube = coder_cube(hand)
    none = np.where((cube == 1).any(axis=2), 0.0, np.where(np.isfinite(cube).all(axis=2), 1.0, np.nan))
    cube = np.concatenate([cube, none[:, :, None]], axis=2)
    themes = [*hand.themes, NO_THEME]
    alpha_rows = []
    for t, theme in enumerate(themes):
        slab = cube[:, :, t]
        alpha_rows.append({"theme": theme, "units": int((np.isfinite(slab).sum(axis=0) >= 2).sum()),
                           "coders": len(coders), "alpha": krippendorff_alpha_nominal(slab)})
    pair_rows = []
    for a, b in combinations(range(len(coders)), 2):
        for t, theme in enumerate([*themes, "(all)"]):
            x = cube[a, :, t] if theme != "(all)" else cube[a, :, : len(hand.themes)].ravel()
            y = cube[b, :, t] if theme != "(all)" else cube[b, :, : len(hand.themes)].ravel()
            both = np.isfinite(x) & np.isfinite(y)
            x, y = x[both], y[both]
            varied = len(np.unique(np.concatenate([x, y]))) > 1
            pair_rows.append({"theme": theme, "coder_a": coders[a], "coder_b": coders[b], "n": int(both.sum()),
                              "agreement": float((x == y).mean()) if len(x) else np.nan,
                              "kappa": float(cohen_kappa_score(x, y)) if varied else np.nan})
    return pd.DataFrame(alpha_rows, columns=CODER_COLUMNS), pd.DataFrame(pair_rows, columns=PAIR_COLUMNS)


def consensus(hand: HandCodes) -> HandCodes:
    """One row per answer: the majority of the coders who coded each cell (a tie is left uncoded).

    Weights and texts are taken from each answer's first row.
    """
    units, unit_index = _units(hand)
    _, _, cube = coder_cube(hand)
    ones = (cube == 1).sum(axis=0)
    zeros = (cube == 0).sum(axis=0)
    values = np.where(ones > zeros, 1.0, np.where(zeros > ones, 0.0, np.nan))
    first = pd.Series(np.arange(len(unit_index))).groupby(unit_index).first().to_numpy()
    keys = units.assign(coder="(consensus)")
    return HandCodes(keys=keys, values=values, themes=hand.themes, in_lexicon=hand.in_lexicon,
                     weights=hand.weights[first], texts=[hand.texts[i] for i in first], source=hand.source)


# --------------------------------------------------------------------------- against the machine

@dataclass(frozen=True, eq=False)
class MachineCodes:
    """The lexicon's codes for the hand-coded answers.

    ``matrix`` (n, n_lexicon_themes) 0/1; ``fired`` and ``nearly`` per answer, as
    ``theme: term`` lists joined by ``"; "`` (terms that counted, and terms that
    matched but were dropped by negation or an exclusion).
    """

    matrix: np.ndarray
    fired: list[str]
    nearly: list[str] = field(default_factory=list)


def code_for_agreement(texts: Sequence[str | None], lexicon: Lexicon) -> MachineCodes:
    """Code ``texts`` with ``lexicon``; also list the terms that nearly fired.

    "Nearly" is found by coding again with every theme counting negated matches and
    no exclusions, and keeping the matches the real run did not count.
    """
    import dataclasses

    from .coder import ThemeCoder

    texts = [t if isinstance(t, str) else None for t in texts]
    result = ThemeCoder(lexicon).fit(texts).code(texts)
    relaxed_themes = tuple(dataclasses.replace(t, negated="keep", exclusions=()) for t in lexicon.themes)
    relaxed = dataclasses.replace(lexicon, themes=relaxed_themes)
    loose = ThemeCoder(relaxed).fit(texts).code(texts)
    keep = ["document", "theme", "term", "start"]
    merged = loose.evidence[keep].merge(result.evidence[keep], how="left", indicator=True, on=keep)
    nearly = merged[merged["_merge"] == "left_only"]
    return MachineCodes(matrix=result.matrix.toarray().astype(np.int8),
                        fired=terms_by_answer(result.evidence, len(texts)),
                        nearly=terms_by_answer(nearly, len(texts)))


def disagreement_table(hand: HandCodes, machine: MachineCodes, texts: Sequence[str | None]) -> pd.DataFrame:
    """One row per answer where a coded hand cell differs from the machine (:data:`DISAGREEMENT_COLUMNS`).

    Answers are named by ``response_id`` and ``question``; ``text`` is redacted.
    """
    full = _machine_full(hand, machine.matrix)
    names = np.asarray(hand.themes, dtype=object)
    coded = np.isfinite(hand.values)
    differs = coded & (hand.values != full)
    rows = np.flatnonzero(differs.any(axis=1))
    shown = redact_all([texts[r] for r in rows])
    frame = pd.DataFrame({
        "response_id": hand.keys["response_id"].to_numpy()[rows],
        "question": hand.keys["question"].to_numpy()[rows],
        "text": shown,
        "hand": [";".join(names[hand.values[r] == 1]) for r in rows],
        "machine": [";".join(names[full[r] == 1]) for r in rows],
        "missed": [";".join(names[(hand.values[r] == 1) & (full[r] == 0)]) for r in rows],
        "extra": [";".join(names[(hand.values[r] == 0) & (full[r] == 1)]) for r in rows],
        "terms_fired": [machine.fired[r] for r in rows],
        "terms_nearly": [machine.nearly[r] if machine.nearly else "" for r in rows],
    })
    return frame[DISAGREEMENT_COLUMNS]


def _machine_full(hand: HandCodes, matrix: np.ndarray) -> np.ndarray:
    """Machine matrix widened to the hand themes (themes the lexicon lacks are 0)."""
    full = np.zeros(hand.values.shape, dtype=np.int8)
    n_lexicon = int(sum(hand.in_lexicon))
    full[:, :n_lexicon] = matrix
    return full


@dataclass(frozen=True, eq=False)
class AgreementReport:
    """Everything ``textkit agreement`` writes.

    ``table`` (:data:`AGREEMENT_COLUMNS`, machine against the hand codes or their
    consensus), ``disagreements``, and for several coders ``alpha`` and ``pairs``
    (else empty frames). ``coders`` lists the coders; ``notes`` what the user should know.
    """

    table: pd.DataFrame
    disagreements: pd.DataFrame
    alpha: pd.DataFrame
    pairs: pd.DataFrame
    coders: list[str]
    notes: list[str]


def evaluate_hand_codes(hand: HandCodes, lexicon: Lexicon, *, texts: Sequence[str | None] | None = None,
                        n_resamples: int = 1000, seed: int = 0) -> AgreementReport:
    """Score the lexicon against ``hand`` (its consensus when several people coded), and the people against each other.

    ``texts`` (one per row of ``hand``) default to the texts in the sheet.
    """
    notes = []
    coders = hand.coders
    alpha = pd.DataFrame(columns=CODER_COLUMNS)
    pairs = pd.DataFrame(columns=PAIR_COLUMNS)
    scored = hand
    row_texts = list(texts) if texts is not None else list(hand.texts)
    if len(coders) > 1:
        alpha, pairs = between_coders(hand)
        scored = consensus(hand)
        first = pd.Series(np.arange(len(hand.keys))).groupby(_units(hand)[1]).first().to_numpy()
        row_texts = [row_texts[i] for i in first]
        notes.append(f"{len(coders)} coders ({', '.join(coders)}): the machine is scored against their majority "
                     "(ties left out)")
    mixed = int((np.isnan(scored.values[:, : sum(scored.in_lexicon)]).any(axis=1)
                 & (scored.values == 1).any(axis=1)).sum())
    if mixed:
        notes.append(f"{mixed} answers have a 1 and blank theme cells: blanks are 'not coded' and left out "
                     "(fill 0 where a theme does not apply)")
    machine = code_for_agreement(row_texts, lexicon)
    table = agreement_table(scored.values, _machine_full(scored, machine.matrix), scored.themes, scored.in_lexicon,
                            weights=scored.weights, n_resamples=n_resamples, seed=seed)
    if not np.allclose(scored.weights, 1):
        notes.append("sample weights applied: the figures estimate agreement in the population sampled")
    return AgreementReport(table=table, disagreements=disagreement_table(scored, machine, row_texts),
                           alpha=alpha, pairs=pairs, coders=coders, notes=notes)


def compare_with_hand_codes(texts: Sequence[str | None], hand_codes: Sequence[str | None],
                            lexicon: Lexicon, *, source: str = "hand codes",
                            n_resamples: int = 0, seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Code ``texts`` with ``lexicon`` and compare with ``hand_codes`` (theme ids joined by ``;``).

    Rows are named by their 1-based position (``response_id``) in the result.

    Returns
    -------
    table : DataFrame (:func:`agreement_table`)
    disagreements : DataFrame (:data:`DISAGREEMENT_COLUMNS`)
    """
    frame = pd.DataFrame({"response_id": [str(i + 1) for i in range(len(texts))], "question": "answer",
                          "text": list(texts), "themes": list(hand_codes)})
    hand = long_hand_codes(frame, lexicon, source)
    report = evaluate_hand_codes(hand, lexicon, n_resamples=n_resamples, seed=seed)
    return report.table, report.disagreements
