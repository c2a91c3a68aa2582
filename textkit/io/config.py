"""Survey config: a small YAML file that says which file to read and what each column is.

Example::

    survey: visitors_2026.csv        # relative to this config file
    id: response_id
    questions:                       # question name -> text column (order kept)
      low_point: low_point_text
      high_point: high_point_text
    weight: weight                   # optional; none means every response weighs 1
    design:                          # optional
      strata: stratum
      cluster: psu
      fpc: stratum_population        # population size N_h of each stratum
      one_cluster_stratum: refuse  # a stratum with one PSU: refuse | centre | merge
      cluster_ids_restart: false                    # true when cluster ids restart in each stratum
    wave: wave                       # optional
    groups: [market, age_band]       # optional
    lexicon: ../lexicons/visitor_experience.yaml
    seed: 20261202
    non_answers: ["n/a", "none", "-"]   # compared trimmed, lower-cased
    corrections: corrections.csv     # optional: hand corrections applied after coding

One file per wave: ``survey: {2025: wave2025.csv, 2026: wave2026.csv}`` or a list of
``{file: wave2025.csv, wave: 2025}`` items. Each file is read with the same reading
options, its wave written into the ``wave`` column (default name ``wave``), and the
files stacked in config order; their columns must agree.

Reading options, each only for the file types it fits: ``sheet`` (name or 0-based
index, Excel), ``table`` or ``query`` (SQLite), ``encoding`` and ``delimiter`` (CSV).

The file is parsed with PyYAML's safe loader, but through the node tree so every
error names the config line. This module imports only the standard library and
PyYAML, so the CLI can import it at start-up.
"""

from __future__ import annotations

import codecs
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import yaml

from ..errors import InputError
from .yaml_files import BoundedLoader, read_yaml_bytes

#: Survey file suffix (lower case) -> reader family.
SURVEY_FORMATS: dict[str, str] = {
    ".csv": "csv", ".tsv": "csv", ".txt": "csv",
    ".xlsx": "excel", ".xlsm": "excel",
    ".parquet": "parquet", ".pq": "parquet",
    ".sav": "spss", ".zsav": "spss",
    ".sqlite": "sqlite", ".sqlite3": "sqlite", ".db": "sqlite",
}

#: Reading option -> the reader families it applies to.
READING_OPTIONS: dict[str, tuple[str, ...]] = {
    "sheet": ("excel",),
    "table": ("sqlite",),
    "query": ("sqlite",),
    "encoding": ("csv",),
    "delimiter": ("csv",),
}

#: Policies for a stratum with a single primary sampling unit (used by the statistics).
ONE_CLUSTER_POLICIES: tuple[str, ...] = ("refuse", "centre", "merge")

#: Answers that count as "not answered" when the config gives none (compared after
#: trimming, collapsing inner whitespace and lower-casing).
DEFAULT_NON_ANSWERS: tuple[str, ...] = (
    "n/a", "na", "n.a.", "none", "-", "--", "nil", "no comment", "no comments", ".",
)

_TOP_KEYS: tuple[str, ...] = (
    "survey", "sheet", "table", "query", "encoding", "delimiter", "id", "questions",
    "weight", "design", "wave", "groups", "lexicon", "seed", "non_answers", "nets",
    "corrections", "redact_names", "max_answer_chars",
)
#: Former names of keys -> their names now (refused with a hint).
_RENAMED_KEYS = {"single_psu": "one_cluster_stratum (values refuse, centre, merge)",
                 "nest": "cluster_ids_restart"}
_DESIGN_KEYS: tuple[str, ...] = ("strata", "cluster", "fpc", "one_cluster_stratum", "cluster_ids_restart")
_REQUIRED: tuple[str, ...] = ("survey", "id", "questions")

# Roles whose columns may also serve another role in this set (a stratum or wave
# variable is often reported as a group too). Every other pairing is an error.
_SHAREABLE_ROLES = frozenset({"strata", "cluster", "wave", "group"})


