"""Redaction: contact details, identifiers and names removed before answer text is shown.

Every output that carries answer text (evidence, disagreements, lexicon-check
examples, suggestions, quotes) passes through :func:`redact` or
:func:`redact_all`. What is caught:

* e-mail addresses, web links, phone numbers (7+ digits with the usual
  separators; opening-hours ranges such as "9.30-17.00" are left alone), long
  digit runs such as booking references (6+ digits, optional letter prefix);
* postcodes of common formats: UK ("SW1A 1AA"), Canada ("K1A 0B1"), the
  Netherlands ("1012 AB"), and US ZIP+4 ("12345-6789");
* street addresses with a house number ("12 Harbour Road", "4b Mill Lane");
* a title followed by a capitalised word ("Mrs Jones", "Dr. Okafor");
* the names listed in the survey config (``redact_names``), whole words, any case.

What cannot be caught: names without a title that are not listed, bare
four- or five-digit postcodes (indistinguishable from prices or years),
addresses without a house number or street word, and details spelled out in
words. Redaction is a safety net: read quotes before publishing them.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence

_EMAIL = re.compile(r"[\w.+-]+@[\w-]+(?:\.[\w-]+)+")
_URL = re.compile(r"(?:https?://|www\.)\S+|\b[\w-]+(?:\.[\w-]+)*\.(?:com|net|org|info|io|co|uk|de|fr|nl|eu)(?:/\S*)?\b",
                  re.IGNORECASE)
_PHONE = re.compile(r"(?<![\w])(?:\+|00)?\d[\d ()./-]{6,}\d(?![\w])")
#: Opening-hours ranges ("9.30-17.00") have a phone number's shape but are not one.
_TIME_RANGE = re.compile(r"(?:[01]?\d|2[0-4])[.:][0-5]\d ?- ?(?:[01]?\d|2[0-4])[.:][0-5]\d")
_DIGIT_RUN = re.compile(r"\b[A-Z]{0,4}\d{6,}[A-Z]{0,4}\b", re.IGNORECASE)
_POSTCODE = re.compile(
    r"\b(?:[A-Z]{1,2}\d[A-Z\d]? ?\d[A-Z]{2}"  # UK
    r"|[A-Z]\d[A-Z] ?\d[A-Z]\d"  # Canada
    r"|\d{4} ?[A-Z]{2}"  # the Netherlands
    r"|\d{5}-\d{4})\b")  # US ZIP+4
_STREET_WORDS = ("Street|St|Road|Rd|Lane|Ln|Avenue|Ave|Drive|Dr|Close|Court|Ct|Crescent|Place|Pl|Way|"
                 "Terrace|Gardens|Square|Sq|Hill|Row|Boulevard|Blvd|Parade|Walk|Mews|Grove|Quay|Strasse|"
                 "Straße|Weg|Rue|Calle|Via")
_ADDRESS = re.compile(rf"\b\d{{1,4}}[A-Za-z]?,? (?:[A-Z][\w'-]* ){{0,3}}(?:{_STREET_WORDS})\b\.?")
_TITLES = "Mr|Mrs|Ms|Miss|Mx|Dr|Prof|Sir|Dame|Lady|Lord|Rev|Capt|Herr|Frau|Mme|Mlle|Monsieur|Madame"
_TITLED_NAME = re.compile(rf"\b(?:{_TITLES})\.? (?:[A-Z][\w'-]+)(?: [A-Z][\w'-]+)?")
#: Placeholders written in place of redacted text.
REDACTION_LABELS = {"email": "[email]", "url": "[link]", "phone": "[phone]", "number": "[number]",
                    "postcode": "[postcode]", "address": "[address]", "name": "[name]"}
#: Text that may need redaction has one of these (names listed in the config aside).
_MAY_NEED_REDACTION = re.compile(rf"[@.\d]|\b(?:{_TITLES})\b")


def _phone_label(match: re.Match) -> str:
    found = match.group()
    return found if _TIME_RANGE.fullmatch(found) else REDACTION_LABELS["phone"]


def _names_pattern(names: Iterable[str]) -> re.Pattern | None:
    words = sorted({name.strip() for name in names if name and name.strip()}, key=len, reverse=True)
    if not words:
        return None
    return re.compile(r"(?<!\w)(?:" + "|".join(map(re.escape, words)) + r")(?!\w)", re.IGNORECASE)


def _redact(text: str, names: re.Pattern | None) -> str:
    text = _EMAIL.sub(REDACTION_LABELS["email"], text)
    text = _URL.sub(REDACTION_LABELS["url"], text)
    text = _ADDRESS.sub(REDACTION_LABELS["address"], text)
    text = _POSTCODE.sub(REDACTION_LABELS["postcode"], text)
    text = _PHONE.sub(_phone_label, text)
    text = _DIGIT_RUN.sub(REDACTION_LABELS["number"], text)
    text = _TITLED_NAME.sub(REDACTION_LABELS["name"], text)
    if names is not None:
        text = names.sub(REDACTION_LABELS["name"], text)
    return text


def redact(text: str, names: Iterable[str] = ()) -> str:
    """``text`` with contact details, identifiers and ``names`` replaced by placeholders.

    See the module docstring for what is caught and what cannot be.
    """
    if not isinstance(text, str):
        return text
    return _redact(text, _names_pattern(names))


def redact_all(texts: Sequence[str | None], names: Iterable[str] = ()) -> list[str | None]:
    """:func:`redact` over many texts (non-strings are returned as they are).

    Only texts that can hold something to redact are scanned: every pattern
    needs an "@", a ".", a digit or a title, unless ``names`` are given.
    """
    pattern = _names_pattern(names)
    search = _MAY_NEED_REDACTION.search
    return [_redact(text, pattern) if isinstance(text, str) and (pattern is not None or search(text))
            else text for text in texts]
