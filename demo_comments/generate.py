"""Generate the invented Halvessa Islands visitor survey used by textkit's demo.

Everything here is invented: the islands, towns, beaches, ferry line, markets of
origin and people. Run from the repository root::

    python demo_comments/generate.py            # rewrites the files below, byte-identically
    python demo_comments/generate.py --scale 0.1 --out /tmp/demo

Writes, next to this script (or to ``--out``):

``survey.csv``
    One row per response: ids, wave, design columns (stratum, psu, weight,
    stratum_population), groups (market, age_band, trip_purpose, site, season)
    and the two free-text answers ``low_point`` and ``high_point``.
``planted_labels.csv``
    Generator truth: the theme ids each answer was built to raise.
``truth.csv``
    The planted population probability of every theme, per question x wave x
    group, with the realised weighted share of the sample beside it.

How an answer is made
---------------------
Each population cell (stratum x market x age band x trip purpose x wave) has a
probability per theme and question: a base rate times the multipliers in
``RULES``. Interview shifts (PSUs) carry mean-one shocks for weather and ferry
trouble, so answers cluster. Themes are drawn as independent Bernoulli trials,
at most three are kept (a random three when more are drawn), and the answer is
then either blank, an "n/a" style answer, off-topic, or text composed from the
phrase bank (``phrasebank.txt``) for exactly the kept themes. ``truth.csv``
accounts for the cap and the non-substantive answers exactly, so its
``planted_probability`` is the expected share of *all* respondents of a group
whose answer raises the theme.
"""

from __future__ import annotations

import argparse
import re
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
SEED = 20251117

THEMES: tuple[str, ...] = (
    "cost_value", "crowding", "queues", "cleanliness", "facilities", "toilets", "connectivity",
    "staff", "information_signage", "weather", "transport", "parking", "accommodation",
    "food_drink", "accessibility", "safety", "noise", "nature_wildlife", "booking_tickets",
    "opening_hours", "shopping", "guides_tours", "language", "children_families",
    "activities_events", "maintenance", "sustainability", "payment", "history_culture",
    "drones",
)
QUESTIONS: tuple[str, ...] = ("low_point", "high_point")
WAVES: tuple[str, ...] = ("2025", "2026")

SITES = {
    "FER": "Saltmarrow ferry terminal",
    "PEL": "Pellin Sands",
    "KEL": "Kelvetta old town",
    "GUL": "Gullwhistle Cove",
}
SEASONS: tuple[str, ...] = ("summer", "shoulder")
MARKETS: tuple[str, ...] = ("Domestic", "Norvania", "Estrelia", "Vossland", "Duvenia", "Tessary")
LANGUAGE_OF = {"Domestic": "English", "Norvania": "Norvanian", "Estrelia": "Estrelian",
               "Vossland": "Vosslandic", "Duvenia": "Duvenian", "Tessary": "Tessarian"}
AGE_BANDS: tuple[str, ...] = ("16-34", "35-54", "55+")
PURPOSES: tuple[str, ...] = ("holiday", "family holiday", "day trip", "visiting friends or relatives",
                             "business or event")

# Visitors in the season at each site (wave 2025) and interviews per wave.
STRATUM_POPULATION = {
    ("FER", "summer"): 182_000, ("FER", "shoulder"): 88_000,
    ("PEL", "summer"): 141_000, ("PEL", "shoulder"): 46_000,
    ("KEL", "summer"): 118_000, ("KEL", "shoulder"): 71_000,
    ("GUL", "summer"): 59_000, ("GUL", "shoulder"): 19_500,
}
STRATUM_SAMPLE = {
    ("FER", "summer"): 600, ("FER", "shoulder"): 380,
    ("PEL", "summer"): 500, ("PEL", "shoulder"): 270,
    ("KEL", "summer"): 450, ("KEL", "shoulder"): 360,
    ("GUL", "summer"): 320, ("GUL", "shoulder"): 230,
}
WAVE_GROWTH = {"2025": 1.0, "2026": 1.07}
WAVE_SAMPLE_FACTOR = {"2025": 1.0, "2026": 1.04}

# Answers that are blank, "n/a"-like or off-topic, by question; blanks also vary by age.
BLANK_RATE = {"low_point": 0.06, "high_point": 0.04}
BLANK_AGE_FACTOR = {"16-34": 1.5, "35-54": 1.0, "55+": 0.6}
NA_RATE = {"low_point": 0.10, "high_point": 0.03}
OFFTOPIC_RATE = {"low_point": 0.015, "high_point": 0.015}
MAX_THEMES = 3