def survey_format(path: str | Path) -> str | None:
    """Reader family (``"csv"``, ``"excel"``, ``"parquet"``, ``"spss"``, ``"sqlite"``) of a
    survey file from its suffix, or None for an unknown suffix."""
    return SURVEY_FORMATS.get(Path(path).suffix.lower())


def reading_option_misfit(path: str | Path, option: str) -> str | None:
    """Why ``option`` (a key of :data:`READING_OPTIONS`) does not fit the file type of
    ``path``, or None when it fits (or the type is unknown, which is reported elsewhere)."""
    family = survey_format(path)
    allowed = READING_OPTIONS[option]
    if family is None or family in allowed:
        return None
    suffixes = ", ".join(s for s, f in SURVEY_FORMATS.items() if f in allowed)
    return f"'{option}' applies only to {' / '.join(allowed)} files ({suffixes}), not to a {family} file"


@dataclass(frozen=True)
class SurveyConfig:
    """A validated survey config.

    Attributes
    ----------
    path : Path or None
        The config file (None when built from a mapping).
    survey : Path
        The survey file, resolved against the config's folder (with wave files: the first).
    survey_waves : tuple of (str, Path)
        One survey file per wave (``survey: {2025: a.csv, 2026: b.csv}`` or a list of
        ``{file:, wave:}``): each file's wave value and path, in config order. The files
        are read, given their wave in the ``wave`` column (default name ``wave``) and
        stacked. Empty for a single survey file.
    sheet : str or int or None
        Excel sheet name or 0-based index (default: the first sheet).
    table, query : str or None
        SQLite table name, or a read-only SQL query (at most one of the two).
    encoding, delimiter : str or None
        Forced CSV text encoding and field delimiter (default: detected).
    id_column : str
        Column holding the unique response id.
    questions : dict of str to str
        Question name -> text column, in config order.
    weight : str or None
        Weight column (None: every response weighs 1).
    strata, cluster, fpc : str or None
        Design columns; ``fpc`` holds the population size N_h of each stratum.
    one_cluster_stratum : str
        Policy for a stratum with one PSU: ``"refuse"`` (default), ``"centre"`` or ``"merge"``.
    wave : str or None
        Survey wave column.
    groups : tuple of str
        Group (breakdown) columns, in config order.
    lexicon : Path or None
        Theme lexicon, resolved against the config's folder.
    seed : int
        Seed for every random step (default 0).
    non_answers : tuple of str
        Normalised (trimmed, single-spaced, lower-cased) answers that count as not answered.
    redact_names : tuple of str
        Names (staff, guides, places) removed from every output that shows answer text.
    nets : dict of str to tuple of str
        Named unions of themes (``nets: {facilities_any: [toilets, parking]}``),
        estimated like themes by ``textkit prevalence``.
    question_text : dict of str to str
        The wording of questions given as ``{column: ..., text: ...}``.
    corrections : Path or None
        A researcher's corrections (CSV, or a filled review workbook), applied after
        automated coding on every run; resolved against the config's folder.
    """

    path: Path | None
    survey: Path
    id_column: str
    questions: dict[str, str]
    sheet: str | int | None = None
    table: str | None = None
    query: str | None = None
    encoding: str | None = None
    delimiter: str | None = None
    weight: str | None = None
    strata: str | None = None
    cluster: str | None = None
    fpc: str | None = None
    one_cluster_stratum: str = "refuse"
    cluster_ids_restart: bool = False
    wave: str | None = None
    groups: tuple[str, ...] = ()
    lexicon: Path | None = None
    seed: int = 0
    non_answers: tuple[str, ...] = field(default=DEFAULT_NON_ANSWERS)
    redact_names: tuple[str, ...] = ()
    max_answer_chars: int | None = None
    nets: dict[str, tuple[str, ...]] = field(default_factory=dict)
    question_text: dict[str, str] = field(default_factory=dict)
    corrections: Path | None = None
    survey_waves: tuple[tuple[str, Path], ...] = ()

    def roles(self) -> dict[str, Any]:
        """Column roles as a JSON-serialisable dict (for manifests).

        Keys: ``id``, ``questions`` (name -> column), ``weight``, ``strata``, ``cluster``,
        ``fpc``, ``one_cluster_stratum``, ``cluster_ids_restart`` (cluster ids numbered within each stratum),
        ``wave`` (str or None), ``groups`` (list of str), ``nets`` and ``question_text``.
        """
        return {
            "id": self.id_column,
            "questions": dict(self.questions),
            "weight": self.weight,
            "strata": self.strata,
            "cluster": self.cluster,
            "fpc": self.fpc,
            "one_cluster_stratum": self.one_cluster_stratum,
            "cluster_ids_restart": self.cluster_ids_restart,
            "wave": self.wave,
            "groups": list(self.groups),
            "nets": {name: list(members) for name, members in self.nets.items()},
            "question_text": dict(self.question_text),
        }

    def design_columns(self) -> list[str]:
        """The configured weight, strata, cluster, fpc, wave and group columns, in that
        order, without None and without repeats."""
        columns = [self.weight, self.strata, self.cluster, self.fpc, self.wave, *self.groups]
        return list(dict.fromkeys(c for c in columns if c is not None))

    def reading_options(self) -> dict[str, Any]:
        """Keyword arguments for :func:`textkit.readers.read_table` (only those set)."""
        options = {"sheet": self.sheet, "table": self.table, "query": self.query,
                   "encoding": self.encoding, "delimiter": self.delimiter}
        return {k: v for k, v in options.items() if v is not None}


