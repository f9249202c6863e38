"""Generate the invented Lanternmoth Night Rail passenger survey (termloom's demo data).

Deterministic: the same seed writes byte-identical CSV files (and an XLSX with
the same cells) on every run. Pure Python plus openpyxl; the phrases come from
``phrase_bank.py`` beside this file. Everything is invented: the operator, the
respondents, their answers, e-mail addresses (reserved example domains) and
phone numbers (ranges set aside for fiction).

Usage::

    python demo_texts/make_demo.py [OUT_DIR]     # default: the folder of this file

Writes into OUT_DIR:

``lanternmoth_passenger_survey.csv``        all respondents, UTF-8, ``,``, LF
``lanternmoth_autumn_batch_cp1252.csv``     the autumn DE/FR/NL batch, cp1252, ``;``, CRLF
``lanternmoth_passenger_survey.xlsx``       all respondents, sheet ``responses``
``answer_key.csv``                          one row per non-empty answer: true language,
                                            planted mess, topics mentioned
"""

import csv
import importlib.util
import io
import math
import random
import re
import sys
import unicodedata
import zipfile
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from types import ModuleType

SEED = 20251104
HERE = Path(__file__).resolve().parent

SURVEY_CSV = "lanternmoth_passenger_survey.csv"
BATCH_CSV = "lanternmoth_autumn_batch_cp1252.csv"
SURVEY_XLSX = "lanternmoth_passenger_survey.xlsx"
ANSWER_KEY = "answer_key.csv"
OUTPUTS = (SURVEY_CSV, BATCH_CSV, SURVEY_XLSX, ANSWER_KEY)

COLUMNS = ["respondent_id", "country", "age_band", "wave", "interview_lang", "design_weight",
           "q_liked", "q_improve"]
QUESTIONS = {"q_liked": "liked", "q_improve": "improve"}

#: Respondents per country (exact counts, shuffled into row order).
COUNTRIES: list[tuple[str, int]] = [("DE", 260), ("FR", 220), ("PL", 170), ("ES", 150), ("IT", 150),
                                    ("GB", 150), ("NL", 140), ("AT", 90), ("BE", 90), ("PT", 40), ("SE", 40)]
#: Questionnaire language chosen by respondents of each country.
INTERVIEW_LANGS: dict[str, list[tuple[str, float]]] = {
    "DE": [("de", 0.92), ("en", 0.08)], "AT": [("de", 0.95), ("en", 0.05)],
    "FR": [("fr", 0.97), ("en", 0.03)], "BE": [("fr", 0.55), ("nl", 0.40), ("en", 0.05)],
    "ES": [("es", 0.95), ("en", 0.05)], "IT": [("it", 0.96), ("en", 0.04)],
    "PL": [("pl", 0.92), ("en", 0.08)], "NL": [("nl", 0.85), ("en", 0.15)],
    "GB": [("en", 1.0)], "PT": [("pt", 0.80), ("en", 0.20)], "SE": [("sv", 0.70), ("en", 0.30)],
}
AGE_BANDS: list[tuple[str, float]] = [("18-29", 0.26), ("30-44", 0.30), ("45-59", 0.25), ("60+", 0.19)]
WAVES = ("2025-spring", "2025-autumn")
#: Nonresponse adjustment: young respondents are under-represented, so weigh more.
AGE_WEIGHT = {"18-29": 1.45, "30-44": 1.0, "45-59": 0.9, "60+": 0.75}

#: Share of respondents who answer in another language than the questionnaire's.
MISLANGUAGED_RATE = 0.035
#: Language actually written, by questionnaire language, for those respondents.
OTHER_LANGUAGE: dict[str, list[str]] = {
    "en": ["de", "pl", "es", "fr", "it"], "de": ["en", "en", "pl", "nl"], "fr": ["en", "en", "nl", "de"],
    "es": ["en", "en", "pt", "fr"], "it": ["en", "en", "de", "fr"], "pl": ["en", "en", "de"],
    "nl": ["en", "en", "de", "fr"], "pt": ["en", "es"], "sv": ["en", "de"],
}

