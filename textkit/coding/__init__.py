"""Coding: the theme lexicon, the coder, and agreement with hand codes.

Takes a lexicon file and a :class:`~textkit.text.TokenStream`; gives a parsed
:class:`Lexicon` (every problem with its line), a lint table, the sparse
``(n_answers, n_themes)`` 0/1 theme matrix with its evidence, and precision,
recall, F1 and kappa against hand codes; and the word forms each term matches
through inflection. Imports :mod:`textkit.text` and
:mod:`textkit.errors`.
"""

from .._lazy import lazy_exports

__getattr__, __dir__ = lazy_exports(__name__, {
    "Lexicon": "lexicon", "Theme": "lexicon", "Term": "lexicon", "load_lexicon": "lexicon",
    "parse_lexicon": "lexicon", "lint_lexicon": "lint", "format_lint": "lint", "inflected_forms": "forms",
    "ThemeCoder": "coder", "CodingResult": "coder",
    "compare_with_hand_codes": "agreement", "agreement_table": "agreement",
    "evaluate_hand_codes": "agreement", "krippendorff_alpha_nominal": "agreement",
    "hand_codes_from_frame": "handcodes", "HandCodes": "handcodes",
    "apply_corrections": "corrections", "corrections_from_frame": "corrections",
    "review_table": "review", "select_for_review": "review", "draw_sample": "sampling",
    "lexicon_diff": "lexicon_diff", "LearnedCoder": "learned", "repair_lexicon": "repair",
})
