"""Which charts a set of result folders supports, and drawing them all.

:func:`load_results` gathers the tables that ``textkit code``, ``textkit
prevalence``, ``textkit keyness`` and the topic step write (from one or more
folders); :func:`plan_charts` lists the charts they support, each with a file
stem that says what it shows; :func:`draw_chart` draws one. ``textkit charts``
is these three functions and a writer.
"""

from __future__ import annotations

import json
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pandas as pd

from ..errors import AnalysisError, InputError
from .style import ChartText, caption_text, chart_style

ALL = "(all)"
#: Table name -> (file names tried in order, the command that writes it).
TABLES = {
    "prevalence": (("prevalence.csv",), "textkit prevalence"),
    "comparisons": (("comparisons.csv",), "textkit prevalence"),
    "keyness": (("keyness.csv",), "textkit keyness"),
    "coded": (("coded.parquet", "coded.csv"), "textkit code"),
    "topics": (("topics.csv",), "textkit topics"),
    "k_selection": (("k_selection.csv",), "textkit topics"),
}
_NUMERIC = ("n", "weighted_n", "n_eff", "estimate", "se", "ci_low", "ci_high", "df", "deff", "difference",
            "p_value", "q_value", "estimate_a", "estimate_b", "z", "log_odds", "log_ratio", "g2", "rate_group",
            "rate_reference", "respondents_group", "respondents_reference", "weight", "rank", "k", "stability",
            "coherence", "n_words")


@dataclass
class ResultTables:
    """The result tables found, with their manifests and paths.

    Attributes
    ----------
    tables : dict of name -> DataFrame
        Keys among ``TABLES``.
    manifests : dict of name -> dict
        The ``manifest.json`` beside each table (empty when missing).
    paths : dict of name -> Path
    """

    tables: dict[str, pd.DataFrame] = field(default_factory=dict)
    manifests: dict[str, dict] = field(default_factory=dict)
    paths: dict[str, Path] = field(default_factory=dict)

    def require(self, name: str) -> pd.DataFrame:
        """The table ``name`` or a one-line error naming the file and the command that makes it."""
        if name not in self.tables:
            files, command = TABLES[name]
            raise InputError(f"no {files[0]} in the results folder(s); run '{command}' to make it")
        return self.tables[name]

    @property
    def themes(self) -> list[str]:
        for name in ("coded", "prevalence"):
            themes = self.manifests.get(name, {}).get("themes")
            if themes:
                return list(themes)
        if "prevalence" in self.tables:
            return list(dict.fromkeys(self.tables["prevalence"]["theme"]))
        return []

    def _codes(self) -> list[dict]:
        codes = self.manifests.get("coded", {}).get("codes") or []
        return [c for c in codes if isinstance(c, dict) and c.get("id")]

    def themes_for(self, question: str) -> list[str] | None:
        """The codes that belong to ``question``: every theme and net, and only that question's topics.

        None when no coded manifest says which topic belongs where (every code is then drawn).
        """
        other = {str(c["id"]) for c in self._codes() if c.get("kind") == "topic" and c.get("question")
                 and str(c["question"]) != str(question)}
        if not other:
            return None
        return [t for t in self.themes_all if t not in other]

    @property
    def themes_all(self) -> list[str]:
        """Themes, topics and nets in the order of the statistics tables (falling back to :attr:`themes`)."""
        for name in ("prevalence", "comparisons"):
            if name in self.tables:
                return [str(t) for t in dict.fromkeys(self.tables[name]["theme"])]
        return self.themes

    def labels(self) -> dict[str, str]:
        """Display names: theme labels, 'Topic: ...' for discovered topics, '... (net)' for nets."""
        found: dict[str, str] = {}
        for name in ("prevalence", "comparisons"):
            table = self.tables.get(name)
            if table is not None and "theme_label" in table.columns:
                pairs = table[["theme", "theme_label"]].drop_duplicates("theme").dropna()
                found.update(zip(pairs["theme"].astype(str), pairs["theme_label"].astype(str), strict=True))
        for code in self._codes():
            label = str(code.get("label") or found.get(str(code["id"])) or code["id"])
            found[str(code["id"])] = f"Topic: {label}" if code.get("kind") == "topic" else label
        nets = self.manifests.get("prevalence", {}).get("nets") or {}
        for net in nets:
            label = found.get(str(net), str(net))
            found[str(net)] = (label.replace("_", " ").capitalize() if label == str(net) else label) + " (net)"
        return found

    def question_texts(self) -> dict[str, str]:
        """Question wording from the statistics tables' ``question_text`` column or any manifest's roles."""
        wording: dict[str, str] = {}
        for manifest in self.manifests.values():
            for question, text in (manifest.get("roles", {}).get("question_text") or {}).items():
                if text:
                    wording.setdefault(str(question), str(text))
        table = self.tables.get("prevalence")
        if table is not None and "question_text" in table.columns:
            pairs = table[["question", "question_text"]].dropna().drop_duplicates("question")
            wording.update(zip(pairs["question"].astype(str), pairs["question_text"].astype(str), strict=True))
        return wording