# Base probability of each theme among substantive answers (wave 2025, reference cell).
BASE = {
    "low_point": {
        "cost_value": 0.13, "crowding": 0.06, "queues": 0.07, "cleanliness": 0.045, "facilities": 0.03,
        "toilets": 0.06, "connectivity": 0.025, "staff": 0.04, "information_signage": 0.03,
        "weather": 0.07, "transport": 0.05, "parking": 0.035, "accommodation": 0.03,
        "food_drink": 0.05, "accessibility": 0.012, "safety": 0.012, "noise": 0.02,
        "nature_wildlife": 0.012, "booking_tickets": 0.022, "opening_hours": 0.025, "shopping": 0.01,
        "guides_tours": 0.012, "language": 0.004, "children_families": 0.015,
        "activities_events": 0.02, "maintenance": 0.025, "sustainability": 0.01, "payment": 0.012,
        "history_culture": 0.005, "drones": 0.0,
    },
    "high_point": {
        "cost_value": 0.02, "crowding": 0.03, "queues": 0.0, "cleanliness": 0.03, "facilities": 0.01,
        "toilets": 0.005, "connectivity": 0.004, "staff": 0.10, "information_signage": 0.015,
        "weather": 0.07, "transport": 0.03, "parking": 0.005, "accommodation": 0.05,
        "food_drink": 0.15, "accessibility": 0.004, "safety": 0.006, "noise": 0.02,
        "nature_wildlife": 0.38, "booking_tickets": 0.006, "opening_hours": 0.003, "shopping": 0.03,
        "guides_tours": 0.04, "language": 0.002, "children_families": 0.02,
        "activities_events": 0.10, "maintenance": 0.002, "sustainability": 0.006, "payment": 0.002,
        "history_culture": 0.08, "drones": 0.0,
    },
}

# (question, theme, condition, multiplier): the planted group and wave differences.
RULES: list[tuple[str, str, dict[str, str], float]] = [
    # cost and value: much higher for Vossland, rising in 2026 (more so for Vossland)
    ("low_point", "cost_value", {"market": "Vossland"}, 2.2),
    ("low_point", "cost_value", {"market": "Domestic"}, 0.8),
    ("low_point", "cost_value", {"wave": "2026"}, 1.35),
    ("low_point", "cost_value", {"wave": "2026", "market": "Vossland"}, 1.3),
    ("low_point", "cost_value", {"trip_purpose": "family holiday"}, 1.3),
    # queues: day trips and the ferry terminal
    ("low_point", "queues", {"trip_purpose": "day trip"}, 2.5),
    ("low_point", "queues", {"site": "FER"}, 1.6),
    ("low_point", "queues", {"season": "summer"}, 1.3),
    # crowding: summer, beaches
    ("low_point", "crowding", {"season": "summer"}, 2.6),
    ("low_point", "crowding", {"site": "PEL"}, 1.4),
    ("low_point", "crowding", {"site": "GUL"}, 1.3),
    ("high_point", "crowding", {"season": "shoulder"}, 2.2),
    ("high_point", "crowding", {"age_band": "55+"}, 1.5),
    # language: two foreign markets only
    ("low_point", "language", {"market": "Domestic"}, 0.0),
    ("low_point", "language", {"market": "Estrelia"}, 16.0),
    ("low_point", "language", {"market": "Tessary"}, 12.0),
    ("high_point", "language", {"market": "Domestic"}, 0.0),
    ("high_point", "language", {"market": "Estrelia"}, 8.0),
    ("high_point", "language", {"market": "Tessary"}, 6.0),
    # accessibility: 55+
    ("low_point", "accessibility", {"age_band": "55+"}, 4.0),
    ("high_point", "accessibility", {"age_band": "55+"}, 3.0),
    # children and families: family holidays
    ("low_point", "children_families", {"trip_purpose": "family holiday"}, 5.5),
    ("high_point", "children_families", {"trip_purpose": "family holiday"}, 7.0),
    ("high_point", "children_families", {"age_band": "55+"}, 1.5),
    # toilets: beaches, improved in 2026 (new block at Pellin Sands)
    ("low_point", "toilets", {"site": "PEL"}, 1.9),
    ("low_point", "toilets", {"site": "GUL"}, 1.6),
    ("low_point", "toilets", {"wave": "2026"}, 0.65),
    # parking: domestic visitors drive on; day trips
    ("low_point", "parking", {"market": "Domestic"}, 2.0),
    ("low_point", "parking", {"trip_purpose": "day trip"}, 1.5),
    ("low_point", "parking", {"site": "GUL"}, 1.5),
    # transport: ferry terminal
    ("low_point", "transport", {"site": "FER"}, 1.6),
    ("low_point", "transport", {"trip_purpose": "day trip"}, 1.3),
    # weather: shoulder season complaints, summer praise
    ("low_point", "weather", {"season": "shoulder"}, 1.8),
    ("high_point", "weather", {"season": "summer"}, 1.6),
    # cleanliness, noise: summer
    ("low_point", "cleanliness", {"season": "summer"}, 1.4),
    ("low_point", "noise", {"season": "summer"}, 1.5),
    ("low_point", "noise", {"age_band": "55+"}, 1.4),
    # connectivity: business visitors and 16-34
    ("low_point", "connectivity", {"trip_purpose": "business or event"}, 3.0),
    ("low_point", "connectivity", {"age_band": "16-34"}, 1.5),
    # accommodation: not for day trips or those staying with friends
    ("low_point", "accommodation", {"trip_purpose": "day trip"}, 0.1),
    ("low_point", "accommodation", {"trip_purpose": "visiting friends or relatives"}, 0.3),
    ("high_point", "accommodation", {"trip_purpose": "day trip"}, 0.1),
    ("high_point", "accommodation", {"trip_purpose": "visiting friends or relatives"}, 0.3),
    # booking: new online booking system in 2026
    ("low_point", "booking_tickets", {"wave": "2026"}, 1.8),
    # opening hours and activities: shoulder season
    ("low_point", "opening_hours", {"season": "shoulder"}, 2.0),
    ("low_point", "activities_events", {"season": "shoulder"}, 1.5),
    ("high_point", "activities_events", {"age_band": "16-34"}, 1.5),
    ("high_point", "activities_events", {"season": "summer"}, 1.3),
    # payment: Norvania (card culture)
    ("low_point", "payment", {"market": "Norvania"}, 2.5),
    # history and culture: old town, Tessary
    ("high_point", "history_culture", {"site": "KEL"}, 2.0),
    ("high_point", "history_culture", {"market": "Tessary"}, 1.5),
    ("high_point", "nature_wildlife", {"site": "GUL"}, 1.2),
    ("high_point", "nature_wildlife", {"site": "KEL"}, 0.75),
    ("high_point", "food_drink", {"market": "Duvenia"}, 1.4),
    # drones: wave 2026 only; beaches, summer, Duvenia
    ("low_point", "drones", {"wave": "2026"}, 1.0),
]
DRONE_BASE_2026 = 0.045
DRONE_RULES: list[tuple[dict[str, str], float]] = [
    ({"site": "PEL"}, 1.7), ({"site": "GUL"}, 2.2), ({"site": "KEL"}, 0.5),
    ({"season": "summer"}, 1.3), ({"market": "Duvenia"}, 1.6),
]

