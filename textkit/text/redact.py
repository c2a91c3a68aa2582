"""Redaction: contact details and identifiers removed before answer text is shown.

Every output that carries answer text passes through :func:`redact` (or
:func:`redact_all` over many texts).
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
#: Placeholders written in place of redacted text.
REDACTION_LABELS = {"email": "[email]", "url": "[link]", "phone": "[phone]", "number": "[number]"}


def _phone_label(match: re.Match) -> str:
    found = match.group()
    return found if _TIME_RANGE.fullmatch(found) else REDACTION_LABELS["phone"]


def redact(text: str, names: Iterable[str] = ()) -> str:
    """Replace contact details and identifiers in ``text`` before it is shown.

    Removes e-mail addresses, web links, phone numbers, long digit runs such
    as booking references (6+ digits, optionally with a short letter prefix),
    and any of the given ``names`` (whole words, case-insensitive). This is a
    safety net, not a guarantee: read quotes before publishing them.
    """
    if not isinstance(text, str):
        return text
    text = _EMAIL.sub(REDACTION_LABELS["email"], text)
    text = _URL.sub(REDACTION_LABELS["url"], text)
    text = _PHONE.sub(_phone_label, text)
    text = _DIGIT_RUN.sub(REDACTION_LABELS["number"], text)
    words = [re.escape(name) for name in names if name and name.strip()]
    if words:
        text = re.sub(r"\b(?:" + "|".join(words) + r")\b", "[name]", text, flags=re.IGNORECASE)
    return text


_MAY_NEED_REDACTION = re.compile(r"[@.\d]")


def redact_all(texts: Sequence[str | None]) -> list[str | None]:
    """:func:`redact` over many texts; only texts that can hold a contact detail are scanned.

    Every pattern :func:`redact` removes needs an "@", a "." or a digit, so
    the other texts (most short evidence spans) are returned as they are.
    """
    search = _MAY_NEED_REDACTION.search
    return [redact(text) if isinstance(text, str) and search(text) else text for text in texts]
