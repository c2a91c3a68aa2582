"""Theme lexicon: the file format, a parser with line-numbered errors, lint, content hash.

A lexicon is a YAML file that a researcher edits by hand (``lexicons/README.md``
is the guide). It lists *themes*; each theme has *terms* that raise it and
*exclusions* that veto a misleading hit::

    lexicon: visitor-experience
    version: "2026.1"
    language: en
    settings:
      negation_window: 4     # tokens after a negation cue that are negated (1..10)
      inflect: true          # default for themes: true (lemmas), false, or stem (Snowball)
      accents: fold          # fold: cafe = café (default) | keep: accents tell words apart
    nothing_to_report: [nothing, no complaints]   # optional: replaces the built-in list
    themes:
      - id: cost_value
        label: Cost and value
        about: Prices, fees and value for money.
        parent: null         # id of another theme; a child's hit counts for it too
        negated: keep        # keep (default): negated mentions count, marked | drop |
                             # another theme's id: they count for that theme instead
        terms: [expensive, rip off, expens*, value for money]
        exclude: [free parking]

Terms
-----
A term is split with :func:`textkit.text.word_tokens`, so it is normalised
exactly like the answers (case, curly quotes, full-width forms; punctuation
dropped). A word ending in ``*`` is a prefix wildcard: at least
:data:`MIN_PREFIX` characters before it, ``*`` only at the end of a word, on
any word of a phrase. A term item is either text or a mapping
``{term: ..., inflect: false}`` that overrides inflection for that term
(``true``: inflected forms by the lemmatiser, ``false``: as written, ``stem``:
Snowball stems; see :mod:`textkit.text.inflect`). The
text of a term is taken as written: YAML's conversions (``yes`` to a boolean,
``3.50`` to a number) are not applied to it. Terms (and exclusions) are kept
de-duplicated by their words within a theme, first occurrence first.

Nothing is loaded with ``yaml.load``: the file is *composed* into nodes, so
every problem names the line of the node it is about.
"""

from __future__ import annotations

import difflib
import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING

import yaml

from ..errors import LexiconError
from ..io.yaml_files import BoundedLoader, read_yaml_bytes
from ..text.inflect import ACCENTS_KEPT_BY_DEFAULT, SUPPORTED_LANGUAGES, base_language
from ..text.tokens import normalise, word_tokens

if TYPE_CHECKING:
    import scipy.sparse

#: Characters a prefix wildcard needs before its ``*``.
MIN_PREFIX = 3
#: Allowed values of a theme's ``negated`` policy (besides another theme's id: a redirect).
NEGATED_POLICIES = ("keep", "drop")
#: A theme's ``negated`` policy when the file gives none.
DEFAULT_NEGATED = "keep"
#: Allowed values of ``inflect`` besides true and false.
INFLECT_STEM = "stem"
#: Allowed values of ``settings.accents``.
ACCENT_POLICIES = ("fold", "keep")
#: Allowed range of ``settings.negation_window`` (inclusive).
NEGATION_WINDOW_RANGE = (1, 10)
#: Default ``settings.negation_window`` (the tokeniser's default too).
DEFAULT_NEGATION_WINDOW = 4
#: Columns of :func:`lint_lexicon`'s table.
LINT_COLUMNS = ("kind", "theme", "term", "line", "detail")
#: Lint kinds, in report order.
LINT_KINDS = ("shared_term", "redundant", "vetoed_term", "unused_term", "no_hits")

_ID = re.compile(r"[a-z][a-z0-9_]*\Z")
_LANGUAGE = re.compile(r"[a-z]{2,3}(?:[-_][a-z0-9]{2,8})*\Z", re.IGNORECASE)
_WORD_CHAR = re.compile(r"[^\W_]\Z")
_TOP_KEYS = ("lexicon", "version", "language", "settings", "nothing_to_report", "themes")
_SETTINGS_KEYS = ("negation_window", "inflect", "accents")
_THEME_KEYS = ("id", "label", "about", "parent", "negated", "inflect", "terms", "exclude")
_TERM_KEYS = ("term", "inflect")
_NULL_TAG = "tag:yaml.org,2002:null"
_BOOL_TAG = "tag:yaml.org,2002:bool"
_INT_TAG = "tag:yaml.org,2002:int"
# ISO 639-1 code -> Snowball stemmer language (only used by lint to spot inflection twins).