def _read(path: Path) -> pd.DataFrame:
    from ..io.readers import read_table

    frame, _ = read_table(path)
    for column in frame.columns:
        if column in _NUMERIC:
            values = pd.to_numeric(frame[column], errors="coerce")
            text = frame[column].astype("string").str.strip()
            bad = values.isna().to_numpy() & text.notna().to_numpy() & (text != "").fillna(False).to_numpy()
            bad &= ~text.str.lower().isin(["nan", "inf", "-inf"]).fillna(False).to_numpy()
            if bad.any():
                row = int(bad.argmax())
                raise InputError(f"expected a number, found '{text.iloc[row]}'; was the table edited by hand? "
                                 "Run the command that makes it again", source=path, row=row + 2, column=column)
            frame[column] = values
    return frame


def _manifest(folder: Path) -> dict:
    path = folder / "manifest.json"
    try:
        return json.loads(path.read_text(encoding="utf-8")) if path.exists() else {}
    except (OSError, ValueError) as error:
        raise InputError(f"manifest.json cannot be read: {error}", source=path) from error


def load_results(folders: Sequence[str | Path]) -> ResultTables:
    """Read every known result table found in ``folders`` (the first folder holding a table wins).

    A coded table named in a prevalence manifest (``inputs.coded.path``) is read
    too when no folder holds one, for the co-occurrence chart.
    """
    found = ResultTables()
    for folder in map(Path, folders):
        if not folder.is_dir():
            raise InputError("expected a results folder, found no such folder" if not folder.exists()
                             else "expected a results folder, found a file", source=folder)
        for name, (files, _) in TABLES.items():
            path = next((folder / f for f in files if (folder / f).exists()), None)
            if path is not None and name not in found.tables:
                found.tables[name] = _read(path)
                found.manifests[name] = _manifest(folder)
                found.paths[name] = path
    coded_path = found.manifests.get("prevalence", {}).get("inputs", {}).get("coded", {}).get("path")
    if "coded" not in found.tables and coded_path and Path(coded_path).exists():
        found.tables["coded"] = _read(Path(coded_path))
        found.manifests["coded"] = _manifest(Path(coded_path).parent)
        found.paths["coded"] = Path(coded_path)
    if not found.tables:
        wanted = ", ".join(sorted({files[0] for files, _ in TABLES.values()}))
        raise InputError(f"no result tables found (looked for {wanted}); run 'textkit prevalence' or "
                         "'textkit keyness' first", source=", ".join(map(str, folders)))
    return found


@dataclass(frozen=True)
class ChartSpec:
    """One chart to draw: its kind, its arguments, and the file stem that names it."""

    kind: str
    stem: str
    arguments: Mapping[str, Any]


def slug(*parts: str) -> str:
    """A file-name-safe stem: lower case, words joined by '-', parts by '__'."""
    cleaned = [re.sub(r"[^\w]+", "-", str(p).lower(), flags=re.UNICODE).strip("-") or "x" for p in parts]
    return "__".join(cleaned)


def _check_filter(values: Sequence[str], wanted: str | None, what: str, table: str) -> None:
    if wanted is not None and wanted not in values:
        raise AnalysisError(f"{what} '{wanted}' is not in {table}; valid values: {', '.join(sorted(values))}")