# Share of respondents mentioning each topic, per question, before the planted
# group differences below are applied.
BASE_TOPICS: dict[str, dict[str, float]] = {
    "liked": {"sleep": 0.18, "cabin": 0.14, "staff": 0.20, "breakfast": 0.10, "food": 0.08,
              "punctuality": 0.04, "price": 0.06, "booking": 0.04, "wifi": 0.03, "cleanliness": 0.06,
              "noise": 0.04, "scenery": 0.16, "border": 0.04, "bike": 0.02, "accessibility": 0.02,
              "general": 0.08},
    "improve": {"sleep": 0.07, "cabin": 0.10, "staff": 0.04, "breakfast": 0.08, "food": 0.09,
                "punctuality": 0.20, "price": 0.11, "booking": 0.08, "wifi": 0.07, "cleanliness": 0.09,
                "noise": 0.08, "scenery": 0.02, "border": 0.06, "bike": 0.04, "accessibility": 0.04,
                "general": 0.05},
}


@dataclass
class Respondent:
    rid: str
    country: str
    age_band: str
    wave: str
    interview_lang: str
    weight: float
    answer_lang: str
    answers: dict[str, str] = field(default_factory=dict)
    #: Per question: true language, planted tags, details, topics.
    truth: dict[str, dict] = field(default_factory=dict)


def topic_shares(question: str, r: Respondent) -> dict[str, float]:
    """The planted findings live here (documented in README.md)."""
    p = dict(BASE_TOPICS[question])
    if question == "improve":
        p["wifi"] = 0.45 if r.age_band == "18-29" else 0.07
        p["price"] = 0.40 if r.country in ("DE", "PL") else 0.11
        p["punctuality"] = 0.40 if r.wave == "2025-spring" else 0.07
        p["accessibility"] = 0.25 if r.age_band == "60+" else 0.04
    else:
        p["breakfast"] = 0.45 if r.country == "FR" else 0.10
        p["punctuality"] = 0.02 if r.wave == "2025-spring" else 0.14
    return p


def load_bank() -> ModuleType:
    """Import ``phrase_bank.py`` from this file's folder (works as a script and from tests)."""
    spec = importlib.util.spec_from_file_location("lanternmoth_phrase_bank", HERE / "phrase_bank.py")
    assert spec and spec.loader
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def pick(rng: random.Random, options: list[tuple[str, float]]) -> str:
    roll, total = rng.random(), 0.0
    for value, share in options:
        total += share
        if roll < total:
            return value
    return options[-1][0]


# --------------------------------------------------------------------------- composing answers