@dataclass(frozen=True)
class Term:
    """One term (or exclusion) of a theme.

    Attributes
    ----------
    text : str
        The term as written in the file.
    words : tuple of str
        Normalised tokens (:func:`textkit.text.word_tokens`); a word ending in
        ``"*"`` is a prefix wildcard (the prefix is ``word[:-1]``).
    inflect : bool or "stem"
        Whether the non-wildcard words also match their inflections: True by
        their lemmas, ``"stem"`` by Snowball stems, False as written.
    line : int
        1-based line of the term in the lexicon file.
    """

    text: str
    words: tuple[str, ...]
    inflect: bool | str
    line: int

    @property
    def is_phrase(self) -> bool:
        """True for terms of more than one word."""
        return len(self.words) > 1

    @property
    def has_wildcard(self) -> bool:
        """True if any word is a prefix wildcard."""
        return any(word.endswith("*") for word in self.words)


@dataclass(frozen=True)
class Theme:
    """One theme: what it is, its place in the hierarchy, and its terms.

    Attributes
    ----------
    id : str
        Identifier, ``[a-z][a-z0-9_]*``, unique in the lexicon.
    label : str
        Human-readable name for tables and charts.
    about : str
        Description for the researcher ("" when not given).
    parent : str or None
        Id of the parent theme; a hit of this theme counts for the parent too.
    terms : tuple of Term
        Terms that raise the theme, file order, de-duplicated by words.
    exclusions : tuple of Term
        Phrases that veto an overlapping hit of this theme's terms.
    negated : str
        ``"keep"``: negated mentions count (marked ``negated`` in the
        evidence: "the guide was not friendly" is about staff); ``"drop"``:
        they do not count; another theme's id: they count for that theme
        ("not expensive" for a good-value theme).
    line : int
        1-based line where the theme starts.
    """

    id: str
    label: str
    about: str
    parent: str | None
    terms: tuple[Term, ...]
    exclusions: tuple[Term, ...]
    negated: str
    line: int


@dataclass(frozen=True)
class Lexicon:
    """A validated theme lexicon.

    Attributes
    ----------
    name, version, language : str
        From the file's ``lexicon``, ``version`` ("" if absent) and
        ``language`` ("en" if absent) keys.
    themes : tuple of Theme
        In file order; this is the column order of every theme matrix.
    negation_window : int
        Tokens after a negation cue that are negated (default 4).
    keep_accents : bool
        Whether accents tell words apart (``settings.accents: keep``); by
        default they are folded (``cafe`` matches ``café``).
    nothing_to_report : tuple of str or None
        The lexicon's own "nothing to report" phrases; None for the built-in
        list of its language (:mod:`textkit.coding.nothing`).
    source : str
        Path of the file, or ``"<string>"``.
    sha256 : str
        Hex SHA-256 of the file bytes (or of the UTF-8 text when parsed from a
        string); recorded in output manifests.
    """

    name: str
    version: str
    language: str
    themes: tuple[Theme, ...]
    negation_window: int
    source: str
    sha256: str
    keep_accents: bool = False
    nothing_to_report: tuple[str, ...] | None = None
    _index: dict[str, int] = field(default_factory=dict, init=False, repr=False, compare=False,
                                   hash=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "_index", {theme.id: i for i, theme in enumerate(self.themes)})

    @property
    def ids(self) -> tuple[str, ...]:
        """Theme ids in file order."""
        return tuple(theme.id for theme in self.themes)

    def theme(self, theme_id: str) -> Theme:
        """The theme with id ``theme_id``.

        Raises
        ------
        LexiconError
            If there is no such theme (the message suggests close ids).
        """
        index = self._index.get(theme_id)
        if index is None:
            raise LexiconError(f"no theme '{theme_id}' in lexicon '{self.name}'"
                               f"{_suggest(theme_id, self.ids)}", source=self.source)
        return self.themes[index]

    def ancestors(self, theme_id: str) -> tuple[str, ...]:
        """Ids of the parent, grandparent, ... of ``theme_id`` (nearest first)."""
        chain: list[str] = []
        parent = self.theme(theme_id).parent
        while parent is not None and parent not in chain:  # parsed lexicons have no cycles
            chain.append(parent)
            parent = self.themes[self._index[parent]].parent
        return tuple(chain)

    def descendants(self, theme_id: str) -> tuple[str, ...]:
        """Ids of all themes below ``theme_id`` at any depth, in file order."""
        self.theme(theme_id)
        return tuple(theme.id for theme in self.themes if theme_id in self.ancestors(theme.id))

    def rollup_matrix(self) -> scipy.sparse.csr_matrix:
        """Matrix that rolls direct theme hits up to every ancestor.

        Returns
        -------
        scipy.sparse.csr_matrix of shape (n_themes, n_themes), int32, 0/1
            ``M[i, j] = 1`` if theme ``j`` is theme ``i`` or one of its
            ancestors. ``direct_hits @ M`` (``direct_hits`` of shape
            (n_responses, n_themes)) gives the rolled-up hits; an entry can
            exceed 1 when a response hits a theme and its descendant, so take
            ``> 0`` for a 0/1 matrix.
        """
        import numpy as np
        import scipy.sparse

        rows: list[int] = []
        cols: list[int] = []
        for i, theme in enumerate(self.themes):
            for theme_id in (theme.id, *self.ancestors(theme.id)):
                rows.append(i)
                cols.append(self._index[theme_id])
        n_themes = len(self.themes)
        return scipy.sparse.csr_matrix(
            (np.ones(len(rows), dtype=np.int32), (np.asarray(rows), np.asarray(cols))),
            shape=(n_themes, n_themes), dtype=np.int32)