def plan_charts(results: ResultTables, *, group_var: str | None = None, theme: str | None = None,
                wave: str | None = None, clouds: bool = False) -> list[ChartSpec]:
    """Every chart the tables support, narrowed by the filters.

    Prevalence: per question x group variable (and the whole sample) within
    ``wave`` (default: waves pooled). Differences: wave against wave, and per
    group variable each group against the rest (with ``theme``: every pair of
    groups for that theme instead). Keyness: bars per comparison (and a
    two-sided cloud with ``clouds``). Co-occurrence: per question (coded table
    needed). Topics: top terms and the k-selection curve per question x scope.
    """
    specs: list[ChartSpec] = []
    wave_value = wave or ALL
    prevalence = results.tables.get("prevalence")
    if prevalence is not None:
        _check_filter(list(prevalence["group_var"].unique()), group_var, "group variable", "prevalence.csv")
        _check_filter(list(prevalence["wave"].unique()), wave_value, "wave", "prevalence.csv")
        _check_filter(list(prevalence["theme"].unique()), theme, "theme", "prevalence.csv")
        for question in dict.fromkeys(prevalence["question"]):
            for variable in dict.fromkeys(prevalence["group_var"]):
                if group_var is None or variable in (group_var, ALL):
                    specs.append(ChartSpec("prevalence", slug("prevalence", question, f"by-{variable}",
                                                              f"wave-{wave_value}"),
                                           {"question": question, "group_var": variable, "wave": wave_value,
                                            "themes": [theme] if theme else None}))
    specs += _difference_specs(results, group_var, theme, wave_value)
    specs += _keyness_specs(results, group_var, wave, clouds)
    coded = results.tables.get("coded")
    if coded is not None and results.themes and theme is None:
        for question in dict.fromkeys(coded["question"]):
            specs.append(ChartSpec("cooccurrence", slug("cooccurrence", question), {"question": question}))
    for name, kind in (("topics", "topic_terms"), ("k_selection", "k_selection")):
        table = results.tables.get(name)
        if table is None:
            continue
        scopes = table[["question", "scope"]] if "scope" in table.columns else table[["question"]].assign(scope="")
        for question, scope in dict.fromkeys(zip(scopes["question"], scopes["scope"].astype(str), strict=True)):
            specs.append(ChartSpec(kind, slug(kind.replace("_", "-"), question, scope or "all"),
                                   {"question": question, "scope": scope or None}))
    return specs


def _difference_specs(results: ResultTables, group_var: str | None, theme: str | None,
                      wave: str) -> list[ChartSpec]:
    comparisons = results.tables.get("comparisons")
    if comparisons is None:
        return []
    specs = []
    for question in dict.fromkeys(comparisons["question"]):
        mine = comparisons[comparisons["question"] == question]
        if theme is None and group_var is None and (mine["wave_a"] != mine["wave_b"]).any():
            specs.append(ChartSpec("differences", slug("differences", question, "waves"),
                                   {"question": question, "kind": "waves"}))
        variables = [v for v in dict.fromkeys(mine["group_var"]) if v != ALL and group_var in (None, v)]
        for variable in variables:
            if theme is not None:
                specs.append(ChartSpec("differences", slug("differences", question, variable, "pairs", theme,
                                                           f"wave-{wave}"),
                                       {"question": question, "kind": "pairs", "group_var": variable,
                                        "theme": theme, "wave": wave}))
                continue
            specs.append(ChartSpec("differences", slug("differences", question, variable, "groups-vs-rest",
                                                       f"wave-{wave}"),
                                   {"question": question, "kind": "vs_rest", "group_var": variable, "wave": wave}))
    return specs


def _keyness_specs(results: ResultTables, group_var: str | None, wave: str | None, clouds: bool) -> list[ChartSpec]:
    keyness = results.tables.get("keyness")
    if keyness is None:
        return []
    _check_filter(list(keyness["group_var"].unique()), group_var, "group variable", "keyness.csv")
    specs = []
    keys = keyness[["question", "group_var", "group", "reference"]].drop_duplicates()
    for question, variable in dict.fromkeys(zip(keys["question"], keys["group_var"], strict=True)):
        if group_var in (None, variable):
            specs.append(ChartSpec("keyness_panels", slug("keyness", question, variable),
                                   {"question": question, "group_var": variable}))
    for question, variable, group, reference in keys.itertuples(index=False) if clouds else ():
        if group_var not in (None, variable) or (wave is not None and variable == "wave" and group != wave):
            continue
        other = "rest" if reference == "(rest)" else reference
        specs.append(ChartSpec("keyness_cloud", slug("keyness-cloud", question, variable, group, f"vs-{other}"),
                               {"question": question, "group_var": variable, "group": group, "reference": reference}))
    return specs