class Composer:
    """Builds one answer from the phrase bank, keeping unplanted long answers distinct.

    Two answers built from the same sentences count as the same answer even when
    an intensifier, an opener or a closing phrase differs, because a fuzzy
    near-duplicate check would pair them. Long answers (``UNIQUE_FROM`` characters
    or more) never repeat such a set, so the only long (near-)duplicates in the
    data are the planted ones.
    """

    UNIQUE_FROM = 36

    def __init__(self, rng: random.Random, bank: ModuleType) -> None:
        self.rng = rng
        self.bank = bank
        self.seen: set[tuple[str, ...]] = set()

    def _fill(self, lang: str, text: str) -> str:
        if "{very}" not in text:
            return text
        if self.rng.random() < 0.7:
            return text.replace("{very}", self.rng.choice(self.bank.BANK[lang]["very"]))
        return text.replace("{very} ", "")

    def sentence(self, lang: str, topic: str, q: str) -> str:
        return self._fill(lang, self.rng.choice(self.bank.BANK[lang]["topics"][topic][q]))

    def compose(self, lang: str, q: str, topics: list[str], shares: dict[str, float]) -> str:
        """One answer about ``topics``; a long answer may add topics (drawn by ``shares``) to ``topics``."""
        for _ in range(30):
            chosen = list(topics)
            text, key = self._compose_once(lang, q, chosen, self._length_class(len(topics)), shares)
            if len(text) < self.UNIQUE_FROM or key not in self.seen:
                break
        else:
            # Every long wording of these topics is taken: answer in a few words instead.
            chosen = list(topics)
            text, key = self._compose_once(lang, q, chosen, "word" if len(topics) == 1 else "short", shares)
        topics[:] = chosen
        if len(text) >= self.UNIQUE_FROM:
            self.seen.add(key)
        return text

    def _length_class(self, n_topics: int) -> str:
        roll = self.rng.random()
        if n_topics == 1:
            return "word" if roll < 0.17 else "short" if roll < 0.42 else "sentences"
        if n_topics == 2:
            return "short" if roll < 0.18 else "sentences" if roll < 0.8 else "long"
        return "sentences" if roll < 0.7 else "long"

    def _compose_once(self, lang: str, q: str, topics: list[str], length: str,
                      shares: dict[str, float]) -> tuple[str, tuple[str, ...]]:
        rng, data = self.rng, self.bank.BANK[lang]
        if length in ("word", "short"):
            pools = [data["topics"][t][f"{q}_short"] for t in topics]
            if length == "word":
                pools = [[f for f in pools[0] if len(f.split()) == 1] or pools[0]]
            fragments = [rng.choice(pool) for pool in pools]
            key = (lang, q, *sorted(fragments))
            if lang != "de":  # German nouns keep their capital letter
                fragments[1:] = [f if f[:3].isupper() else f[:1].lower() + f[1:] for f in fragments[1:]]
            return ", ".join(fragments), key
        raw = [rng.choice(data["topics"][t][q]) for t in topics]
        parts = [self._fill(lang, s) for s in raw]
        if length == "long":
            # Thirty to sixty words: a little story around the topics, more topics if still short.
            opener = [rng.choice(data["openers"][q])] if rng.random() < 0.5 else []
            closer = [rng.choice(data["closers"][q])] if rng.random() < 0.6 else []
            stories = rng.sample(data["stories"], k=1 if rng.random() < 0.7 else 2)
            body = list(parts)
            for story in stories:
                body.insert(rng.randrange(len(body) + 1), story)
            others = [t for t in shares if t not in topics and t != "general"]
            while _words(opener + body + closer) < 30 and others:
                extra = rng.choices(others, weights=[shares[t] for t in others])[0]
                others.remove(extra)
                topics.append(extra)
                raw.append(rng.choice(data["topics"][extra][q]))
                body.append(self._fill(lang, raw[-1]))
            while _words(opener + body + closer) > 60 and stories:
                body.remove(stories.pop())
            raw += stories
            parts = opener + body + closer
        else:
            if rng.random() < 0.15:
                parts.insert(0, rng.choice(data["openers"][q]))
            if rng.random() < 0.15:
                parts.append(rng.choice(data["closers"][q]))
        return " ".join(parts), (lang, q, *sorted(raw))


def _words(parts: list[str]) -> int:
    return sum(len(p.split()) for p in parts)


def add_typo(rng: random.Random, text: str) -> str:
    """One realistic slip in one word of five or more letters (swap, drop or double a letter)."""
    words = [m for m in re.finditer(r"[^\W\d_]{5,}", text)]
    if not words:
        return text
    m = rng.choice(words)
    w, i = m.group(), rng.randrange(1, len(m.group()) - 2)
    op = rng.choice(("swap", "drop", "double"))
    if op == "swap" and w[i] != w[i + 1]:
        w = w[:i] + w[i + 1] + w[i] + w[i + 2:]
    elif op == "drop":
        w = w[:i] + w[i + 1:]
    else:
        w = w[:i] + w[i] + w[i:]
    return text[: m.start()] + w + text[m.end():]


def strip_diacritics(text: str) -> str:
    """Typed without accents, as on a keyboard without the national layout."""
    table = {"ł": "l", "Ł": "L", "ß": "ss", "ø": "o", "æ": "ae", "œ": "oe"}
    text = "".join(table.get(c, c) for c in text)
    decomposed = unicodedata.normalize("NFD", text)
    return unicodedata.normalize("NFC", "".join(c for c in decomposed if not unicodedata.combining(c)))