# Interview-shift shocks: (probability of a bad shift, multiplier on a bad shift); the other
# shifts get the multiplier that makes the mean exactly one.
WEATHER_SHOCK = (0.2, 2.5)   # low-point weather; high-point weather gets 0.4 on a bad shift
FERRY_SHOCK = (0.15, 3.0)    # low-point transport


# ---------------------------------------------------------------------------------------------
# phrase bank

def load_phrasebank(path: Path = HERE / "phrasebank.txt") -> dict[tuple[str, str], list[str]]:
    """Read the phrase bank: ``{(section, key): [phrases]}`` in file order."""
    bank: dict[tuple[str, str], list[str]] = {}
    current: list[str] | None = None
    for line in path.read_text(encoding="utf-8").splitlines():
        if not line.strip() or line.startswith("#"):
            continue
        header = re.fullmatch(r"\[(\w+)(?: ([\w+]+))?\]", line.strip())
        if header:
            current = bank.setdefault((header.group(1), header.group(2) or ""), [])
        elif current is not None:
            current.append(line.rstrip())
    return bank


class Composer:
    """Builds answer texts for given themes from the phrase bank with a shared generator."""

    def __init__(self, bank: dict[tuple[str, str], list[str]], rng: np.random.Generator) -> None:
        self.bank = bank
        self.rng = rng
        self.combos = {
            question: [(frozenset(key.split("+")), phrases) for (section, key), phrases in bank.items()
                       if section == f"combo_{'low' if question == 'low_point' else 'high'}"]
            for question in QUESTIONS
        }

    def pick(self, options: Sequence[str]) -> str:
        return options[int(self.rng.integers(len(options)))]

    def fill(self, text: str, language: str) -> str:
        def substitute(match: re.Match[str]) -> str:
            name = match.group(1)
            if name == "lang":
                return language
            return self.fill(self.pick(self.bank[("fill", name)]), language)
        return re.sub(r"\{(\w+)\}", substitute, text)

    def fragment(self, side: str, theme: str) -> str:
        return self.pick(self.bank[(side, theme)])

    def compose(self, question: str, kind: str, themes: list[str], language: str,
                wave: str) -> str:
        rng = self.rng
        side = "low" if question == "low_point" else "high"
        other = "high" if side == "low" else "low"
        if kind == "blank":
            return self.pick(["", "", "", " "])
        if kind == "na":
            text = self.pick(self.bank[(f"na_{side}", "")])
        elif kind == "offtopic":
            text = self.pick(self.bank[("offtopic", "")])
        elif not themes:
            text = self.pick(self.bank[(f"generic_{side}", "")])
        elif rng.random() < 0.008:
            text = self.long_answer(side, themes, language)
        else:
            text = self.short_answer(question, side, other, themes)
        text = self.fill(text, language)
        return self.decorate(text, kind, wave, side)

    def short_answer(self, question: str, side: str, other: str, themes: list[str]) -> str:
        rng = self.rng
        remaining = [themes[i] for i in rng.permutation(len(themes))]
        pieces: list[str] = []
        if len(remaining) >= 2 and rng.random() < 0.6:
            fitting = [phrases for key, phrases in self.combos[question] if key <= set(remaining)]
            if fitting:
                key_phrases = fitting[int(rng.integers(len(fitting)))]
                key = next(k for k, p in self.combos[question] if p is key_phrases)
                pieces.append(self.pick(key_phrases))
                remaining = [t for t in remaining if t not in key]
        opener = ""
        if side == "low" and len(remaining) >= 2 and rng.random() < 0.35:
            praisable = [t for t in remaining if ("praise_clause", t) in self.bank]
            if praisable:
                chosen = praisable[int(rng.integers(len(praisable)))]
                opener = self.pick(self.bank[("praise_clause", chosen)]) + self.pick(
                    [", but ", " but ", ". But ", "... but "])
                remaining.remove(chosen)
        contrast = ""
        if side == "high" and (len(remaining) + len(pieces)) >= 2 and remaining and rng.random() < 0.15:
            last = remaining.pop()
            if (other, last) in self.bank:
                contrast = self.pick([", but ", ". Only downside: ", " - shame about ", ", although "]) \
                    + self.fragment(other, last)
            else:
                remaining.append(last)
        for theme in remaining:
            if (side, theme) in self.bank:
                pieces.append(self.fragment(side, theme))
            else:  # a theme praised in a low point or criticised in a best part
                pieces.append(self.fragment(other, theme))
        pieces = [pieces[i] for i in rng.permutation(len(pieces))]
        text = pieces[0]
        for piece in pieces[1:]:
            joiner = self.pick([". ", ", ", " and ", ", and ", "; ", " - ", "! ", ". Also ", " + "])
            text = text + joiner + (_capitalise(piece) if joiner.endswith((". ", "! ")) else piece)
        text = opener + text + contrast
        if side == "high" and rng.random() < 0.07:
            absent = [t for (section, t) in self.bank if section == "distract_high" and t not in themes]
            text += self.pick([", and ", ". ", " - "]) + self.pick(self.bank[("distract_high",
                                                                                self.pick(absent))])
        if side == "low" and not opener and rng.random() < 0.06:
            absent = [t for (section, t) in self.bank if section == "distract_low" and t not in themes]
            text = self.pick(self.bank[("distract_low", self.pick(absent))]) + ", but " + text
        if rng.random() < 0.2:
            prefixes = (["Honestly, ", "Probably ", "I guess ", "Hmm, ", "If I had to pick, ", "Only thing: ",
                         "Minor thing but ", "To be fair, ", "Um ", "Sadly "] if side == "low" else
                        ["For me, ", "Honestly, ", "Easy one: ", "Hmm. ", "Where to start! ", "Has to be: ",
                         "Definitely: ", "Without doubt: "])
            text = self.pick(prefixes) + text
        return text

    def long_answer(self, side: str, themes: list[str], language: str) -> str:
        rng = self.rng
        other = "high" if side == "low" else "low"
        sentences: list[str] = []
        for theme in themes:
            options = self.bank.get((side, theme)) or self.bank[(other, theme)]
            take = min(2, len(options))
            for index in rng.choice(len(options), size=take, replace=False):
                ending = self.pick([".", "!", "."])  # drawn even when unused, to keep the stream
                fragment = _capitalise(options[int(index)])
                sentences.append(fragment if fragment.endswith((".", "!", "?")) else fragment + ending)
        fillers = self.bank[("filler", "")]
        order = rng.permutation(len(fillers))
        used = 0
        text_sentences = list(sentences)
        while len(" ".join(text_sentences).split()) < 215 and used < len(order):
            position = int(rng.integers(len(text_sentences) + 1))
            text_sentences.insert(position, fillers[int(order[used])])
            used += 1
        cut = int(rng.integers(1, len(text_sentences)))
        joiner = "\n\n" if rng.random() < 0.4 else " "
        return " ".join(text_sentences[:cut]) + joiner + " ".join(text_sentences[cut:])

    def decorate(self, text: str, kind: str, wave: str, side: str) -> str:
        rng = self.rng
        if kind == "substantive":
            if rng.random() < 0.012:
                text = text.rstrip(".!") + self.contact(wave)
            if rng.random() < 0.5 and not text.endswith(("!", ".", "?", ")")) and "\n" not in text:
                endings = [".", ".", "!", "!!", "...", " :(", " 😕", " 🙄", " 😤"] if side == "low" else \
                    [".", ".", "!", "!!", "...", " :)", " 😊", " 👍", " 😍", " ☀️"]
                text += self.pick(endings)
            if rng.random() < 0.06:
                text = _typo(text, rng)
            text = text.lower() if rng.random() < 0.12 else _capitalise(text)
        if rng.random() < 0.2:
            text = text.replace("'", "\u2019")
        return text

    def contact(self, wave: str) -> str:
        rng = self.rng
        first = self.pick(["jo", "sam", "kit", "ros", "ned", "pia", "lars", "mira"])
        last = self.pick(["marlow", "quenby", "tarrant", "vell", "osgood", "pennick"])
        email = f"{first}.{last}{int(rng.integers(10, 99))}@" + self.pick(
            ["mailbox.example", "postal-inbox.example", "seaview-mail.example"])
        phone = self.pick([f"07700 900{int(rng.integers(100, 999))}",
                           f"+999 55 {int(rng.integers(100000, 999999))}"])
        booking = f"BK{wave}{int(rng.integers(4, 10)):02d}{int(rng.integers(1, 29)):02d}" \
                  f"{int(rng.integers(100, 99999)):03d}"
        return self.pick([
            f". Please email me at {email} if you want to discuss",
            f". My booking ref was {booking} if you want to check",
            f". Call me on {phone}",
            f" (ref {booking})",
            f". You can reach me on {phone} or {email}",
        ])