# --- parsing ----------------------------------------------------------------------


def load_lexicon(path: str | Path) -> Lexicon:
    """Read and validate the lexicon file at ``path``.

    The file is read as UTF-8 (a byte-order mark is allowed); ``sha256`` is the
    hash of its bytes.

    Raises
    ------
    LexiconError
        If the file cannot be read or is not a valid lexicon; the message names
        the file and line, and ``error.problems`` lists every problem found as
        ``(line, message)`` pairs.
    """
    source = str(path)
    try:
        data = read_yaml_bytes(path, "lexicon", error=LexiconError)
    except OSError as exc:
        reason = exc.strerror or type(exc).__name__
        raise _raise_problems([(None, f"cannot read the lexicon file ({reason})")], source) from None
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise _raise_problems([(line, f"the file is not UTF-8 text (byte 0x{data[exc.start]:02x}); "
                                      "save it as UTF-8")], source) from None
    return _parse(text, source, hashlib.sha256(data).hexdigest())


def parse_lexicon(text: str, source: str = "<string>") -> Lexicon:
    """Validate lexicon ``text`` (the content of a lexicon file).

    Parameters
    ----------
    text : str
        YAML text of the lexicon.
    source : str, default "<string>"
        Name used in error messages and stored as ``Lexicon.source``.

    Raises
    ------
    LexiconError
        With ``line=`` of the first problem in file order, and
        ``error.problems``: every ``(line, message)`` found.
    """
    return _parse(text, source, hashlib.sha256(text.encode("utf-8")).hexdigest())


def _parse(text: str, source: str, sha256: str) -> Lexicon:
    text = text.removeprefix("\ufeff")
    try:
        root = yaml.compose(text, Loader=BoundedLoader)
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        raise _raise_problems([(mark.line + 1 if mark else None, _yaml_message(exc))], source) from None
    except yaml.YAMLError as exc:
        raise _raise_problems([(None, f"YAML syntax error: {exc}")], source) from None
    parser = _Parser()
    lexicon = parser.lexicon(root, source, sha256)
    if parser.problems or lexicon is None:
        raise _raise_problems(parser.problems, source)
    return lexicon