def phone_number(rng: random.Random, country: str) -> tuple[str, str]:
    """A number from a range reserved for fiction [recalled from memory], national or international."""
    n, a, b = rng.randrange(1000), rng.randrange(100), rng.randrange(100)
    if country == "GB":
        options = [("national", f"07700 900{n:03d}"), ("international", f"+44 7700 900{n:03d}"),
                   ("international", f"+44 (0)7700 900{n:03d}"), ("national", f"07700900{n:03d}")]
    elif country in ("FR", "BE"):
        options = [("national", f"06 39 98 {a:02d} {b:02d}"), ("international", f"+33 6 39 98 {a:02d} {b:02d}"),
                   ("national", f"01 99 00 {a:02d} {b:02d}"), ("national", f"06.39.98.{a:02d}.{b:02d}")]
    elif country in ("DE", "AT"):
        options = [("national", f"030 23125 {n:03d}"), ("international", f"+49 30 23125{n:03d}"),
                   ("national", f"(030) 23125-{n:03d}")]
    else:
        options = [("international", f"+44 7700 900{n:03d}"), ("international", f"+1 202-555-01{a:02d}"),
                   ("international", f"+33 6 39 98 {a:02d} {b:02d}")]
    kind, number = rng.choice(options)
    return f"phone_{kind}", number


# --------------------------------------------------------------------------- the survey


def draw_respondents(rng: random.Random) -> list[Respondent]:
    countries = [c for c, n in COUNTRIES for _ in range(n)]
    rng.shuffle(countries)
    country_factor = {c: round(rng.uniform(0.75, 1.3), 3) for c, _ in COUNTRIES}
    people = []
    for number, country in enumerate(countries, start=1):
        age = pick(rng, AGE_BANDS)
        wave = WAVES[0] if rng.random() < 0.51 else WAVES[1]
        lang = pick(rng, INTERVIEW_LANGS[country])
        raw_weight = AGE_WEIGHT[age] * country_factor[country] * math.exp(rng.gauss(0.0, 0.35))
        answer_lang = rng.choice(OTHER_LANGUAGE[lang]) if rng.random() < MISLANGUAGED_RATE else lang
        people.append(Respondent(f"LM{10000 + number}", country, age, wave, lang, raw_weight, answer_lang))
    # Rescale to mean 1, keep within a realistic 0.3-3 band.
    mean = sum(p.weight for p in people) / len(people)
    for p in people:
        p.weight = round(min(3.0, max(0.3, p.weight / mean)), 3)
    return people


def _truth(lang: str, tags: list[str] | None = None, detail: str = "", topics: list[str] | None = None) -> dict:
    return {"language": lang, "tags": list(tags or []), "detail": detail, "topics": list(topics or [])}


def fill_answers(rng: random.Random, people: list[Respondent], composer: Composer) -> None:
    bank = composer.bank
    empty = {"liked": 0.05, "improve": 0.07}
    non_answer = {"liked": 0.04, "improve": 0.07}
    for r in people:
        lang = r.answer_lang
        mislanguaged = ["mislanguaged"] if lang != r.interview_lang else []
        for column, q in QUESTIONS.items():
            roll = rng.random()
            if roll < empty[q]:
                r.answers[column] = ""
                continue
            roll -= empty[q]
            if roll < non_answer[q]:
                r.answers[column] = rng.choice(bank.BANK[lang]["non_answers"])
                r.truth[column] = _truth(lang, ["non_answer"] + mislanguaged)
                continue
            roll -= non_answer[q]
            if roll < 0.025:
                kind = rng.choice(("neutral", "neutral", "mash", "emoji_only"))
                pool = {"neutral": bank.NEUTRAL_NON_ANSWERS, "mash": bank.KEYBOARD_MASH,
                        "emoji_only": bank.EMOJI_ONLY}[kind]
                r.answers[column] = rng.choice(pool)
                r.truth[column] = _truth("und", ["non_answer" if kind == "neutral" else kind])
                continue
            shares = topic_shares(q, r)
            topics = [t for t in bank.TOPICS if rng.random() < shares[t]]
            if not topics:
                topics = [rng.choices(bank.TOPICS, weights=[shares[t] for t in bank.TOPICS])[0]]
            if len(topics) > 4:
                topics = sorted(rng.sample(topics, 4), key=bank.TOPICS.index)
            rng.shuffle(topics)
            text = composer.compose(lang, q, topics, shares)
            r.answers[column] = text
            r.truth[column] = _truth(lang, mislanguaged, topics=topics)