def chart_text(results: ResultTables, spec: ChartSpec, question_wording: Mapping[str, str] | None = None,
               source: str | None = None) -> ChartText:
    """Title, subtitle (question wording) and caption (source, base, weighting, intervals) of a chart."""
    from .charts import MEASURE_NAMES

    arguments = spec.arguments
    question = str(arguments.get("question", ""))
    subtitle = ((question_wording or {}).get(question) or results.question_texts().get(question)
                or f"Question: {question}")
    table = {"prevalence": "prevalence", "differences": "comparisons", "keyness": "keyness",
             "keyness_panels": "keyness",
             "keyness_cloud": "keyness", "cooccurrence": "coded", "topic_terms": "topics",
             "k_selection": "k_selection"}[spec.kind]
    manifest = results.manifests.get(table, {})
    roles = manifest.get("roles", {})
    settings = manifest.get("settings", {})
    where = source or _source_name(manifest, results.paths.get(table))
    weighting = (f"survey weights ('{roles['weight']}')" if roles.get("weight") else "unweighted") if roles else ""
    interval = ""
    if table in ("prevalence", "comparisons") and settings.get("method"):
        confidence = float(settings.get("confidence", 0.95))
        interval = f"{confidence:.0%} {settings['method']}; publishing rule {settings.get('rule', {}).get('name', '')}"
        if table == "comparisons":
            interval += "; significance after Benjamini-Hochberg FDR"
    base = _base(results, spec)
    extra = []
    if spec.kind in ("keyness", "keyness_panels"):
        extra.append(f"Measure: {MEASURE_NAMES['z']}; terms counted once per respondent.")
    title = _title(spec)
    return ChartText(title, subtitle, caption_text(source=where, base=base, weighting=weighting, interval=interval,
                                                   extra=extra))


def _source_name(manifest: Mapping[str, Any], path: Path | None) -> str:
    survey = manifest.get("survey", {}).get("path") or manifest.get("config", {}).get("path")
    if not survey:
        inputs = manifest.get("inputs", {})
        survey = inputs.get("config") or inputs.get("coded", {}).get("path")
    name = Path(str(survey)).name if survey else ""
    return f"{name} ({path.name})" if name and path is not None else (path.name if path is not None else name)


def _base(results: ResultTables, spec: ChartSpec) -> str:
    arguments = spec.arguments
    if spec.kind == "prevalence":
        rows = results.tables["prevalence"]
        rows = rows[(rows["question"] == arguments["question"]) & (rows["wave"] == arguments["wave"])
                    & (rows["group_var"] == ALL)]
        if len(rows):
            return f"{int(rows['n'].max()):,} respondents who answered (unweighted); group bases in the legend"
    if spec.kind in ("keyness", "keyness_panels", "keyness_cloud"):
        return "respondents who answered, in each group"
    if spec.kind == "cooccurrence":
        coded = results.tables["coded"]
        mine = coded[coded["question"] == arguments["question"]]
        answered = int(pd.to_numeric(mine["answered"], errors="coerce").sum()) if "answered" in mine else len(mine)
        return f"{answered:,} answers"
    return "respondents who answered"


def _title(spec: ChartSpec) -> str:
    a = spec.arguments
    if spec.kind == "prevalence":
        by = "" if a["group_var"] == ALL else f" by {a['group_var']}"
        wave = "" if a["wave"] == ALL else f", wave {a['wave']}"
        return f"How often each theme comes up{by}{wave}"
    if spec.kind == "differences":
        if a["kind"] == "waves":
            return "Change in theme prevalence between waves"
        if a["kind"] == "vs_rest" and a.get("group") is None:
            return f"Where {a['group_var']} groups differ most from the rest of the sample"
        if a["kind"] == "vs_rest":
            return f"{a['group']} against the rest of the sample ({a['group_var']})"
        return f"{a['theme']}: differences between {a['group_var']} groups"
    if spec.kind == "keyness":
        other = "the rest" if a["reference"] == "(rest)" else a["reference"]
        return f"Words and phrases that set {a['group']} apart from {other}"
    if spec.kind == "keyness_panels":
        return f"Words and phrases that set each {a['group_var']} group apart"
    if spec.kind == "keyness_cloud":
        other = "the rest" if a["reference"] == "(rest)" else a["reference"]
        return f"{a['group']} and {other}: the words that set them apart"
    if spec.kind == "cooccurrence":
        return "Which themes come up together"
    if spec.kind == "topic_terms":
        return "Topics and their top terms"
    return "How many topics: stability and coherence against k"


