"""textkit: code, count and compare the free-text answers of visitor surveys.

Pipeline: read survey -> normalise and tokenise -> code with the theme lexicon
-> topics on the rest -> weighted prevalence, comparisons, keyness -> charts,
quotes, report. Each stage is a subpackage (``io``, ``text``, ``coding``,
``discover``, ``stats``, ``present``) and ``pipeline`` strings them together;
the public names are re-exported here lazily so that ``import textkit`` stays fast.
"""

from __future__ import annotations

from ._lazy import lazy_exports

__version__ = "0.1.0"

_EXPORTS = {
    "TextkitError": "errors", "InputError": "errors", "LexiconError": "errors",
    "DesignError": "errors", "AnalysisError": "errors",
    "tokenize": "text.tokens", "tokenize_corpus": "text.tokens", "normalise": "text.tokens",
    "redact": "text.redact", "TokenStream": "text.tokens",
    "SurveyConfig": "io.config", "load_config": "io.config", "config_from_mapping": "io.config",
    "read_table": "io.readers", "read_survey": "io.readers", "SurveyData": "io.readers",
    "answered_mask": "io.readers",
    "Lexicon": "coding.lexicon", "Theme": "coding.lexicon", "Term": "coding.lexicon",
    "load_lexicon": "coding.lexicon", "parse_lexicon": "coding.lexicon", "lint_lexicon": "coding.lint",
    "ThemeCoder": "coding.coder", "CodingResult": "coding.coder",
    "code_survey": "pipeline", "write_coded": "pipeline", "load_coded": "pipeline", "CodedSurvey": "pipeline",
    "compare_with_hand_codes": "coding.agreement", "agreement_table": "coding.agreement",
    "evaluate_hand_codes": "coding.agreement", "krippendorff_alpha_nominal": "coding.agreement",
    "review_table": "coding.review", "draw_sample": "coding.sampling", "lexicon_diff": "coding.lexicon_diff",
    "SurveyDesign": "stats.design", "crosstab": "stats.crosstab",
    "analyse": "stats.estimate", "prevalence": "stats.estimate", "compare_groups": "stats.estimate",
    "compare_waves": "stats.estimate", "group_tests": "stats.estimate", "ReliabilityRule": "stats.estimate",
    "BASE_WIDTH_RULE": "stats.estimate", "NCHS_LIKE": "stats.rules",
    "keyness": "discover.keyness", "document_term_matrix": "text.ngrams",
    "LearnedCoder": "coding.learned", "repair_lexicon": "coding.repair", "rogan_gladen": "stats.misclassification",
    "train_coder": "pipeline", "code_survey_with_coder": "pipeline",
}

__getattr__, __dir__ = lazy_exports(__name__, _EXPORTS)
