"""Discovery: what sets a group apart, and what the lexicon misses.

Takes a sparse document-term matrix with group labels (and the theme
matrix); gives tidy keyness tables (log-odds with an informative Dirichlet
prior, G², Log Ratio, BH q-values) and draft lexicon suggestions. Imports
:mod:`textkit.text` and :mod:`textkit.errors`.

The keyness function itself is ``textkit.keyness`` (or
``textkit.discover.keyness.keyness``); ``textkit.discover.keyness`` is its module.
"""

from .._lazy import lazy_exports

__getattr__, __dir__ = lazy_exports(__name__, {
    "compare": "keyness", "log_odds_dirichlet": "keyness", "g_squared": "keyness", "log_ratio": "keyness",
    "suggest_terms": "suggest", "render_suggestions_yaml": "suggest",
})