def _capitalise(text: str) -> str:
    return text[:1].upper() + text[1:] if text else text


def _typo(text: str, rng: np.random.Generator) -> str:
    words = [m for m in re.finditer(r"[A-Za-z]{5,}", text)]
    if not words:
        return text
    word = words[int(rng.integers(len(words)))]
    letters = list(word.group())
    position = int(rng.integers(1, len(letters) - 2))
    if rng.random() < 0.6:
        letters[position], letters[position + 1] = letters[position + 1], letters[position]
    else:
        del letters[position]
    return text[:word.start()] + "".join(letters) + text[word.end():]


# ---------------------------------------------------------------------------------------------
# population, probabilities, truth

def population_cells() -> pd.DataFrame:
    """All population cells with their population counts, one row per wave x stratum x group cell."""
    rows = []
    for wave in WAVES:
        for (site, season), population in STRATUM_POPULATION.items():
            market_share = np.array([0.40, 0.15, 0.12, 0.13, 0.10, 0.10])
            if site == "FER":
                market_share = market_share * np.array([1.4, 1, 1, 1, 1, 1])
            if site == "GUL":
                market_share = market_share * np.array([0.8, 1, 1, 1, 1.5, 1])
            if wave == "2026":
                market_share = market_share * np.array([1, 1, 1, 1.4, 1, 1])
            market_share = market_share / market_share.sum()
            age_share = np.array([0.30, 0.38, 0.32]) * (np.array([0.8, 1.0, 1.4]) if season == "shoulder"
                                                        else 1.0)
            age_share = age_share / age_share.sum()
            for m, market in enumerate(MARKETS):
                for a, age in enumerate(AGE_BANDS):
                    purpose = np.array([0.40, 0.18, 0.22, 0.12, 0.08])
                    purpose = purpose * {
                        "Domestic": np.array([0.7, 1.0, 2.2, 1.2, 1.0]),
                    }.get(market, np.array([1.2, 1.0, 0.3, 0.9, 1.1]))
                    purpose = purpose * {"16-34": np.array([1.2, 0.4, 1.1, 1.0, 1.3]),
                                         "35-54": np.array([0.9, 1.8, 1.0, 0.8, 1.2]),
                                         "55+": np.array([1.1, 0.5, 1.0, 1.2, 0.4])}[age]
                    if season == "summer":
                        purpose = purpose * np.array([1.0, 1.6, 1.0, 1.0, 0.6])
                    purpose = purpose / purpose.sum()
                    for p, trip in enumerate(PURPOSES):
                        rows.append((wave, site, season, market, age, trip,
                                     population * WAVE_GROWTH[wave] * market_share[m] * age_share[a]
                                     * purpose[p]))
    cells = pd.DataFrame(rows, columns=["wave", "site", "season", "market", "age_band", "trip_purpose",
                                        "population"])
    # response propensity: young, business and Duvenian visitors answer less often
    cells["propensity"] = (cells["age_band"].map({"16-34": 0.5, "35-54": 0.8, "55+": 1.0})
                           * cells["market"].map(lambda m: {"Domestic": 1.0, "Duvenia": 0.55}.get(m, 0.85))
                           * cells["trip_purpose"].map(lambda t: 0.65 if t == "business or event" else 1.0))
    return cells


