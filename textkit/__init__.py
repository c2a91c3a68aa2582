"""textkit: code, count and compare the free-text answers of visitor surveys.

Pipeline: read survey -> normalise and tokenise -> code with the theme lexicon
-> topics on the rest -> weighted prevalence, comparisons, keyness -> charts,
quotes, report. Each stage is a module; the public names are re-exported here
lazily so that ``import textkit`` stays fast.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

_EXPORTS = {
    "TextkitError": "errors", "InputError": "errors", "LexiconError": "errors",
    "DesignError": "errors", "AnalysisError": "errors",
    "tokenize": "text", "tokenize_corpus": "text", "normalise": "text", "redact": "text",
    "TokenStream": "text",
    "SurveyConfig": "config", "load_config": "config", "config_from_mapping": "config",
    "read_table": "readers", "read_survey": "readers", "SurveyData": "readers", "answered_mask": "readers",
    "Lexicon": "lexicon", "Theme": "lexicon", "Term": "lexicon", "load_lexicon": "lexicon",
    "parse_lexicon": "lexicon", "lint_lexicon": "lexicon",
    "ThemeCoder": "coding", "CodingResult": "coding",
    "code_survey": "pipeline", "write_coded": "pipeline", "load_coded": "pipeline", "CodedSurvey": "pipeline",
    "compare_with_hand_codes": "agreement", "agreement_table": "agreement",
    "SurveyDesign": "design",
    "analyse": "estimate", "prevalence": "estimate", "compare_groups": "estimate", "compare_waves": "estimate",
    "group_tests": "estimate", "ReliabilityRule": "estimate", "NCHS_LIKE": "estimate",
    "keyness": "keyness", "document_term_matrix": "ngrams",
}


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'textkit' has no attribute {name!r}")
    return getattr(importlib.import_module(f".{module}", __name__), name)


def __dir__() -> list[str]:
    return sorted(list(globals()) + list(_EXPORTS))