# ---------------------------------------------------------------------------
# A tiny uniform tree over YAML nodes and plain Python values, so that one
# validator serves both load_config (with line numbers) and config_from_mapping.


@dataclass
class _Item:
    kind: str                      # "null", "scalar", "sequence" or "mapping"
    line: int | None               # 1-based line of the value
    value: Any = None              # scalar: constructed Python value
    text: str | None = None        # scalar: the text as written
    items: list[_Item] = field(default_factory=list)                  # sequence
    entries: dict[str, tuple[int | None, _Item]] = field(default_factory=dict)  # mapping: key -> (line, item)


class _Builder:
    def __init__(self, source: str | Path) -> None:
        self.source = source

    def fail(self, message: str, line: int | None) -> InputError:
        return InputError(message, source=self.source, line=line)

    def from_node(self, node: yaml.Node, loader: yaml.SafeLoader) -> _Item:
        line = node.start_mark.line + 1
        if isinstance(node, yaml.MappingNode):
            item = _Item("mapping", line)
            for key_node, value_node in node.value:
                key_line = key_node.start_mark.line + 1
                if not isinstance(key_node, yaml.ScalarNode):
                    raise self.fail("a key must be plain text, not a list or mapping", key_line)
                key = key_node.value
                if key in item.entries:
                    first = item.entries[key][0]
                    raise self.fail(f"key '{key}' is given twice (first on line {first}); keep one", key_line)
                item.entries[key] = (key_line, self.from_node(value_node, loader))
            return item
        if isinstance(node, yaml.SequenceNode):
            return _Item("sequence", line, items=[self.from_node(n, loader) for n in node.value])
        try:
            value = loader.construct_object(node, deep=True)
        except yaml.YAMLError as error:
            raise self.fail(f"cannot read this value: {getattr(error, 'problem', error)}", line) from error
        if value is None:
            return _Item("null", line)
        return _Item("scalar", line, value=value, text=node.value)

    def from_python(self, value: Any) -> _Item:
        if value is None:
            return _Item("null", None)
        if isinstance(value, Mapping):
            item = _Item("mapping", None)
            for key, sub in value.items():
                if isinstance(key, int) and not isinstance(key, bool):
                    key = str(key)  # a wave written as a number: survey: {2025: ...}
                if not isinstance(key, str):
                    raise self.fail(f"key {key!r} must be text", None)
                item.entries[key] = (None, self.from_python(sub))
            return item
        if isinstance(value, list | tuple):
            return _Item("sequence", None, items=[self.from_python(v) for v in value])
        if isinstance(value, Path):
            value = str(value)
        return _Item("scalar", None, value=value, text=str(value))