def _matches(cells: pd.DataFrame, condition: dict[str, str]) -> np.ndarray:
    mask = np.ones(len(cells), dtype=bool)
    for column, value in condition.items():
        mask &= (cells[column] == value).to_numpy()
    return mask


def theme_probabilities(cells: pd.DataFrame) -> dict[str, np.ndarray]:
    """Model probability of each theme among substantive answers: ``{question: (n_cells, n_themes)}``."""
    out = {}
    for question in QUESTIONS:
        matrix = np.tile(np.array([BASE[question][t] for t in THEMES]), (len(cells), 1))
        for rule_question, theme, condition, multiplier in RULES:
            if rule_question == question:
                matrix[_matches(cells, condition), THEMES.index(theme)] *= multiplier
        if question == "low_point":
            drone = np.where(_matches(cells, {"wave": "2026"}), DRONE_BASE_2026, 0.0)
            for condition, multiplier in DRONE_RULES:
                drone = drone * np.where(_matches(cells, condition), multiplier, 1.0)
            matrix[:, THEMES.index("drones")] = drone
        out[question] = matrix
    return out


def kept_probability(P: np.ndarray, cap: int = MAX_THEMES) -> np.ndarray:
    """Probability that each theme is drawn and survives the cap.

    Themes are independent Bernoulli(P); when more than ``cap`` are drawn a uniformly random
    ``cap`` of them are kept, so theme k survives with ``P_k * E[min(1, cap / (1 + S_-k))]``
    where ``S_-k`` is the (Poisson-binomial) number of other themes drawn.

    Parameters
    ----------
    P : ndarray of shape (n_cells, n_themes)

    Returns
    -------
    ndarray of shape (n_cells, n_themes)
    """
    n_cells, n_themes = P.shape
    factor = np.minimum(1.0, cap / (np.arange(n_themes) + 1.0))
    out = np.empty_like(P)
    for k in range(n_themes):
        others = np.delete(P, k, axis=1)
        distribution = np.zeros((n_cells, n_themes))
        distribution[:, 0] = 1.0
        for j in range(n_themes - 1):
            pj = others[:, j:j + 1]
            shifted = distribution[:, :-1] * pj
            distribution *= 1 - pj
            distribution[:, 1:] += shifted
        out[:, k] = P[:, k] * (distribution @ factor)
    return out


