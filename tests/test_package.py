"""The package's public surface: names, lazy imports and the stage subpackages."""

from __future__ import annotations

import importlib
import subprocess
import sys

import pytest

import textkit

#: Every name ``from textkit import ...`` offered before the move into stage subpackages.
PUBLIC_NAMES = [
    "TextkitError", "InputError", "LexiconError", "DesignError", "AnalysisError",
    "tokenize", "tokenize_corpus", "normalise", "redact", "TokenStream",
    "SurveyConfig", "load_config", "config_from_mapping",
    "read_table", "read_survey", "SurveyData", "answered_mask",
    "Lexicon", "Theme", "Term", "load_lexicon", "parse_lexicon", "lint_lexicon",
    "ThemeCoder", "CodingResult",
    "code_survey", "write_coded", "load_coded", "CodedSurvey",
    "compare_with_hand_codes", "agreement_table",
    "SurveyDesign",
    "analyse", "prevalence", "compare_groups", "compare_waves", "group_tests", "ReliabilityRule", "NCHS_LIKE",
    "keyness", "document_term_matrix",
]

STAGES = ["io", "text", "coding", "discover", "stats", "present", "cli"]


@pytest.mark.parametrize("name", PUBLIC_NAMES)
def test_every_public_name_is_importable_from_the_top(name):
    assert getattr(textkit, name) is not None
    assert name in dir(textkit)


def test_keyness_stays_the_function_after_its_module_is_imported():
    importlib.import_module("textkit.discover.keyness")
    assert callable(textkit.keyness)
    assert not isinstance(textkit.keyness, type(sys))
    assert textkit.keyness is importlib.import_module("textkit.discover.keyness").keyness


@pytest.mark.parametrize("stage", STAGES)
def test_each_stage_says_what_it_takes_and_gives(stage):
    module = importlib.import_module(f"textkit.{stage}")
    assert module.__doc__ and len(module.__doc__.split()) >= 20


@pytest.mark.parametrize("stage", ["io", "text", "coding", "discover", "stats"])
def test_each_stage_reexports_resolve(stage):
    module = importlib.import_module(f"textkit.{stage}")
    exported = [name for name in dir(module) if not name.startswith("_")]
    assert exported
    for name in exported:
        assert getattr(module, name) is not None, name


def test_unknown_name_raises_attribute_error():
    with pytest.raises(AttributeError, match="no attribute 'not_a_name'"):
        textkit.not_a_name  # noqa: B018


def test_import_textkit_and_help_stay_light():
    probe = ("import sys, time; t = time.perf_counter(); import textkit, textkit.cli; "
             "from textkit.cli import main; "
             "heavy = [m for m in ('pandas', 'numpy', 'scipy', 'sklearn', 'nltk', 'matplotlib') if m in sys.modules]; "
             "print(','.join(heavy))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True).stdout.strip()
    assert out == ""


def test_the_renamed_default_rule_keeps_its_old_name():
    assert textkit.NCHS_LIKE is textkit.BASE_WIDTH_RULE