def surface_mess(rng: random.Random, people: list[Respondent], composer: Composer) -> None:
    """Typos, emoji, mixed languages, personal data, case and whitespace, as people type."""
    bank = composer.bank
    for r in people:
        for column, q in QUESTIONS.items():
            truth = r.truth.get(column)
            if not truth or truth["tags"] or not truth["topics"]:
                continue
            text, lang = r.answers[column], truth["language"]
            tags = truth["tags"]
            if rng.random() < 0.015 and len(text.split()) >= 3:
                other = "en" if lang != "en" else rng.choice(("de", "fr", "es"))
                extra_topic = rng.choice([t for t in bank.TOPICS if t != "general"])
                extra = composer.sentence(other, extra_topic, q)
                text = _append(text, extra)
                tags.append("mixed")
                truth["detail"] = f"{lang}+{other}"
                if _letters(extra) > _letters(r.answers[column]):
                    truth["language"] = other
                    truth["detail"] = f"{other}+{lang}"
                    if other != r.interview_lang and "mislanguaged" not in tags:
                        tags.append("mislanguaged")
                if extra_topic not in truth["topics"]:
                    truth["topics"].append(extra_topic)
            if rng.random() < (0.025 if q == "improve" else 0.006):
                kind = "email" if rng.random() < 0.5 else "phone"
                template = rng.choice(bank.BANK[lang]["pii"][kind])
                if kind == "email":
                    value = f"{rng.choice(bank.EMAIL_LOCALS)}@{rng.choice(bank.EMAIL_DOMAINS)}"
                    detail = "email"
                else:
                    detail, value = phone_number(rng, r.country)
                text = _append(text, template.format(phone=value, email=value))
                tags.append("pii")
                truth["detail"] = ";".join(x for x in (truth["detail"], detail) if x)
            if rng.random() < (0.08 if lang == "pl" else 0.02) and strip_diacritics(text) != text:
                text = strip_diacritics(text)
                tags.append("no_diacritics")
            if rng.random() < 0.05 and "pii" not in tags:  # keep addresses and numbers intact
                typo = add_typo(rng, text)
                if typo != text:
                    text = typo
                    tags.append("typo")
            if rng.random() < 0.04:
                text = f"{text} {rng.choice(bank.EMOJI_TAIL[q])}" if rng.random() < 0.7 else \
                    f"{text}{rng.choice(bank.EMOJI_TAIL[q])}"
                tags.append("emoji")
            roll = rng.random()
            if roll < 0.04:
                text = text.lower()
            elif roll < 0.055 and q == "improve" and "pii" not in tags:
                text = text.upper()
            elif roll < 0.15 and text.endswith("."):
                text = text[:-1]
            if "pii" not in tags and ". " in text and rng.random() < 0.04:
                text = text.replace(". ", ".\n", 1)
                tags.append("multiline")
            roll = rng.random()
            if roll < 0.015:
                text = f" {text}  "
            elif roll < 0.025:
                text = text.replace(" ", "  ", 1)
            r.answers[column] = text


def _append(text: str, sentence: str) -> str:
    """Add a sentence after an answer, closing a bare fragment with a full stop first."""
    return f"{text}. {sentence}" if text[-1:].isalnum() else f"{text} {sentence}"


def _letters(text: str) -> int:
    return sum(c.isalpha() for c in text)


def _plain(people: list[Respondent], column: str, min_len: int = 0) -> list[Respondent]:
    """Respondents whose answer in ``column`` is ordinary content with nothing planted."""
    return [r for r in people
            if (t := r.truth.get(column)) and t["topics"] and not t["tags"]
            and len(r.answers[column]) >= min_len]