def _raise_problems(problems: list[tuple[int | None, str]], source: str) -> LexiconError:
    """The LexiconError for ``problems``: first in file order in the message, all in ``.problems``."""
    ordered = sorted(problems, key=lambda item: item[0] if item[0] is not None else 0)
    line, message = ordered[0]
    if len(ordered) > 1:
        more = len(ordered) - 1
        message += f" (and {more} more problem{'s' if more > 1 else ''} in this file)"
    error = LexiconError(message, source=source, line=line)
    error.problems = [(item_line, item_message) for item_line, item_message in ordered]
    return error


def _yaml_message(exc: yaml.MarkedYAMLError) -> str:
    problem = exc.problem or "cannot read the YAML"
    context = f" ({exc.context})" if exc.context else ""
    hint = "check the indentation and quoting on this line"
    if "\t" in problem or "'\\t'" in problem:
        hint = "indent with spaces, not tabs"
    elif "alias" in problem or "alias" in context:
        hint = "a term starting with '*' must be quoted, and '*' may only end a word (queu*)"
    elif "mapping values are not allowed" in problem:
        hint = "put text containing ': ' in quotes"
    elif "single document" in problem + context:
        hint = "a lexicon file holds one document; remove the extra '---'"
    return f"YAML syntax error: {problem}{context}; {hint}"


