"""Drawing answers for hand-coding: seeded, stratified, optionally enriched, with the weights to undo it.

Only answered answers are drawn. Cells are the combinations of the ``strata``
columns (say wave and market); the sample is shared out over cells in proportion
to their size (largest remainders), and drawn at random within each cell. With
``enrich = f``, a share ``f`` of the sample comes from the answers a lexicon is most
likely to get wrong - those it left uncoded and those whose codes rest on a single
matching term - and the rest from the other answers. Each drawn answer carries
``sample_weight``, the inverse of its chance of selection (cell size / cell draws),
so agreement figures can be re-weighted to the population (``textkit agreement``
does this), and ``selection`` names its cell.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..errors import AnalysisError
from ..text.redact import redact_all

#: Columns of the hand-coding sheet before and after the theme columns.
LEAD_COLUMNS = ["response_id", "question"]
TAIL_COLUMNS = ["none_applies", "note", "sample_weight", "selection"]


def allocate(sizes: np.ndarray, n: int) -> np.ndarray:
    """Share ``n`` draws over cells of ``sizes`` in proportion (largest remainders, ties to the earlier cell),
    never more than a cell holds."""
    sizes = np.asarray(sizes, dtype=np.int64)
    n = int(min(n, sizes.sum()))
    if n == 0 or sizes.sum() == 0:
        return np.zeros(len(sizes), dtype=np.int64)
    quota = sizes * n / sizes.sum()
    counts = np.minimum(np.floor(quota).astype(np.int64), sizes)
    while counts.sum() < n:
        room = counts < sizes
        remainder = np.where(room, quota - counts, -np.inf)
        order = np.argsort(-remainder, kind="stable")[: n - counts.sum()]
        order = order[room[order]]
        counts[order] += 1
    return counts


def single_term_answers(evidence: pd.DataFrame, n_answers: int) -> np.ndarray:
    """Answers whose counted matches all come from one term, shape (n_answers,), bool."""
    pairs = evidence[["document", "term"]].drop_duplicates()
    distinct = np.bincount(pairs["document"].to_numpy(dtype=np.int64), minlength=n_answers)
    return distinct == 1


def draw_sample(coded: pd.DataFrame, texts: Sequence[str | None], themes: Sequence[str], evidence: pd.DataFrame, *,
                n: int, seed: int, strata: Sequence[str] = (), enrich: float = 0.0,
                coders: Sequence[str] = ()) -> tuple[pd.DataFrame, dict]:
    """Draw ``n`` answered answers for hand-coding.

    Parameters
    ----------
    coded : DataFrame of shape (n_rows, ...)
        The coded table; ``texts`` and ``evidence`` (``document`` = row) align with it.
    themes : sequence of str
        Empty 0/1 columns to add, one per theme.
    n : int
        Answers to draw (fewer if fewer were answered).
    seed : int
    strata : sequence of str
        Columns whose combinations are sampled in proportion.
    enrich : float in [0, 1)
        Share of the sample drawn from the uncoded and single-term answers.
    coders : sequence of str
        When given, every answer is repeated once per coder with ``coder`` filled in.

    Returns
    -------
    sheet : DataFrame
        ``response_id, question``, the strata columns, ``text`` (redacted), ``coder``, one
        empty column per theme, ``none_applies``, ``note``, ``sample_weight``, ``selection``.
    design : dict
        What was drawn: per cell its size, draws and weight; the enrichment share.
    """
    if not 0 <= enrich < 1:
        raise AnalysisError(f"the enrichment share must be at least 0 and below 1, found {enrich}",
                            option="--enrich")
    if n <= 0:
        raise AnalysisError(f"the sample size must be positive, found {n}", option="--n")
    for column in strata:
        if column not in coded.columns:
            raise AnalysisError(f"no column '{column}' to stratify by; use the wave or a group the survey "
                                "config names", column=column)
    answered = coded["answered"].to_numpy(dtype=bool)
    pool = np.zeros(len(coded), dtype=bool)
    if enrich > 0:
        pool = (coded["uncoded"].to_numpy(dtype=bool) | single_term_answers(evidence, len(coded))) & answered
    cell_columns = [coded[c].astype(str) for c in strata] + [pd.Series(np.where(pool, "enriched", "main"))]
    labels = pd.Series([" / ".join(parts) for parts in zip(*[c.to_numpy() for c in cell_columns], strict=True)])
    rows = np.flatnonzero(answered)
    cells, cell_of_row = np.unique(labels.to_numpy()[rows], return_inverse=True)
    sizes = np.bincount(cell_of_row, minlength=len(cells))
    in_pool = np.array([label.endswith("enriched") for label in cells])
    n_pool = int(round(enrich * n)) if enrich > 0 else 0
    draws = np.zeros(len(cells), dtype=np.int64)
    draws[in_pool] = allocate(sizes[in_pool], n_pool)
    draws[~in_pool] = allocate(sizes[~in_pool], n - int(draws[in_pool].sum()))
    # too few answers outside the pool (or in it): take the rest from the other side
    draws[in_pool] += allocate(sizes[in_pool] - draws[in_pool], n - int(draws.sum()))
    draws[~in_pool] += allocate(sizes[~in_pool] - draws[~in_pool], n - int(draws.sum()))
    rng = np.random.default_rng(seed)
    chosen = []
    for cell in range(len(cells)):  # one draw per cell (a few dozen), not per answer
        members = rows[cell_of_row == cell]
        chosen.append(rng.choice(members, size=int(draws[cell]), replace=False))
    picked = np.sort(np.concatenate(chosen)) if chosen else np.array([], dtype=np.int64)
    weight_of_cell = np.where(draws > 0, sizes / np.maximum(draws, 1), np.nan)
    picked_cell = cell_of_row[np.searchsorted(rows, picked)]
    sheet = coded.iloc[picked][[*LEAD_COLUMNS, *[c for c in strata if c not in LEAD_COLUMNS]]].reset_index(drop=True)
    sheet["response_id"] = sheet["response_id"].astype(str)
    sheet["text"] = redact_all([texts[i] for i in picked])
    sheet["coder"] = None
    for theme in themes:
        sheet[theme] = None
    for column in TAIL_COLUMNS[:2]:
        sheet[column] = None
    sheet["sample_weight"] = weight_of_cell[picked_cell]
    sheet["selection"] = cells[picked_cell]
    if coders:
        sheet = sheet.loc[np.repeat(sheet.index.to_numpy(), len(coders))].reset_index(drop=True)
        sheet["coder"] = np.tile(np.asarray(coders, dtype=object), len(picked))
    design = {"n": int(len(picked)), "seed": seed, "strata": list(strata), "enrich": enrich,
              "coders": list(coders),
              "cells": [{"cell": str(c), "answers": int(s), "drawn": int(d), "sample_weight": float(w)}
                        for c, s, d, w in zip(cells, sizes, draws, np.nan_to_num(weight_of_cell), strict=True)]}
    return sheet, design
