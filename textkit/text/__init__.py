"""Text: normalise, tokenise once, redact, and build n-gram matrices.

Takes answer strings; gives a :class:`TokenStream` (integer codes, the sorted
vocabulary, per-document offsets and character spans), sparse document-term
matrices of 1-3 word phrases, redacted copies of text for display, and (with the
optional ``semantic`` extra) sentence embeddings.
Imports only :mod:`textkit.errors`.
"""

from .._lazy import lazy_exports

__getattr__, __dir__ = lazy_exports(__name__, {
    "normalise": "tokens", "tokenize": "tokens", "tokenize_corpus": "tokens", "TokenStream": "tokens",
    "default_stop_words": "tokens", "redact": "redact", "redact_all": "redact",
    "document_term_matrix": "ngrams", "embed_texts": "embeddings",
})