def plant_copies(rng: random.Random, people: list[Respondent], bank: ModuleType) -> None:
    """Planted duplicates, near-duplicates, HTML entities, mojibake and the two IBANs."""
    def answer_id(r: Respondent, column: str) -> str:
        return f"{r.rid}|{column}"

    def copy_truth(src: Respondent, dst: Respondent, column: str, tag: str, detail: str) -> None:
        t = src.truth[column]
        dst.truth[column] = _truth(t["language"], [tag], detail, t["topics"])
        if t["language"] != dst.interview_lang:
            dst.truth[column]["tags"].append("mislanguaged")

    # The same respondent pasting one text into both questions.
    for r in rng.sample([r for r in _plain(people, "q_liked", 25) if r.truth.get("q_improve")], 8):
        r.answers["q_improve"] = r.answers["q_liked"]
        copy_truth(r, r, "q_liked", "duplicate", f"same_as:{answer_id(r, 'q_liked')}")
        r.truth["q_improve"] = r.truth["q_liked"]
        r.truth["q_liked"] = _truth(r.truth["q_improve"]["language"], ["duplicate_source"], "",
                                    r.truth["q_improve"]["topics"])
    # One text copied to other respondents of the same questionnaire language.
    for column in ("q_liked", "q_improve", "q_improve", "q_liked", "q_improve", "q_liked", "q_improve", "q_improve"):
        src = rng.choice(_plain(people, column, 40))
        src.truth[column]["tags"].append("duplicate_source")
        targets = [r for r in _plain(people, column) if r.interview_lang == src.interview_lang and r is not src]
        for dst in rng.sample(targets, min(len(targets), rng.randint(1, 3))):
            dst.answers[column] = src.answers[column]
            copy_truth(src, dst, column, "duplicate", f"copy_of:{answer_id(src, column)}")
    # The same text again with a slip or two.
    for column in ("q_liked", "q_improve") * 6:
        src = rng.choice(_plain(people, column, 40))
        text = src.answers[column]
        for _ in range(rng.randint(1, 2)):
            text = add_typo(rng, text)
        if text == src.answers[column]:
            text = text + "!"
        targets = [r for r in _plain(people, column) if r.interview_lang == src.interview_lang and r is not src]
        dst = rng.choice(targets)
        src.truth[column]["tags"].append("near_duplicate_source")
        dst.answers[column] = text
        copy_truth(src, dst, column, "near_duplicate", f"near:{answer_id(src, column)}")
    # Answers exported with HTML entities.
    for lang, q, text, topics in bank.HTML_ANSWERS:
        column = f"q_{q}"
        dst = rng.choice([r for r in _plain(people, column) if r.truth[column]["language"] == lang])
        dst.answers[column] = text
        dst.truth[column] = _truth(lang, ["html_entity"], "", topics)
    # UTF-8 read as cp1252 somewhere upstream (mojibake).
    done = 0
    for r in rng.sample(_plain(people, "q_improve", 20), 200):
        text = r.answers["q_improve"]
        if r.truth["q_improve"]["language"] not in ("de", "fr", "es") or text.isascii():
            continue
        try:
            r.answers["q_improve"] = text.encode("utf-8").decode("cp1252")
        except UnicodeDecodeError:
            continue
        r.truth["q_improve"]["tags"].append("mojibake")
        done += 1
        if done == 4:
            break
    # Bank account numbers pasted into a refund complaint.
    for lang, sentence in bank.IBAN_SENTENCES:
        dst = next(r for r in _plain(people, "q_improve") if r.truth["q_improve"]["language"] == lang)
        dst.answers["q_improve"] = _append(dst.answers["q_improve"], sentence)
        dst.truth["q_improve"]["tags"].append("pii")
        dst.truth["q_improve"]["detail"] = "iban"


def order_copies(people: list[Respondent]) -> None:
    """Call the later of two equal answers, in file order, the copy.

    Which one was pasted from which is arbitrary in the data; a reader going
    through the file (and termloom's clean stage) meets the first occurrence
    first, so the key names that one the source.
    """
    position = {(r.rid, column): (i, j) for i, r in enumerate(people) for j, column in enumerate(QUESTIONS)}
    groups: dict[str, list[tuple[tuple[int, int], Respondent, str]]] = {}
    for r in people:
        for column in QUESTIONS:
            t = r.truth.get(column)
            if t and {"duplicate", "duplicate_source"} & set(t["tags"]):
                groups.setdefault(r.answers[column], []).append((position[(r.rid, column)], r, column))
    for members in groups.values():
        members.sort(key=lambda m: m[0])
        (_, first, first_column), *copies = members
        _retag(first.truth[first_column], ("duplicate", "duplicate_source"), "duplicate_source", "")
        for _, r, column in copies:
            how = "same_as" if r is first else "copy_of"
            _retag(r.truth[column], ("duplicate", "duplicate_source"), "duplicate", f"{how}:{first.rid}|{first_column}")
    by_id = {f"{r.rid}|{column}": (r, column) for r in people for column in QUESTIONS}
    for r in people:
        for column in QUESTIONS:
            t = r.truth.get(column)
            if not t or "near_duplicate" not in t["tags"]:
                continue
            source, source_column = by_id[t["detail"].removeprefix("near:")]
            if position[(source.rid, source_column)] > position[(r.rid, column)]:
                pair = ("near_duplicate", "near_duplicate_source")
                _retag(t, pair, "near_duplicate_source", "")
                _retag(source.truth[source_column], pair, "near_duplicate", f"near:{r.rid}|{column}")


