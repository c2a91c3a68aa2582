"""Agreement between hand codes and machine codes.

Before reporting, a researcher codes a sample of answers by hand and checks
the lexicon against it. Per theme we report precision (share of machine
codes the coder agrees with), recall (share of hand codes the machine
found), F1 and Cohen's kappa (agreement beyond chance on the yes/no
decision), computed with scikit-learn. Hand codes name the most specific
theme; parents are implied, so both sides are rolled up the lexicon's
hierarchy before comparing. Hand codes for themes the lexicon lacks (an
emerging topic) are kept as rows with recall 0, so gaps show.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..errors import InputError
from ..text.redact import redact_all
from .lexicon import Lexicon

#: Columns of the agreement table.
AGREEMENT_COLUMNS = ["theme", "in_lexicon", "hand", "machine", "both", "precision", "recall", "f1",
                     "kappa"]


def codes_to_matrix(codes: Sequence[str | None], themes: Sequence[str], *, separator: str = ";",
                    source: str = "hand codes", lexicon: Lexicon | None = None) -> np.ndarray:
    """Turn code lists like ``"toilets;staff"`` into a 0/1 matrix.

    Parameters
    ----------
    codes : sequence of str or None, length n
        Theme ids joined by ``separator``; empty or None for no theme.
    themes : sequence of str, length k
        Column order; every id used in ``codes`` must be among them.
    lexicon : Lexicon, optional
        Roll codes up to their ancestors.

    Returns
    -------
    ndarray of shape (n, k), int8
    """
    position = {theme: column for column, theme in enumerate(themes)}
    matrix = np.zeros((len(codes), len(themes)), dtype=np.int8)
    for row, value in enumerate(codes):
        if not isinstance(value, str) or not value.strip():
            continue
        for code in (part.strip() for part in value.split(separator)):
            if not code:
                continue
            if code not in position:
                raise InputError(f"unknown theme id '{code}' in the hand codes; known ids: "
                                 f"{', '.join(themes)}", source=source, row=row + 1, column="themes")
            matrix[row, position[code]] = 1
            if lexicon is not None and code in lexicon.ids:
                for ancestor in lexicon.ancestors(code):
                    matrix[row, position[ancestor]] = 1
    return matrix


def agreement_table(hand: np.ndarray, machine: np.ndarray, themes: Sequence[str],
                    in_lexicon: Sequence[bool] | None = None) -> pd.DataFrame:
    """Per-theme agreement of machine codes with hand codes, plus a micro-average row.

    Parameters
    ----------
    hand, machine : array of shape (n, k), 0/1
    themes : sequence of str, length k
    in_lexicon : sequence of bool, length k, optional

    Returns
    -------
    DataFrame with :data:`AGREEMENT_COLUMNS`; the last row, theme ``(all)``,
    pools every theme decision (micro average). Undefined ratios (no hand or
    no machine codes) are NaN.
    """
    from sklearn.metrics import cohen_kappa_score, precision_recall_fscore_support

    hand = np.asarray(hand, dtype=np.int8)
    machine = np.asarray(machine, dtype=np.int8)
    if hand.shape != machine.shape:
        raise ValueError(f"hand codes {hand.shape} and machine codes {machine.shape} differ in shape")
    in_lexicon = list(in_lexicon) if in_lexicon is not None else [True] * len(themes)
    scores = np.array([precision_recall_fscore_support(hand[:, c], machine[:, c], average="binary",
                                                       zero_division=np.nan)[:3]
                       for c in range(hand.shape[1])], dtype=float).reshape(-1, 3)
    precision, recall, f1 = scores.T
    both = (hand & machine).sum(axis=0)
    kappa = []
    for column in range(hand.shape[1]):
        same = hand[:, column].min() == hand[:, column].max() == machine[:, column].min() \
            == machine[:, column].max()
        kappa.append(np.nan if same else cohen_kappa_score(hand[:, column], machine[:, column]))
    table = pd.DataFrame({
        "theme": list(themes), "in_lexicon": in_lexicon, "hand": hand.sum(axis=0),
        "machine": machine.sum(axis=0), "both": both, "precision": precision, "recall": recall,
        "f1": f1, "kappa": kappa,
    })
    micro_p, micro_r, micro_f, _ = precision_recall_fscore_support(hand.ravel(), machine.ravel(),
                                                                   average="binary", zero_division=np.nan)
    total = pd.DataFrame([{
        "theme": "(all)", "in_lexicon": all(in_lexicon), "hand": int(hand.sum()),
        "machine": int(machine.sum()), "both": int(both.sum()), "precision": micro_p,
        "recall": micro_r, "f1": micro_f, "kappa": cohen_kappa_score(hand.ravel(), machine.ravel()),
    }])
    return pd.concat([table, total], ignore_index=True)[AGREEMENT_COLUMNS]


def compare_with_hand_codes(texts: Sequence[str | None], hand_codes: Sequence[str | None],
                            lexicon: Lexicon, *, source: str = "hand codes", redact_names: Sequence[str] = ()
                            ) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Code ``texts`` with ``lexicon`` and compare with ``hand_codes``.

    Returns
    -------
    table : DataFrame
        :func:`agreement_table` over the lexicon's themes and any extra hand-code ids.
    disagreements : DataFrame
        One row per answer where the two differ: ``row``, ``text`` (redacted:
        contact details and ``redact_names`` removed), ``hand``, ``machine``,
        ``missed`` (hand only), ``extra`` (machine only).
    """
    from .coder import ThemeCoder

    extra_ids = sorted({code.strip() for value in hand_codes if isinstance(value, str)
                        for code in value.split(";") if code.strip() and code.strip() not in lexicon.ids})
    themes = list(lexicon.ids) + extra_ids
    hand = codes_to_matrix(hand_codes, themes, source=source, lexicon=lexicon)
    texts = [t if isinstance(t, str) else None for t in texts]
    coded = ThemeCoder(lexicon).fit(texts).transform(texts).toarray()
    machine = np.zeros_like(hand)
    machine[:, : len(lexicon.ids)] = coded
    table = agreement_table(hand, machine, themes, [t in lexicon.ids for t in themes])
    names = np.asarray(themes, dtype=object)
    rows = np.flatnonzero((hand != machine).any(axis=1))
    disagreements = pd.DataFrame({
        "row": rows + 1,
        "text": redact_all([texts[r] for r in rows], redact_names),
        "hand": [";".join(names[hand[r] == 1]) for r in rows],
        "machine": [";".join(names[machine[r] == 1]) for r in rows],
        "missed": [";".join(names[(hand[r] == 1) & (machine[r] == 0)]) for r in rows],
        "extra": [";".join(names[(hand[r] == 0) & (machine[r] == 1)]) for r in rows],
    })
    return table, disagreements