#: An absent value (a key not given).
_NULL = _Item("null", None)


def _describe(item: _Item) -> str:
    if item.kind == "scalar":
        return f"{type(item.value).__name__} {item.text!r}"
    return {"null": "nothing", "sequence": "a list", "mapping": "a mapping"}[item.kind]


class _Validator:
    def __init__(self, builder: _Builder, base_dir: Path) -> None:
        self.b = builder
        self.base_dir = base_dir
        self.role_of: dict[str, tuple[str, int | None]] = {}
        self.question_texts: dict[str, str] = {}

    def fail(self, message: str, line: int | None) -> InputError:
        return self.b.fail(message, line)

    def check_keys(self, mapping: _Item, allowed: tuple[str, ...], where: str) -> None:
        for key, (line, _) in mapping.entries.items():
            if key in _RENAMED_KEYS:
                raise self.fail(f"'{key}' in {where} is now called {_RENAMED_KEYS[key]}", line)
            if key not in allowed:
                raise self.fail(f"unknown key '{key}' in {where}; valid keys are: {', '.join(allowed)}", line)

    def text(self, item: _Item, name: str, *, optional: bool = False) -> str | None:
        """A non-empty text value (strings only)."""
        if item.kind == "null" and optional:
            return None
        if item.kind != "scalar" or not isinstance(item.value, str) or not item.value.strip():
            raise self.fail(f"'{name}' must be non-empty text, found {_describe(item)}", item.line)
        return item.value

    def column(self, item: _Item, name: str, *, optional: bool = True) -> str | None:
        """A column name as written: numbers keep their written text (a column may be
        called 2026), but true/false must be quoted to avoid surprises."""
        if item.kind == "null" and optional:
            return None
        is_name = isinstance(item.value, str | int | float) and not isinstance(item.value, bool)
        if item.kind != "scalar" or not is_name:
            hint = "; quote it if it really is a column name" if isinstance(item.value, bool) else ""
            raise self.fail(f"'{name}' must be a column name, found {_describe(item)}{hint}", item.line)
        column = item.value if isinstance(item.value, str) else str(item.text)
        if not column.strip():
            raise self.fail(f"'{name}' must be a column name, found empty text", item.line)
        return column

    def claim(self, column: str | None, role: str, line: int | None) -> None:
        """Record that ``column`` plays ``role``; refuse incompatible double use."""
        if column is None:
            return
        if column in self.role_of:
            other, other_line = self.role_of[column]
            if other == role or not (role in _SHAREABLE_ROLES and other in _SHAREABLE_ROLES) or \
                    {role, other} == {"strata", "cluster"}:
                at = f" (line {other_line})" if other_line is not None else ""
                raise self.fail(
                    f"column '{column}' is used as {role} but is already the {other} column{at}; "
                    "a column can play only one of these roles", line)
            return
        self.role_of[column] = (role, line)

    def path(self, item: _Item, name: str, *, optional: bool = False) -> Path | None:
        raw = self.text(item, name, optional=optional)
        if raw is None:
            return None
        path = Path(raw).expanduser()
        if not path.is_absolute():
            path = self.base_dir / path
        return path.resolve()

    def validate(self, root: _Item) -> dict[str, Any]:
        """Every field of :class:`SurveyConfig` from the config's tree, or the first problem."""
        entries, key_line = self.top_level(root)
        out: dict[str, Any] = self.survey_files(entries["survey"])
        for _, path in out["survey_waves"][1:]:
            self.reading(entries, key_line, path)  # each wave file must suit the reading options too
        out.update(self.reading(entries, key_line, out["survey"]))
        out.update(self.column_roles(entries))
        out.update(self.design(entries.get("design", _NULL)))
        wave = entries.get("wave", _NULL)
        out["wave"] = self.column(wave, "wave")
        if out["survey_waves"] and out["wave"] is None:
            out["wave"] = "wave"  # wave files need a column to hold each file's wave
        self.claim(out["wave"], "wave", wave.line)
        out["groups"] = self.groups(entries.get("groups", _NULL))
        out["lexicon"] = self.path(entries.get("lexicon", _NULL), "lexicon", optional=True)
        out["seed"] = self.seed(entries.get("seed", _NULL))
        out["max_answer_chars"] = self.answer_cap(entries.get("max_answer_chars", _NULL))
        out["non_answers"] = self.non_answers(entries.get("non_answers"))
        names = entries.get("redact_names")
        out["redact_names"] = tuple(n.strip() for n in self.non_answers(names) if n.strip()) if names else ()
        out["nets"] = self.nets(entries.get("nets", _NULL))
        out["question_text"] = self.question_texts
        out["corrections"] = self.path(entries.get("corrections", _NULL), "corrections", optional=True)
        return out

    def nets(self, item: _Item) -> dict[str, tuple[str, ...]]:
        """``nets:`` maps a net name to the list of theme ids it unites."""
        if item.kind == "null":
            return {}
        if item.kind != "mapping":
            raise self.fail(f"'nets' must map net names to lists of theme ids, found {_describe(item)}",
                            item.line)
        nets: dict[str, tuple[str, ...]] = {}
        for name, (line, sub) in item.entries.items():
            subs = sub.items if sub.kind == "sequence" else []
            members = [str(self.text(m, f"nets.{name}")) for m in subs]
            if sub.kind != "sequence" or not members:
                raise self.fail(f"net '{name}' must list at least one theme id, found {_describe(sub)}",
                                sub.line or line)
            nets[name] = tuple(dict.fromkeys(members))
        return nets

    def top_level(self, root: _Item) -> tuple[dict[str, _Item], dict[str, int | None]]:
        """The top-level entries and their lines, after checking keys and required keys."""
        if root.kind != "mapping":
            raise self.fail(f"a survey config must be a mapping of keys (survey:, id:, questions:), "
                            f"found {_describe(root)}", root.line)
        self.check_keys(root, _TOP_KEYS, "the survey config")
        entries = {key: item for key, (_, item) in root.entries.items()}
        key_line = {key: line for key, (line, _) in root.entries.items()}
        for key in _REQUIRED:
            if key not in entries:
                raise self.fail(f"required key '{key}' is missing; a survey config needs "
                                f"{', '.join(_REQUIRED)}", root.line)
        return entries, key_line

    def survey_files(self, item: _Item) -> dict[str, Any]:
        """``survey:``: one file, a mapping wave -> file, or a list of ``{file:, wave:}``."""
        if item.kind == "mapping":
            pairs = [(wave, line, sub) for wave, (line, sub) in item.entries.items()]
        elif item.kind == "sequence":
            pairs = [self.wave_file_item(sub) for sub in item.items]
        else:
            return {"survey": self.survey_file(item), "survey_waves": ()}
        if not pairs:
            raise self.fail("'survey' lists no files; name one survey file, or one per wave", item.line)
        waves: list[tuple[str, Path]] = []
        for wave, line, sub in pairs:
            if not wave.strip():
                raise self.fail("a wave value in 'survey' must be non-empty text", line)
            path = self.survey_file(sub)
            for other_wave, other_path in waves:
                if other_wave == wave or other_path == path:
                    what = f"wave {wave!r}" if other_wave == wave else f"file {path.name}"
                    raise self.fail(f"{what} is given twice in 'survey'; each wave needs its own file",
                                    sub.line or line)
            waves.append((wave.strip(), path))
        return {"survey": waves[0][1], "survey_waves": tuple(waves)}

    def wave_file_item(self, item: _Item) -> tuple[str, int | None, _Item]:
        """One ``{file: ..., wave: ...}`` item of a ``survey:`` list -> (wave, line, file item)."""
        if item.kind != "mapping":
            raise self.fail(f"each item of a 'survey' list must be {{file: ..., wave: ...}}, found "
                            f"{_describe(item)}", item.line)
        self.check_keys(item, ("file", "wave"), "an item of 'survey'")
        for key in ("file", "wave"):
            if key not in item.entries:
                raise self.fail(f"an item of 'survey' needs '{key}:' (file: the survey file, wave: its wave)",
                                item.line)
        wave = item.entries["wave"][1]
        if wave.kind != "scalar" or isinstance(wave.value, bool):
            raise self.fail(f"'wave' of a survey file must be a value such as 2026, found {_describe(wave)}",
                            wave.line)
        text = wave.value if isinstance(wave.value, str) else str(wave.text)
        return text, wave.line, item.entries["file"][1]

    def survey_file(self, item: _Item) -> Path:
        survey = self.path(item, "survey")
        assert survey is not None
        if survey_format(survey) is None:
            raise self.fail(f"'survey' has an unknown file type '{survey.suffix}'; expected one of "
                            f"{', '.join(SURVEY_FORMATS)}", item.line)
        return survey

    def column_roles(self, entries: dict[str, _Item]) -> dict[str, Any]:
        """The id, questions and weight columns."""
        out: dict[str, Any] = {"id_column": self.column(entries["id"], "id", optional=False)}
        self.claim(out["id_column"], "id", entries["id"].line)
        out["questions"] = self.questions(entries["questions"])
        weight = entries.get("weight", _NULL)
        out["weight"] = self.column(weight, "weight")
        self.claim(out["weight"], "weight", weight.line)
        return out

    def design(self, design: _Item) -> dict[str, Any]:
        """The ``design:`` mapping: strata, cluster and fpc columns, one-cluster policy, id numbering."""
        if design.kind not in ("null", "mapping"):
            raise self.fail(f"'design' must be a mapping (strata:, cluster:, fpc:, one_cluster_stratum:), "
                            f"found {_describe(design)}", design.line)
        self.check_keys(design, _DESIGN_KEYS, "'design'")
        out: dict[str, Any] = {}
        for key in ("strata", "cluster", "fpc"):
            item = design.entries.get(key, (None, _NULL))[1]
            out[key] = self.column(item, f"design.{key}")
            self.claim(out[key], key, item.line)
        policy_item = design.entries.get("one_cluster_stratum", (None, None))[1]
        out["one_cluster_stratum"] = "refuse"
        if policy_item is not None:
            policy = self.text(policy_item, "design.one_cluster_stratum")
            if policy not in ONE_CLUSTER_POLICIES:
                raise self.fail(f"'design.one_cluster_stratum' must be one of {', '.join(ONE_CLUSTER_POLICIES)}, "
                                f"found {policy!r}", policy_item.line)
            out["one_cluster_stratum"] = policy
        nest_item = design.entries.get("cluster_ids_restart", (None, None))[1]
        out["cluster_ids_restart"] = False
        if nest_item is not None and nest_item.kind != "null":
            if nest_item.kind != "scalar" or not isinstance(nest_item.value, bool):
                raise self.fail(f"'design.cluster_ids_restart' must be true or false, found {_describe(nest_item)}",
                                nest_item.line)
            out["cluster_ids_restart"] = nest_item.value
        return out

    def reading(self, entries: dict[str, _Item], key_line: dict[str, int | None],
                survey: Path) -> dict[str, Any]:
        """The reading options (sheet, table, query, encoding, delimiter), each checked against the file type."""
        for option in READING_OPTIONS:
            if option in entries and entries[option].kind != "null":
                misfit = reading_option_misfit(survey, option)
                if misfit:
                    raise self.fail(misfit, key_line[option])
        out: dict[str, Any] = {"sheet": self.sheet(entries.get("sheet", _NULL))}
        out["table"] = self.text(entries.get("table", _NULL), "table", optional=True)
        out["query"] = self.text(entries.get("query", _NULL), "query", optional=True)
        if out["table"] is not None and out["query"] is not None:
            raise self.fail("give either 'table' or 'query', not both", key_line["query"])
        out["encoding"] = self.encoding(entries.get("encoding", _NULL))
        out["delimiter"] = self.delimiter(entries.get("delimiter", _NULL))
        return out

    def sheet(self, sheet: _Item) -> str | int | None:
        if sheet.kind == "null":
            return None
        if sheet.kind == "scalar" and isinstance(sheet.value, int) and not isinstance(sheet.value, bool):
            if sheet.value < 0:
                raise self.fail("'sheet' index must be 0 or more (0 is the first sheet), "
                                f"found {sheet.value}", sheet.line)
            return sheet.value
        return self.text(sheet, "sheet")

    def encoding(self, encoding: _Item) -> str | None:
        name = self.text(encoding, "encoding", optional=True)
        if name is not None:
            try:
                codecs.lookup(name)
            except LookupError:
                raise self.fail(f"unknown text encoding {name!r}; try utf-8, cp1252 or latin-1",
                                encoding.line) from None
        return name

    def delimiter(self, delimiter: _Item) -> str | None:
        if delimiter.kind == "null":
            return None
        value = delimiter.value
        if delimiter.kind != "scalar" or not isinstance(value, str) or len(value) != 1:
            raise self.fail("'delimiter' must be one character (write \"\\t\" in double quotes for "
                            f"a tab), found {_describe(delimiter)}", delimiter.line)
        if delimiter.value in "\"\r\n":
            raise self.fail(f"'delimiter' cannot be {delimiter.value!r}", delimiter.line)
        return delimiter.value

    def questions(self, item: _Item) -> dict[str, str]:
        questions: dict[str, str] = {}
        if item.kind == "mapping":
            pairs = [(name, line, sub) for name, (line, sub) in item.entries.items()]
            for name, line, sub in pairs:
                if not name.strip():
                    raise self.fail("a question name must be non-empty text", line)
                if sub.kind == "mapping":
                    sub = self.worded_question(name, sub)
                column = self.column(sub, f"questions.{name}", optional=False)
                self.claim(column, f"text column of question '{name}'", sub.line or line)
                questions[name] = column
        elif item.kind == "sequence":
            for sub in item.items:
                column = self.column(sub, "questions", optional=False)
                self.claim(column, f"text column of question '{column}'", sub.line)
                questions[column] = column
        else:
            raise self.fail(f"'questions' must map question names to text columns, or list text columns, "
                            f"found {_describe(item)}", item.line)
        if not questions:
            raise self.fail("'questions' is empty; name at least one text column", item.line)
        return questions

    def worded_question(self, name: str, item: _Item) -> _Item:
        """``{column: ..., text: ...}``: records the wording, returns the column's item."""
        self.check_keys(item, ("column", "text"), f"question '{name}'")
        if "column" not in item.entries:
            raise self.fail(f"question '{name}' needs 'column:' (the text column)", item.line)
        if "text" in item.entries:
            self.question_texts[name] = str(self.text(item.entries["text"][1], f"questions.{name}.text"))
        return item.entries["column"][1]

    def groups(self, item: _Item) -> tuple[str, ...]:
        if item.kind == "null":
            return ()
        subs = item.items if item.kind == "sequence" else [item]
        groups: list[str] = []
        for sub in subs:
            column = self.column(sub, "groups", optional=False)
            if column in groups:
                raise self.fail(f"group column '{column}' is listed twice", sub.line)
            self.claim(column, "group", sub.line)
            groups.append(column)
        return tuple(groups)

    def seed(self, item: _Item) -> int:
        if item.kind == "null":
            return 0
        if item.kind != "scalar" or isinstance(item.value, bool) or not isinstance(item.value, int) \
                or item.value < 0:
            raise self.fail(f"'seed' must be a whole number 0 or more, found {_describe(item)}", item.line)
        return int(item.value)

    def answer_cap(self, item: _Item) -> int | None:
        """``max_answer_chars``: the longest answer kept whole (the rest is cut and counted)."""
        if item.kind == "null":
            return None
        if item.kind != "scalar" or isinstance(item.value, bool) or not isinstance(item.value, int) \
                or item.value < 100:
            raise self.fail(f"'max_answer_chars' must be a whole number of 100 or more, found {_describe(item)}",
                            item.line)
        return int(item.value)

    def non_answers(self, item: _Item | None) -> tuple[str, ...]:
        if item is None:
            return DEFAULT_NON_ANSWERS
        if item.kind == "null":
            return ()
        subs = item.items if item.kind == "sequence" else [item]
        values: list[str] = []
        for sub in subs:
            if sub.kind != "scalar" or isinstance(sub.value, bool):
                raise self.fail(f"'non_answers' must be a list of texts, found {_describe(sub)}", sub.line)
            values.append(normalise_answer(str(sub.text if not isinstance(sub.value, str) else sub.value)))
        return tuple(dict.fromkeys(v for v in values if v))