def answer_kind_rates(age_band: pd.Series, question: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per-row probabilities of a blank, an "n/a" style and an off-topic answer."""
    blank = BLANK_RATE[question] * age_band.map(BLANK_AGE_FACTOR).to_numpy()
    na = np.full(len(age_band), NA_RATE[question])
    offtopic = np.full(len(age_band), OFFTOPIC_RATE[question])
    return blank, na, offtopic


# ---------------------------------------------------------------------------------------------
# the sample

def draw_sample(cells: pd.DataFrame, rng: np.random.Generator, scale: float) -> pd.DataFrame:
    """Draw interviews: PSUs (shifts) within strata, respondents from cells by response propensity."""
    frames = []
    for wave in WAVES:
        for (site, season), n_base in STRATUM_SAMPLE.items():
            stratum_cells = cells[(cells["wave"] == wave) & (cells["site"] == site)
                                  & (cells["season"] == season)]
            n = max(12, int(round(n_base * WAVE_SAMPLE_FACTOR[wave] * scale)))
            n_psu = int(min(rng.integers(8, 17), max(2, n // 6)))
            min_size = max(1, min(6, n // n_psu))
            sizes = min_size + rng.multinomial(n - min_size * n_psu, rng.dirichlet(np.full(n_psu, 4.0)))
            share = (stratum_cells["population"] * stratum_cells["propensity"]).to_numpy()
            picks = rng.choice(len(stratum_cells), size=n, p=share / share.sum())
            chosen = stratum_cells.iloc[picks].reset_index(drop=True)
            population = stratum_cells["population"].sum()
            mean_propensity = share.sum() / population
            noise = rng.lognormal(-0.5 * 0.25 ** 2, 0.25, size=n)
            chosen["raw_weight"] = population / n * mean_propensity / chosen["propensity"] * noise
            chosen["stratum"] = f"{site}-{season}"
            chosen["stratum_population"] = int(round(population))
            chosen["psu"] = [f"{wave[2:]}-{site}-{season[:2].upper()}-{j + 1:02d}"
                             for j, size in enumerate(sizes) for _ in range(size)]
            frames.append(chosen)
    sample = pd.concat(frames, ignore_index=True)
    # scaled weights: mean one within each wave (the ratio estimates are unchanged)
    sample["weight"] = sample["raw_weight"] / sample.groupby("wave")["raw_weight"].transform("mean")
    order = []
    for wave in WAVES:
        rows = np.flatnonzero(sample["wave"].to_numpy() == wave)
        order.append(rows[rng.permutation(len(rows))])
    sample = sample.iloc[np.concatenate(order)].reset_index(drop=True)
    sample["response_id"] = [f"R{w[2:]}-{i + 1:06d}" for w, i in
                             zip(sample["wave"], sample.groupby("wave").cumcount(), strict=True)]
    return sample


def psu_shocks(sample: pd.DataFrame, rng: np.random.Generator) -> dict[str, np.ndarray]:
    """Mean-one multipliers per respondent from their shift's weather and ferry luck."""
    psus = np.array(sorted(sample["psu"].unique()))
    bad_weather = rng.random(len(psus)) < WEATHER_SHOCK[0]
    bad_ferry = rng.random(len(psus)) < FERRY_SHOCK[0]
    p, m = WEATHER_SHOCK
    low_weather = np.where(bad_weather, m, (1 - p * m) / (1 - p))
    high_weather = np.where(bad_weather, 0.4, (1 - p * 0.4) / (1 - p))
    p, m = FERRY_SHOCK
    transport = np.where(bad_ferry, m, (1 - p * m) / (1 - p))
    index = np.searchsorted(psus, sample["psu"].to_numpy())
    return {"low_weather": low_weather[index], "high_weather": high_weather[index],
            "low_transport": transport[index]}


def draw_themes(P: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Bernoulli draws per theme, keeping a random ``MAX_THEMES`` when more are drawn."""
    drawn = rng.random(P.shape) < P
    score = np.where(drawn, rng.random(P.shape), -1.0)
    top = np.argsort(-score, axis=1, kind="stable")[:, :MAX_THEMES]
    keep = np.zeros_like(drawn)
    np.put_along_axis(keep, top, True, axis=1)
    return drawn & keep


def build(scale: float = 1.0, seed: int = SEED) -> dict[str, pd.DataFrame]:
    """Generate the survey, the planted labels and the truth table (no files written)."""
    rng = np.random.default_rng(seed)
    composer = Composer(load_phrasebank(), rng)
    cells = population_cells()
    cell_probability = theme_probabilities(cells)
    sample = draw_sample(cells, rng, scale)
    cell_key = ["wave", "site", "season", "market", "age_band", "trip_purpose"]
    cell_index = pd.MultiIndex.from_frame(cells[cell_key]).get_indexer(
        pd.MultiIndex.from_frame(sample[cell_key]))
    shocks = psu_shocks(sample, rng)
    labels = []
    for question in QUESTIONS:
        P = cell_probability[question][cell_index].copy()
        if question == "low_point":
            P[:, THEMES.index("weather")] *= shocks["low_weather"]
            P[:, THEMES.index("transport")] *= shocks["low_transport"]
        else:
            P[:, THEMES.index("weather")] *= shocks["high_weather"]
        if P.max() > 0.95:  # the shocks are built so this never binds; truth.csv relies on it
            raise RuntimeError("a theme probability exceeds 0.95; lower the rules")
        kept = draw_themes(P, rng)
        blank, na, offtopic = answer_kind_rates(sample["age_band"], question)
        u = rng.random(len(sample))
        kind = np.select([u < blank, u < blank + na, u < blank + na + offtopic],
                         ["blank", "na", "offtopic"], "substantive")
        kept[kind != "substantive"] = False
        texts = []
        themes_text = []
        for row, row_kind in enumerate(kind):
            themes = [THEMES[k] for k in np.flatnonzero(kept[row])]
            texts.append(composer.compose(question, row_kind, themes,
                                          LANGUAGE_OF[sample.at[row, "market"]], sample.at[row, "wave"]))
            themes_text.append(";".join(sorted(themes)))
        sample[question] = texts
        labels.append(pd.DataFrame({"response_id": sample["response_id"], "question": question,
                                    "themes": themes_text, "answer_kind": kind}))
        sample[f"_kept_{question}"] = list(kept)
    planted = pd.concat(labels, ignore_index=True).sort_values(["response_id", "question"],
                                                               kind="stable")
    truth = truth_table(cells, cell_probability, sample)
    survey = sample.sort_values("response_id", kind="stable")[
        ["response_id", "wave", "stratum", "site", "season", "psu", "stratum_population", "weight",
         "market", "age_band", "trip_purpose", "low_point", "high_point"]].copy()
    survey["site"] = survey["site"].map(SITES)
    survey["weight"] = survey["weight"].map(lambda w: f"{w:.4f}")
    return {"survey": survey.reset_index(drop=True), "planted": planted.reset_index(drop=True),
            "truth": truth}


GROUP_VARS: tuple[str, ...] = ("(all)", "market", "age_band", "trip_purpose", "season", "site")


def truth_table(cells: pd.DataFrame, cell_probability: dict[str, np.ndarray],
                sample: pd.DataFrame) -> pd.DataFrame:
    """Planted population probability per question x theme x wave x group, with realised shares."""
    cells = cells.copy()
    sample = sample.copy()
    cells["(all)"] = "(all)"
    sample["(all)"] = "(all)"
    frames = []
    for question in QUESTIONS:
        kept = kept_probability(cell_probability[question])
        blank, na, offtopic = answer_kind_rates(cells["age_band"], question)
        substantive = 1 - blank - na - offtopic
        expected = kept * substantive[:, None] * cells["population"].to_numpy()[:, None]
        answered = (1 - blank) * cells["population"].to_numpy()
        realised = np.stack(sample[f"_kept_{question}"].to_numpy()).astype(float)
        weight = sample["weight"].to_numpy()
        sample_blank = sample[question].str.strip().eq("").to_numpy()
        theme_population_all = pd.DataFrame(expected, columns=THEMES)
        theme_sample_all = pd.DataFrame(realised * weight[:, None], columns=THEMES)
        for group_var in GROUP_VARS:
            cell_keys = [cells["wave"], cells[group_var]]
            sample_keys = [sample["wave"], sample[group_var]]
            population = cells.groupby(cell_keys)["population"].sum()
            answered_population = pd.Series(answered, index=cells.index).groupby(cell_keys).sum()
            theme_population = theme_population_all.groupby(cell_keys).sum()
            index = population.index
            sample_weight = pd.Series(weight).groupby(sample_keys).sum().reindex(index)
            sample_answered = pd.Series(weight * ~sample_blank).groupby(sample_keys).sum().reindex(index)
            sample_n = pd.Series(weight).groupby(sample_keys).size().reindex(index).fillna(0).astype(int)
            theme_sample = theme_sample_all.groupby(sample_keys).sum().reindex(index)
            measures = {
                "planted_probability": theme_population.div(population, axis=0),
                "planted_probability_answered": theme_population.div(answered_population, axis=0),
                "realised_weighted_share": theme_sample.div(sample_weight, axis=0),
                "realised_weighted_share_answered": theme_sample.div(sample_answered, axis=0),
            }
            frame = pd.concat({name: table.stack() for name, table in measures.items()}, axis=1)
            frame.index.names = ["wave", "group_value", "theme"]
            frame = frame.reset_index()
            frame["n_respondents"] = sample_n.reindex(
                pd.MultiIndex.from_frame(frame[["wave", "group_value"]])).to_numpy()
            frame.insert(0, "question", question)
            frame.insert(3, "group_var", group_var)
            frames.append(frame[["question", "theme", "wave", "group_var", "group_value",
                                 *measures, "n_respondents"]])
    truth = pd.concat(frames, ignore_index=True)
    truth.loc[truth["group_var"] == "site", "group_value"] = truth.loc[
        truth["group_var"] == "site", "group_value"].map(SITES)
    truth = truth.sort_values(["question", "theme", "wave", "group_var", "group_value"], kind="stable")
    for column in ("planted_probability", "planted_probability_answered", "realised_weighted_share",
                   "realised_weighted_share_answered"):
        truth[column] = truth[column].map(lambda v: f"{v:.6f}")
    return truth.reset_index(drop=True)


def main(out_dir: str | Path | None = None, scale: float = 1.0, seed: int = SEED) -> dict[str, Path]:
    """Generate and write ``survey.csv``, ``planted_labels.csv`` and ``truth.csv``.

    Parameters
    ----------
    out_dir : path, default this script's folder
    scale : float, default 1.0
        Multiplies every stratum's sample size (use e.g. 0.05 for a quick test).
    seed : int, default ``SEED``

    Returns
    -------
    dict of name -> path written
    """
    out = Path(out_dir) if out_dir is not None else HERE
    out.mkdir(parents=True, exist_ok=True)
    tables = build(scale=scale, seed=seed)
    paths = {"survey": out / "survey.csv", "planted": out / "planted_labels.csv", "truth": out / "truth.csv"}
    for name, path in paths.items():
        path.write_bytes(tables[name].to_csv(index=False, lineterminator="\n").encode("utf-8"))
    return paths


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description="Generate the invented Halvessa Islands demo survey.")
    parser.add_argument("--out", default=None, help="output folder (default: next to this script)")
    parser.add_argument("--scale", type=float, default=1.0, help="sample-size multiplier (default 1)")
    parser.add_argument("--seed", type=int, default=SEED)
    arguments = parser.parse_args()
    for written in main(arguments.out, arguments.scale, arguments.seed).values():
        print(written)