def _suggest(word: str, options) -> str:
    close = difflib.get_close_matches(word, list(options), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _line(node: yaml.Node) -> int:
    return node.start_mark.line + 1


def _kind(node: yaml.Node) -> str:
    if isinstance(node, yaml.MappingNode):
        return "a mapping"
    if isinstance(node, yaml.SequenceNode):
        return "a list"
    if node.tag == _NULL_TAG:
        return "nothing"
    return f"'{node.value}'"


class _Parser:
    """Walks the composed YAML nodes, collecting every problem as (line, message)."""

    def __init__(self) -> None:
        self.problems: list[tuple[int | None, str]] = []
        self.redirect_nodes: dict[str, yaml.Node] = {}  # theme id -> node of its 'negated: <theme>'

    def problem(self, line: int | None, message: str) -> None:
        self.problems.append((line, message))

    # nodes -> python values, reporting problems ------------------------------------

    def mapping(self, node: yaml.MappingNode, valid: tuple[str, ...], where: str
                ) -> dict[str, tuple[yaml.Node, yaml.Node]]:
        """``{key: (key_node, value_node)}``; unknown and repeated keys are problems."""
        entries: dict[str, tuple[yaml.Node, yaml.Node]] = {}
        for key_node, value_node in node.value:
            if not isinstance(key_node, yaml.ScalarNode):
                self.problem(_line(key_node), f"a key {where} must be a plain word; "
                                              f"valid keys: {', '.join(valid)}")
                continue
            key = key_node.value
            if key not in valid:
                self.problem(_line(key_node), f"unknown key '{key}' {where}{_suggest(key, valid)}; "
                                              f"valid keys: {', '.join(valid)}")
            elif key in entries:
                self.problem(_line(key_node), f"key '{key}' is given twice {where} "
                                              f"(first at line {_line(entries[key][0])})")
            else:
                entries[key] = (key_node, value_node)
        return entries

    def missing(self, node: yaml.MappingNode, key: str, message: str) -> None:
        """Report a missing required ``key``, unless a misspelt key already points to it."""
        for key_node, _ in node.value:
            if (isinstance(key_node, yaml.ScalarNode) and key_node.value != key
                    and difflib.get_close_matches(key_node.value, [key], n=1, cutoff=0.6)):
                return
        self.problem(_line(node), message)

    def text(self, node: yaml.Node, what: str, required: bool = False) -> str | None:
        """Text of a scalar as written (None for an empty value)."""
        if not isinstance(node, yaml.ScalarNode):
            self.problem(_line(node), f"{what} must be text, found {_kind(node)}")
            return None
        value = None if node.tag == _NULL_TAG and node.style is None else node.value.strip()
        if required and not value:
            self.problem(_line(node), f"{what} is empty; write some text after the colon")
            return None
        return value

    def boolean(self, node: yaml.Node, what: str) -> bool | None:
        if isinstance(node, yaml.ScalarNode) and node.tag == _BOOL_TAG and node.style is None:
            return yaml.constructor.SafeConstructor.bool_values[node.value.lower()]
        self.problem(_line(node), f"{what} must be true or false, found {_kind(node)}")
        return None

    def inflect(self, node: yaml.Node, what: str) -> bool | str | None:
        """``inflect``: true, false or "stem"."""
        if isinstance(node, yaml.ScalarNode) and node.value == INFLECT_STEM and node.tag != _NULL_TAG:
            return INFLECT_STEM
        if isinstance(node, yaml.ScalarNode) and node.tag == _BOOL_TAG and node.style is None:
            return yaml.constructor.SafeConstructor.bool_values[node.value.lower()]
        self.problem(_line(node), f"{what} must be true, false or stem, found {_kind(node)}")
        return None

    def integer(self, node: yaml.Node, what: str, low: int, high: int) -> int | None:
        if isinstance(node, yaml.ScalarNode) and node.tag == _INT_TAG and node.style is None:
            try:
                value = int(node.value.replace("_", ""), 0)
            except ValueError:
                value = None
            if value is not None and low <= value <= high:
                return value
        self.problem(_line(node), f"{what} must be a whole number from {low} to {high}, "
                                  f"found {_kind(node)}")
        return None

    # the lexicon: header, settings, themes, hierarchy ----------------------------------

    def lexicon(self, root: yaml.Node | None, source: str, sha256: str) -> Lexicon | None:
        top = self.top_level(root)
        if top is None:
            return None
        name, version, language = self.header(root, top)
        window, inflect, accents = DEFAULT_NEGATION_WINDOW, True, None
        if "settings" in top:
            window, inflect, accents = self.settings(top["settings"][1])
        keep_accents = accents == "keep" if accents else base_language(language) in ACCENTS_KEPT_BY_DEFAULT
        nothing = None
        if "nothing_to_report" in top:
            nothing = tuple(term.text for term in self.terms(top["nothing_to_report"][1], False,
                                                             "'nothing_to_report'", need_one=False))
        parent_nodes: dict[str, yaml.Node] = {}
        themes = self.theme_list(root, top, inflect, parent_nodes)
        self.hierarchy(themes, parent_nodes)
        if self.problems or name is None:
            return None
        return Lexicon(name=name, version=version or "", language=language, themes=tuple(themes),
                       negation_window=window, source=source, sha256=sha256, keep_accents=keep_accents,
                       nothing_to_report=nothing)

    def top_level(self, root: yaml.Node | None) -> dict[str, tuple[yaml.Node, yaml.Node]] | None:
        """The top-level mapping's entries, or None (a problem noted) if the root is not a mapping."""
        if root is None:
            self.problem(1, "the lexicon is empty; expected a mapping with keys "
                            f"{', '.join(_TOP_KEYS)}")
            return None
        if not isinstance(root, yaml.MappingNode):
            self.problem(_line(root), f"the top level must be a mapping with keys {', '.join(_TOP_KEYS)}; "
                                      f"found {_kind(root)}")
            return None
        return self.mapping(root, _TOP_KEYS, "at the top level")

    def header(self, root: yaml.MappingNode, top: dict[str, tuple[yaml.Node, yaml.Node]]
               ) -> tuple[str | None, str | None, str]:
        """``(name, version, language)`` from the top level."""
        name = None
        if "lexicon" in top:
            name = self.text(top["lexicon"][1], "'lexicon' (the lexicon's name)", required=True)
        else:
            self.missing(root, "lexicon", "missing key 'lexicon' (the lexicon's name) at the top level")
        version = self.text(top["version"][1], "'version'") if "version" in top else ""
        language = "en"
        if "language" in top:
            value = self.text(top["language"][1], "'language'", required=True)
            if value is not None and not _LANGUAGE.match(value):
                self.problem(_line(top["language"][1]),
                             f"'language' must be a language code such as 'en', found '{value}'")
            elif value is not None and base_language(value) not in SUPPORTED_LANGUAGES:
                self.problem(_line(top["language"][1]),
                             f"unsupported 'language' '{value}'; supported: {', '.join(SUPPORTED_LANGUAGES)}")
            language = (value or "en").lower()
        return name, version, language

    def theme_list(self, root: yaml.MappingNode, top: dict[str, tuple[yaml.Node, yaml.Node]],
                   inflect: bool, parent_nodes: dict[str, yaml.Node]) -> list[Theme]:
        """The valid themes of ``themes:``, file order; ``parent_nodes`` gets each parent's node."""
        themes: list[Theme] = []
        id_nodes: dict[str, yaml.Node] = {}
        if "themes" not in top:
            self.missing(root, "themes", "missing key 'themes' (the list of themes) at the top level")
            return themes
        node = top["themes"][1]
        if not isinstance(node, yaml.SequenceNode) or not node.value:
            self.problem(_line(node), "'themes' must be a list of themes, each starting with "
                                      f"'- id: ...'; found {_kind(node)}")
            return themes
        for item in node.value:
            theme = self.theme(item, inflect, id_nodes, parent_nodes)
            if theme is not None:
                themes.append(theme)
        return themes

    def settings(self, node: yaml.Node) -> tuple[int, bool | str, str | None]:
        """``(negation_window, inflect, accents)``; accents None when not given."""
        window, inflect, accents = DEFAULT_NEGATION_WINDOW, True, None
        if not isinstance(node, yaml.MappingNode):
            if not (isinstance(node, yaml.ScalarNode) and node.tag == _NULL_TAG):
                self.problem(_line(node), f"'settings' must be a mapping with keys "
                                          f"{', '.join(_SETTINGS_KEYS)}; found {_kind(node)}")
            return window, inflect, accents
        entries = self.mapping(node, _SETTINGS_KEYS, "in 'settings'")
        if "negation_window" in entries:
            value = self.integer(entries["negation_window"][1], "'negation_window'",
                                 *NEGATION_WINDOW_RANGE)
            window = window if value is None else value
        if "inflect" in entries:
            value = self.inflect(entries["inflect"][1], "'inflect' in 'settings'")
            inflect = inflect if value is None else value
        if "accents" in entries:
            value = self.text(entries["accents"][1], "'accents' in 'settings'", required=True)
            if value is not None and value not in ACCENT_POLICIES:
                self.problem(_line(entries["accents"][1]), "'accents' in 'settings' must be 'fold' "
                             f"(cafe matches café) or 'keep' (accents tell words apart), found '{value}'")
            elif value is not None:
                accents = value
        return window, inflect, accents

    # one theme: id, descriptive fields, policies, terms ---------------------------------

    def theme(self, node: yaml.Node, default_inflect: bool, id_nodes: dict[str, yaml.Node],
              parent_nodes: dict[str, yaml.Node]) -> Theme | None:
        if not isinstance(node, yaml.MappingNode):
            self.problem(_line(node), f"each theme must be a mapping starting with '- id: ...'; "
                                      f"found {_kind(node)}")
            return None
        raw_id = next((value.value for key, value in node.value
                       if isinstance(key, yaml.ScalarNode) and key.value == "id"
                       and isinstance(value, yaml.ScalarNode) and value.value), None)
        entries = self.mapping(node, _THEME_KEYS, f"in theme '{raw_id}'" if raw_id else "in a theme")
        theme_id = self.theme_id(node, entries, id_nodes)
        where = f"theme '{theme_id}'" if theme_id else f"the theme at line {_line(node)}"
        label, about, parent = self.theme_description(node, entries, where)
        if parent and theme_id:
            parent_nodes[theme_id] = entries["parent"][1]
        negated, inflect = self.theme_policies(entries, where, default_inflect)
        if negated not in NEGATED_POLICIES and theme_id:
            self.redirect_nodes[theme_id] = entries["negated"][1]
        terms: tuple[Term, ...] = ()
        if "terms" not in entries:
            self.missing(node, "terms", f"{where} has no 'terms'; list at least one term")
        else:
            terms = self.terms(entries["terms"][1], inflect, f"'terms' of {where}", need_one=True)
        exclusions: tuple[Term, ...] = ()
        if "exclude" in entries:
            exclusions = self.terms(entries["exclude"][1], inflect, f"'exclude' of {where}",
                                    need_one=False)
        if theme_id is None or label is None:
            return None
        return Theme(id=theme_id, label=label, about=about or "", parent=parent or None, terms=terms,
                     exclusions=exclusions, negated=negated, line=_line(node))

    def theme_id(self, node: yaml.MappingNode, entries: dict[str, tuple[yaml.Node, yaml.Node]],
                 id_nodes: dict[str, yaml.Node]) -> str | None:
        """The theme's valid, unused id (recorded in ``id_nodes``), or None."""
        if "id" not in entries:
            self.missing(node, "id", "theme without 'id'; add 'id: some_name'")
            return None
        value_node = entries["id"][1]
        theme_id = self.text(value_node, "the theme 'id'", required=True)
        if theme_id is not None and not _ID.match(theme_id):
            self.problem(_line(value_node), f"theme id '{theme_id}' must start with a lower-case "
                                            "letter and hold only a-z, 0-9 and '_'")
            return None
        if theme_id is not None and theme_id in id_nodes:
            self.problem(_line(value_node), f"theme id '{theme_id}' is used twice "
                                            f"(first at line {_line(id_nodes[theme_id])})")
            return None
        if theme_id is not None:
            id_nodes[theme_id] = value_node
        return theme_id

    def theme_description(self, node: yaml.MappingNode, entries: dict[str, tuple[yaml.Node, yaml.Node]],
                          where: str) -> tuple[str | None, str | None, str | None]:
        """``(label, about, parent)`` of a theme as written."""
        label = None
        if "label" not in entries:
            self.missing(node, "label", f"{where} has no 'label'; add 'label: Some label'")
        else:
            label = self.text(entries["label"][1], f"the 'label' of {where}", required=True)
        about = self.text(entries["about"][1], f"the 'about' of {where}") if "about" in entries else ""
        parent = self.text(entries["parent"][1], f"the 'parent' of {where}") if "parent" in entries else None
        return label, about, parent

    def theme_policies(self, entries: dict[str, tuple[yaml.Node, yaml.Node]], where: str,
                       default_inflect: bool | str) -> tuple[str, bool | str]:
        """``(negated, inflect)`` of a theme, defaults where absent or invalid."""
        negated = DEFAULT_NEGATED
        if "negated" in entries:
            value = self.text(entries["negated"][1], f"'negated' of {where}", required=True)
            if value is not None and value not in NEGATED_POLICIES and not _ID.match(value):
                self.problem(_line(entries["negated"][1]),
                             f"'negated' of {where} must be 'keep' (negated mentions count), 'drop' "
                             f"(they don't) or the id of the theme they count for, found '{value}'")
            elif value is not None:
                negated = value
        inflect = default_inflect
        if "inflect" in entries:
            value = self.inflect(entries["inflect"][1], f"'inflect' of {where}")
            inflect = inflect if value is None else value
        return negated, inflect

    def terms(self, node: yaml.Node, inflect: bool, where: str, need_one: bool) -> tuple[Term, ...]:
        if isinstance(node, yaml.ScalarNode) and node.tag == _NULL_TAG and node.style is None:
            if need_one:
                self.problem(_line(node), f"{where} is empty; list at least one term")
            return ()
        if not isinstance(node, yaml.SequenceNode):
            self.problem(_line(node), f"{where} must be a list, one term per line starting with '- '; "
                                      f"found {_kind(node)}")
            return ()
        if need_one and not node.value:
            self.problem(_line(node), f"{where} is empty; list at least one term")
        kept: dict[tuple[str, ...], Term] = {}
        for item in node.value:
            term = self.term(item, inflect, where)
            if term is not None and term.words not in kept:
                kept[term.words] = term
        return tuple(kept.values())

    def term(self, node: yaml.Node, inflect: bool, where: str) -> Term | None:
        text_node = node
        if isinstance(node, yaml.MappingNode):
            entries = self.mapping(node, _TERM_KEYS, f"in a term of {where}")
            if "term" not in entries:
                self.problem(_line(node), f"a term written as a mapping in {where} needs 'term: ...'")
                return None
            text_node = entries["term"][1]
            if "inflect" in entries:
                value = self.inflect(entries["inflect"][1], f"'inflect' of a term in {where}")
                inflect = inflect if value is None else value
        elif not isinstance(node, yaml.ScalarNode):
            self.problem(_line(node), f"a term in {where} must be text, found {_kind(node)} "
                                      "(remove the extra '-' or brackets)")
            return None
        if not isinstance(text_node, yaml.ScalarNode):
            self.problem(_line(text_node), f"a term in {where} must be text, found {_kind(text_node)}")
            return None
        is_null = text_node.tag == _NULL_TAG and text_node.style is None
        text = "" if is_null else text_node.value
        if not text.strip():
            self.problem(_line(text_node), f"empty term in {where}; write a word or phrase after '- '")
            return None
        words, message = term_words(text)
        if message:
            self.problem(_line(text_node), f"term '{text}' in {where}: {message}")
            return None
        return Term(text=text, words=words, inflect=inflect, line=_line(text_node))

    def hierarchy(self, themes: list[Theme], parent_nodes: dict[str, yaml.Node]) -> None:
        known = {theme.id for theme in themes}
        for theme in themes:  # 'negated: <theme id>' must name another theme
            node = self.redirect_nodes.get(theme.id)
            if node is not None and (theme.negated not in known or theme.negated == theme.id):
                self.problem(_line(node), f"'negated' of theme '{theme.id}' names '{theme.negated}', which "
                             f"is not another theme of this lexicon{_suggest(theme.negated, known - {theme.id})};"
                             " use keep, drop or another theme's id")
        parents: dict[str, str] = {}
        for theme in themes:
            if theme.parent is None or theme.id not in parent_nodes:
                continue
            node = parent_nodes[theme.id]
            if theme.parent not in known:
                self.problem(_line(node), f"parent '{theme.parent}' of theme '{theme.id}' is not a theme "
                                          f"id in this lexicon{_suggest(theme.parent, known)}")
            else:
                parents[theme.id] = theme.parent
        reported: set[str] = set()
        for theme in themes:  # file order, so each cycle is reported at its first member
            path = [theme.id]
            while path[-1] in parents and parents[path[-1]] not in path:
                path.append(parents[path[-1]])
            if path[-1] in parents and parents[path[-1]] == theme.id and theme.id not in reported:
                reported.update(path)
                cycle = " -> ".join([*path, theme.id])
                self.problem(_line(parent_nodes[theme.id]),
                             f"circular parents: {cycle}; a theme cannot be its own ancestor")


_SURROGATE = re.compile("[\ud800-\udfff]")


def term_words(text: str) -> tuple[tuple[str, ...], str | None]:
    """Split a term into normalised words, checking wildcards.

    Parameters
    ----------
    text : str
        The term as written, e.g. ``"Long queu*"``.

    Returns
    -------
    words : tuple of str
        Normalised tokens; a wildcard word keeps its trailing ``"*"``
        (``("long", "queu*")``). Empty when ``message`` is set.
    message : str or None
        Why the term is malformed, or None.
    """
    if _SURROGATE.search(text):
        return (), "it holds a lone surrogate character (a broken \\u escape), which no answer can contain"
    words: list[str] = []
    for piece in normalise(text).split():
        stars = piece.count("*")
        if not stars:
            words.extend(word_tokens(piece))
            continue
        if piece == "*" * stars:
            return (), ("a lone '*' would match every word; put at least "
                        f"{MIN_PREFIX} letters before it, as in 'queu*'")
        if stars > 1 or not piece.endswith("*"):
            return (), f"'*' may only end a word, once, as in 'queu*' (found '{piece}')"
        body = piece[:-1]
        tokens = word_tokens(body)
        if not tokens or not _WORD_CHAR.match(body[-1]):
            return (), f"'*' must follow the letters of a word, as in 'queu*' (found '{piece}')"
        if len(tokens[-1]) < MIN_PREFIX:
            return (), (f"a wildcard needs at least {MIN_PREFIX} characters before '*' "
                        f"(found '{piece}'), or it matches too many words")
        words.extend(tokens[:-1])
        words.append(tokens[-1] + "*")
    if not words:
        return (), "it has no words once punctuation is removed"
    return tuple(words), None