def _retag(truth: dict, old: tuple[str, ...], tag: str, detail: str) -> None:
    truth["tags"] = [tag] + [t for t in truth["tags"] if t not in old]
    truth["detail"] = detail


def generate(seed: int = SEED) -> list[Respondent]:
    rng = random.Random(seed)
    bank = load_bank()
    composer = Composer(rng, bank)
    people = draw_respondents(rng)
    fill_answers(rng, people, composer)
    surface_mess(rng, people, composer)
    plant_copies(rng, people, bank)
    order_copies(people)
    return people


# --------------------------------------------------------------------------- writing


def _rows(people: list[Respondent]) -> list[list[str]]:
    return [[r.rid, r.country, r.age_band, r.wave, r.interview_lang, f"{r.weight:.3f}",
             r.answers.get("q_liked", ""), r.answers.get("q_improve", "")] for r in people]


def write_csv(path: Path, rows: list[list[str]], *, delimiter: str, newline: str, encoding: str) -> None:
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, delimiter=delimiter, lineterminator=newline, quoting=csv.QUOTE_MINIMAL)
    writer.writerow(COLUMNS)
    for row in rows:
        writer.writerow([cell.replace("\n", newline) for cell in row])
    path.write_bytes(buffer.getvalue().encode(encoding))


#: Characters the cp1252 batch cannot hold, written the way the (fictional) legacy
#: export tool writes them: Polish letters without their marks, emoji as '?'.
CP1252_TRANSLIT = {"ą": "a", "ć": "c", "ę": "e", "ł": "l", "ń": "n", "ś": "s", "ź": "z", "ż": "z",
                   "Ą": "A", "Ć": "C", "Ę": "E", "Ł": "L", "Ń": "N", "Ś": "S", "Ź": "Z", "Ż": "Z",
                   "\ufe0f": ""}


def to_cp1252(text: str) -> str:
    out = []
    for char in text:
        try:
            char.encode("cp1252")
            out.append(char)
        except UnicodeEncodeError:
            if char in CP1252_TRANSLIT:
                out.append(CP1252_TRANSLIT[char])
            elif unicodedata.category(char) == "So":
                out.append("?")
            else:
                raise ValueError(f"no cp1252 spelling for {char!r} (U+{ord(char):04X}); add it to CP1252_TRANSLIT")
    return "".join(out)


def batch_rows(people: list[Respondent]) -> list[list[str]]:
    """The autumn batch from DE, FR and NL, as a legacy tool exported it."""
    chosen = [r for r in people if r.wave == "2025-autumn" and r.country in ("DE", "FR", "NL")]
    return [[to_cp1252(cell) for cell in row] for row in _rows(chosen)]


FIXED_TIME = datetime(2025, 11, 4, 9, 0, 0)


def write_xlsx(path: Path, people: list[Respondent]) -> None:
    from openpyxl import Workbook
    from openpyxl.cell.cell import TYPE_STRING

    workbook = Workbook()
    sheet = workbook.active
    sheet.title = "responses"
    sheet.append(COLUMNS)
    for number, row in enumerate(_rows(people), start=2):
        sheet.append([*row[:5], float(row[5]), row[6] or None, row[7] or None])
        # Text cells stay text even when they start with '=' or look like numbers.
        for column in (7, 8):
            cell = sheet.cell(row=number, column=column)
            if cell.value is not None:
                cell.data_type = TYPE_STRING
    sheet.freeze_panes = "A2"
    for letter, width in zip("ABCDEFGH", (10, 8, 9, 12, 8, 9, 60, 60)):
        sheet.column_dimensions[letter].width = width
    about = workbook.create_sheet("about")
    for line in ("Lanternmoth Night Rail passenger survey 2025 - invented demo data for termloom.",
                 "One row per respondent; q_liked and q_improve are the two open-ended questions.",
                 "Everything in this file is fictional; see README.md beside it."):
        about.append([line])
    workbook.properties.creator = "termloom demo generator"
    workbook.properties.created = FIXED_TIME
    buffer = io.BytesIO()
    workbook.save(buffer)
    path.write_bytes(_freeze_zip(buffer.getvalue()))