def normalise_answer(text: str) -> str:
    """The form in which answers are compared with non-answers: trimmed, inner
    whitespace runs collapsed to one space, lower-cased."""
    return " ".join(text.split()).lower()


def config_from_mapping(mapping: Mapping[str, Any], base_dir: str | Path = ".",
                        *, source: str | Path = "survey config") -> SurveyConfig:
    """Build a :class:`SurveyConfig` from a plain mapping (for notebooks).

    Parameters
    ----------
    mapping : mapping
        The same keys as a YAML survey config.
    base_dir : path, default "."
        Folder that relative ``survey`` and ``lexicon`` paths are resolved against.
    source : str or path, default "survey config"
        Name used in error messages.

    Raises
    ------
    InputError
        For the same problems as :func:`load_config` (without line numbers).
    """
    builder = _Builder(source)
    fields = _Validator(builder, Path(base_dir).expanduser().resolve()).validate(builder.from_python(mapping))
    return SurveyConfig(path=None, **fields)


def load_config(path: str | Path) -> SurveyConfig:
    """Read and validate a YAML survey config.

    Parameters
    ----------
    path : path
        The config file. Relative ``survey`` and ``lexicon`` paths in it are resolved
        against its folder.

    Returns
    -------
    SurveyConfig

    Raises
    ------
    InputError
        With ``source`` the config path and ``line`` the offending line: missing or
        unreadable file, not YAML, not a mapping, unknown or repeated keys, missing
        required keys, wrong value types, a column in incompatible roles, an unknown
        ``one_cluster_stratum`` policy, a reading option that does not fit the survey's file type.
    """
    config_path = Path(path).expanduser()
    if not config_path.exists():
        raise InputError("survey config not found", source=config_path)
    if config_path.is_dir():
        raise InputError("expected a survey config file (YAML), found a folder", source=config_path)
    try:
        text = read_yaml_bytes(config_path, "survey config").decode("utf-8-sig")
    except UnicodeDecodeError as error:
        raise InputError(f"a survey config must be UTF-8 text (bad byte at offset {error.start})",
                         source=config_path) from error
    except OSError as error:
        raise InputError(f"cannot read the survey config: {error.strerror}", source=config_path) from error
    builder = _Builder(config_path)
    loader = BoundedLoader(text)
    try:
        node = loader.get_single_node()
    except yaml.MarkedYAMLError as error:
        mark = error.problem_mark or error.context_mark
        line = mark.line + 1 if mark is not None else None
        raise InputError(f"not valid YAML: {error.problem or error.context}", source=config_path,
                         line=line) from error
    except yaml.YAMLError as error:
        raise InputError(f"not valid YAML: {error}", source=config_path) from error
    if node is None:
        loader.dispose()
        raise InputError("the survey config is empty; it needs survey:, id: and questions:",
                         source=config_path, line=1)
    try:
        root = builder.from_node(node, loader)
    finally:
        loader.dispose()
    fields = _Validator(builder, config_path.resolve().parent).validate(root)
    return SurveyConfig(path=config_path.resolve(), **fields)