def draw_chart(results: ResultTables, spec: ChartSpec, *, text: ChartText | None = None, seed: int = 0,
               font_path: str | None = None, max_rows: int = 25) -> Any:
    """Draw the chart of ``spec`` from ``results``; returns a matplotlib Figure.

    ``max_rows``: differences of every group against the rest keep the largest
    this many (significant ones first).
    """
    from . import charts, clouds

    arguments = dict(spec.arguments)
    question = str(arguments.get("question", ""))
    if spec.kind == "prevalence":
        themes = arguments.pop("themes", None) or results.themes_for(question)
        return charts.prevalence_chart(results.require("prevalence"), text=text, themes=themes,
                                       labels=results.labels(), **arguments)
    if spec.kind == "differences":
        rows = charts.difference_rows(results.require("comparisons"), themes=results.themes_for(question),
                                      labels=results.labels(), **arguments)
        if arguments.get("kind") == "vs_rest" and arguments.get("group") is None:
            rows = charts.largest_differences(rows, max_rows)
        return charts.differences_chart(rows, text=text)
    if spec.kind == "keyness":
        return charts.keyness_chart(results.require("keyness"), text=text, **arguments)
    if spec.kind == "keyness_panels":
        return charts.keyness_panels(results.require("keyness"), text=text, **arguments)
    if spec.kind == "keyness_cloud":
        figure, _ = clouds.keyness_cloud(results.require("keyness"), text=text, seed=seed, font_path=font_path,
                                         **arguments)
        return figure
    if spec.kind == "cooccurrence":
        coded = results.require("coded")
        weight = results.manifests.get("coded", {}).get("roles", {}).get("weight")
        themes = [t for t in results.themes if t in coded.columns]
        for column in themes:
            coded[column] = pd.to_numeric(coded[column], errors="coerce").fillna(0)
        return charts.cooccurrence_chart(coded, themes, question=arguments["question"], weight=weight, text=text,
                                         labels=results.labels())
    if spec.kind == "topic_terms":
        return charts.topic_terms_chart(results.require("topics"), text=text, **arguments)
    if spec.kind == "k_selection":
        return charts.k_selection_chart(results.require("k_selection"), text=text, **arguments)
    raise AnalysisError(f"unknown chart kind '{spec.kind}'")


_WORKER_RESULTS: ResultTables | None = None


def _start_worker(results: ResultTables) -> None:
    global _WORKER_RESULTS
    import warnings

    warnings.filterwarnings("ignore", message="Glyph .* missing from font")
    _WORKER_RESULTS = results


def _render_one(spec: ChartSpec, text: ChartText, formats: tuple[str, ...], dpi: int, seed: int,
                font_path: str | None) -> tuple[dict[str, bytes], list[str]]:
    import warnings

    from ..io.output import render_figure

    assert _WORKER_RESULTS is not None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        figure = draw_chart(_WORKER_RESULTS, spec, text=text, seed=seed, font_path=font_path)
        with chart_style():  # the settings that apply when drawing into the file (text hinting)
            files = {f"{spec.stem}.{fmt}": render_figure(figure, fmt, dpi) for fmt in formats}
    missing = sorted({str(w.message) for w in caught if "missing from font" in str(w.message)})
    return files, missing


def render_charts(results: ResultTables, specs: Sequence[ChartSpec], texts: Sequence[ChartText], *,
                  formats: Sequence[str] = ("png", "svg"), dpi: int = 200, seed: int = 0,
                  font_path: str | None = None, jobs: int = 1) -> tuple[dict[str, bytes], list[str]]:
    """Draw and render every chart: ({file name: bytes}, notes about glyphs the font lacks).

    ``jobs`` > 1 renders in that many worker processes; the bytes do not depend on it.
    """
    arguments = [(spec, text, tuple(formats), dpi, seed, font_path) for spec, text in zip(specs, texts, strict=True)]
    if jobs > 1 and len(specs) > 1:
        from concurrent.futures import ProcessPoolExecutor

        with ProcessPoolExecutor(max_workers=jobs, initializer=_start_worker, initargs=(results,)) as pool:
            outcomes = list(pool.map(_render_one, *zip(*arguments, strict=True)))
    else:
        _start_worker(results)
        outcomes = [_render_one(*item) for item in arguments]
    files: dict[str, bytes] = {}
    notes: set[str] = set()
    for rendered, missing in outcomes:
        files.update(rendered)
        notes.update(missing)
    return files, sorted(notes)