def _freeze_zip(data: bytes) -> bytes:
    """Same workbook, same bytes: fixed member times and a fixed 'modified' stamp."""
    stamp = FIXED_TIME.strftime("%Y-%m-%dT%H:%M:%SZ")
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            content = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                content = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*(</dcterms:modified>)",
                                 rb"\g<1>" + stamp.encode() + rb"\g<2>", content)
            member = zipfile.ZipInfo(info.filename, date_time=FIXED_TIME.timetuple()[:6])
            member.compress_type = zipfile.ZIP_DEFLATED
            dst.writestr(member, content)
    return out.getvalue()


def key_rows(people: list[Respondent]) -> list[list[str]]:
    rows = []
    for r in people:
        for column in QUESTIONS:
            if not r.answers.get(column):
                continue
            t = r.truth[column]
            rows.append([r.rid, column, t["language"], ";".join(t["tags"]), t["detail"], ";".join(t["topics"])])
    return rows


def build(out_dir: Path | str = HERE, seed: int = SEED) -> list[Path]:
    """Write every demo data file into ``out_dir``; return their paths."""
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    people = generate(seed)
    write_csv(out / SURVEY_CSV, _rows(people), delimiter=",", newline="\n", encoding="utf-8")
    write_csv(out / BATCH_CSV, batch_rows(people), delimiter=";", newline="\r\n", encoding="cp1252")
    write_xlsx(out / SURVEY_XLSX, people)
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(["respondent_id", "question", "true_language", "planted", "detail", "topics"])
    writer.writerows(key_rows(people))
    (out / ANSWER_KEY).write_bytes(buffer.getvalue().encode("utf-8"))
    return [out / name for name in OUTPUTS]


def summary(people: list[Respondent]) -> list[str]:
    """Realised shares of the planted findings (weighted), among answers with content."""
    def share(question: str, topic: str, keep) -> tuple[float, int]:
        column = f"q_{question}"
        rows = [r for r in people if keep(r) and r.truth.get(column, {}).get("topics")]
        total = sum(r.weight for r in rows)
        hit = sum(r.weight for r in rows if topic in r.truth[column]["topics"])
        return hit / total, len(rows)

    checks = [
        ("improve", "wifi", "age 18-29", lambda r: r.age_band == "18-29"),
        ("improve", "wifi", "other ages", lambda r: r.age_band != "18-29"),
        ("improve", "price", "DE+PL", lambda r: r.country in ("DE", "PL")),
        ("improve", "price", "other countries", lambda r: r.country not in ("DE", "PL")),
        ("improve", "punctuality", "2025-spring", lambda r: r.wave == "2025-spring"),
        ("improve", "punctuality", "2025-autumn", lambda r: r.wave == "2025-autumn"),
        ("liked", "punctuality", "2025-spring", lambda r: r.wave == "2025-spring"),
        ("liked", "punctuality", "2025-autumn", lambda r: r.wave == "2025-autumn"),
        ("liked", "breakfast", "FR", lambda r: r.country == "FR"),
        ("liked", "breakfast", "other countries", lambda r: r.country != "FR"),
        ("improve", "accessibility", "age 60+", lambda r: r.age_band == "60+"),
        ("improve", "accessibility", "other ages", lambda r: r.age_band != "60+"),
        ("liked", "staff", "FR", lambda r: r.country == "FR"),
        ("liked", "staff", "other countries", lambda r: r.country != "FR"),
    ]
    lines = []
    for question, topic, label, keep in checks:
        value, n = share(question, topic, keep)
        lines.append(f"q_{question:8s} {topic:14s} {label:16s} {value:6.1%}  (n={n})")
    return lines


def main(argv: list[str] | None = None) -> int:
    args = sys.argv[1:] if argv is None else argv
    out = Path(args[0]) if args else HERE
    for path in build(out):
        print(f"wrote {path} ({path.stat().st_size:,} bytes)")
    print("\n".join(summary(generate())))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
