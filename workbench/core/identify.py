"""The identify stage: each answer's language, with a confidence and where the label came from.

Per answer (columns from ``corpus.py``):

``language``
    an expected language code, or ``"und"`` (undetermined).
``confidence``
    in [0, 1]: the detector's probability of ``language`` among the expected
    languages (see ``detectors.py``). 1.0 for a decision; for a fallback
    label, the detector's probability if its best guess was that same
    language, else 0.0 — a fallback is not evidence.
``language_source``
    ``detector``, ``hint``, ``default`` or ``decision``. ``und`` answers
    carry ``detector`` (the detector, or the rules before it, declined).
``mixed`` / ``second_language``
    code-switching, see below.

Precision first
---------------
The detector's label is used only when the answer has at least
``identify.min_letters`` letters **and** the probability reaches
``identify.min_confidence``. Otherwise ``languages.fallback`` decides:
``hint`` takes the answer's hint column value when it names an expected
language (a code such as ``de``, ``DE``, ``de-AT`` or the profile's name,
``German``), else ``und``; ``default`` takes ``languages.default``; ``und``
takes ``und``. A confident detector beats the hint, so an answer written in
German in the English questionnaire is labelled German.

What the detector sees
----------------------
The cleaned text without placeholders, emoji and other symbols, URLs (already placeholders),
digits and letters of scripts no expected language uses (Arabic or Hebrew
in a study of Latin-script languages), lower-cased when written all in
capitals. Letters are counted on
that text (``str.isalpha``). Each distinct such text is detected once.
Answers whose clean flags say they are not real answers (non-answer, mash,
punctuation, too short, empty, personal data only) are not detected at all;
they take the fallback.

Mixed languages
---------------
Answers with at least ``2 * identify.mixed_min_letters`` letters are split
into segments at sentence punctuation and commas (``. ! ? ; : … ,`` and line
breaks). Each segment with at least ``max(min_letters, 12)`` letters is
detected; the letters of segments detected with at least
``max(min_confidence, 0.9)`` are summed per language (short segments need a
higher bar: at 0.6, a Portuguese clause "com croissants frescos" reads as
French). When two expected languages each reach
``mixed_min_letters`` letters, the answer is ``mixed``, its label is the
language with most letters, ``second_language`` the runner-up, the flag
``mixed_language`` is added and the confidence is the letter-weighted mean
probability of the majority language's segments.

The default detector
--------------------
py3langid, chosen by measurement: ``tests/bench/bench_identify.py`` on the
5,943 chatterbot-corpus utterances of en, de, es, fr, it, nl, pt, ru, sv,
tr (no hint; accuracy / wrong label on 4+ words, then on 1–3 words; wall
time of one run over the corpus, models loaded, on a shared machine)::

    py3langid   bar 0.6   97.9 % / 0.3 %    54.1 % / 1.3 %     22 s
    langdetect  bar 0.6   93.2 % / 4.9 %    56.1 % / 17.6 %   122 s
    lingua      bar 0.6   78.4 % / 0.2 %    38.9 % / 0.8 %     48 s (optional)
    lingua      bar 0.3   94.6 % / 1.7 %    60.0 % / 6.7 %     (its scores run lower)
    ensemble    bar 0.6   92.5 % / 0.2 %    45.8 % / 0.9 %     94 s

py3langid is the most accurate on 4+ words and by far the fastest; its
wrong-label rate on short answers is already far under the 8 % target, so
the ensemble (py3langid and langdetect must agree) trades 5 points of
accuracy for 0.1–0.4 points fewer wrong labels, and lingua's models (~1 GB,
seconds to load) buy nothing here. The default bar (``identify.min_confidence``
= 0.6 with ``min_letters`` = 8) comes from the same benchmark's sweep: 0.8
gives 95.5 % on 4+ words (under the 97 % target), 0.5 gives 98.3 % with
1.7 % wrong on short answers.

Deterministic: detection is a pure function of the text (langdetect is
seeded), distinct texts are processed in first-appearance order, and ties
are broken by the order of ``languages.expected``.
"""

from __future__ import annotations

import functools
import re
import unicodedata
from collections import defaultdict
from dataclasses import dataclass

import numpy as np
import pandas as pd

from workbench.core import corpus as C
from workbench.core.decisions import Decisions
from workbench.core.detectors import UND, Detector, make_detector
from workbench.core.errors import SettingsError
from workbench.core.ledger import Ledger
from workbench.core.mapping import LocalMapper, Mapper, fingerprint
from workbench.core.nonanswer import JUNK_CODES
from workbench.core.pii import PLACEHOLDER_RE
from workbench.core.profiles import available_languages, load_profiles
from workbench.core.progress import Reporter
from workbench.core.settings import Study

STAGE = "identify"
_BATCH = 5000
_SEGMENT_RE = re.compile(r"[.!?;:…,\n]+")
#: Anything but letters, white space and sentence punctuation: emoji, symbols,
#: digits, underscores. One C-level pass instead of an emoji tokenizer.
_NOT_TEXT_RE = re.compile(r"[^\w\s.,;:!?¡¿'’\"()\-]+|[\d_]+")
MIN_SEGMENT_LETTERS = 12
#: Segments are short, so they must be surer than whole answers to count
#: (0.9 measured: no false mixing on the monolingual corpus or the demo).
MIN_SEGMENT_CONFIDENCE = 0.9


#: The script each language is written in; letters of other scripts are
#: invisible to detection (a detector restricted to en/de would otherwise
#: call Arabic text English, having nothing better to offer).
LANGUAGE_SCRIPTS: dict[str, str] = {"el": "GREEK", "ru": "CYRILLIC"}
_DEFAULT_SCRIPT = "LATIN"
#: A letter outside the Latin blocks (Basic to Extended-B, Extended Additional).
_NON_LATIN_LETTER_RE = re.compile(r"[^\W\d_\u0000-\u024f\u1e00-\u1eff]")


@functools.lru_cache(maxsize=65536)
def _script(ch: str) -> str:
    return unicodedata.name(ch, "UNKNOWN").split(" ", 1)[0]


def scripts_of(languages: list[str]) -> frozenset[str]:
    return frozenset(LANGUAGE_SCRIPTS.get(code, _DEFAULT_SCRIPT) for code in languages)


def detection_text(clean_text: str, scripts: frozenset[str] = frozenset({_DEFAULT_SCRIPT})) -> str:
    """What the detector sees: no placeholders, emoji, symbols, digits or letters
    of scripts the expected languages do not use; all-caps text lowered."""
    text = PLACEHOLDER_RE.sub(" ", clean_text) if "⟨" in clean_text else clean_text
    text = _NOT_TEXT_RE.sub(" ", text)
    if not text.isascii() and (_DEFAULT_SCRIPT not in scripts or _NON_LATIN_LETTER_RE.search(text)):
        text = "".join(" " if ch.isalpha() and _script(ch) not in scripts else ch for ch in text)
    elif _DEFAULT_SCRIPT not in scripts:
        text = "".join(" " if ch.isalpha() else ch for ch in text)
    text = " ".join(text.split())
    return text.lower() if text.isupper() else text


def count_letters(text: str) -> int:
    return sum(map(str.isalpha, text))


def check_languages(study: Study, detector: Detector) -> None:
    """Every expected language needs a profile and the detector's support.

    Raises
    ------
    SettingsError
        naming the unsupported codes and listing the supported ones.
    """
    profiles = set(available_languages())
    usable = profiles & detector.supported()
    bad = [code for code in study.languages.expected if code not in usable]
    if bad:
        raise SettingsError(
            f"languages.expected: {', '.join(repr(c) for c in bad)} not supported "
            f"(needs a language profile and detector '{detector.name}'); "
            f"supported codes: {', '.join(sorted(usable))}"
        )
    default = study.languages.default
    if study.languages.fallback == "default" and default not in study.languages.expected:
        raise SettingsError(
            f"languages.default = '{default}' is not in languages.expected "
            f"({', '.join(study.languages.expected)}); add it there or pick one of those"
        )


def _hint_table(study: Study) -> dict[str, str]:
    """Accepted spellings of each expected language in the hint column."""
    table: dict[str, str] = {}
    for code, profile in load_profiles(list(study.languages.expected)).items():
        table[code] = code
        table[profile.name.casefold()] = code
    return table


def _read_hint(value: object, table: dict[str, str]) -> str | None:
    if not isinstance(value, str) or not value.strip():
        return None
    text = value.strip().casefold()
    if text in table:
        return table[text]
    return table.get(re.split(r"[-_ ]", text, maxsplit=1)[0])


def _events(answers: pd.DataFrame, found: list[tuple[int, str, str, str]]) -> list[tuple]:
    """Ledger events from ``(position, status, code, message)``: id, source and row read for those answers only."""
    if not found:
        return []
    at = [position for position, *_rest in found]
    ids = answers[C.ANSWER_ID].astype(str).take(at).tolist()
    sources = answers[C.SOURCE].astype(str).take(at).tolist()
    rows = [int(r) for r in answers[C.ROW].take(at).tolist()]
    return [
        ("answer", aid, src, row, STAGE, status, code, message)
        for aid, src, row, (_p, status, code, message) in zip(ids, sources, rows, found, strict=True)
    ]


def _as_list(value: object) -> list[str]:
    if isinstance(value, str) or value is None:
        return []
    try:
        return [str(v) for v in value]  # type: ignore[union-attr]
    except TypeError:
        return []


def _segments(text: str, min_letters: int) -> list[tuple[str, int]]:
    parts = []
    for piece in _SEGMENT_RE.split(text):
        letters = count_letters(piece)
        if letters >= min_letters:
            parts.append((piece.strip(), letters))
    return parts


def _detect_all(detector: Detector, texts: list[str], expected: list[str]) -> list[tuple[str, float]]:
    result: list[tuple[str, float]] = []
    for start in range(0, len(texts), _BATCH):
        result.extend(detector.detect(texts[start : start + _BATCH], expected))
    return result


#: Mixed-language finding of one text: majority language, runner-up, confidence, letters per language.
Mixed = tuple[str, str, float, dict[str, int]]
#: Per detection text: the detector's language and probability, and the mixed finding (or ``None``).
Detected = tuple[str, float, Mixed | None]


@dataclass(frozen=True)
class IdentifyRecipe:
    """Everything detecting one text depends on (picklable; see ``mapping.py``)."""

    detector: str
    expected: tuple[str, ...]
    min_letters: int
    min_confidence: float
    mixed_min_letters: int
    key: str = ""

    def build(self) -> tuple[Detector, IdentifyRecipe]:
        return make_detector(self.detector), self


def identify_recipe(study: Study) -> IdentifyRecipe:
    """The recipe of a study's per-text detection."""
    s = study.identify
    parts = (s.detector, tuple(study.languages.expected), s.min_letters, s.min_confidence, s.mixed_min_letters)
    return IdentifyRecipe(*parts, key=fingerprint("identify", *parts))


def identify_texts(texts: list[str], kit: tuple[Detector, IdentifyRecipe]) -> list[Detected]:
    """Language of each detection text, and the mixed-language check: the per-text part of the stage.

    Pure: each text's result depends on that text alone (see the module docstring).
    """
    detector, recipe = kit
    expected = list(recipe.expected)
    order = {code: i for i, code in enumerate(expected)}
    detected = _detect_all(detector, texts, expected)

    # Segment-level detection for code-switching.
    mixed_info: dict[int, Mixed] = {}
    min_segment = max(recipe.min_letters, MIN_SEGMENT_LETTERS)
    segment_bar = max(recipe.min_confidence, MIN_SEGMENT_CONFIDENCE)
    seg_texts: list[str] = []
    seg_owner: list[tuple[int, int]] = []
    for index, text in enumerate(texts):
        if count_letters(text) >= 2 * recipe.mixed_min_letters:
            parts = _segments(text, min_segment)
            counts = [count for _, count in parts]
            # A second language needs mixed_min_letters letters outside the
            # largest segment; when the rest is shorter, no need to look.
            if len(parts) >= 2 and sum(counts) - max(counts) >= recipe.mixed_min_letters:
                for piece, count in parts:
                    seg_texts.append(piece)
                    seg_owner.append((index, count))
    if seg_texts:
        seg_result = _detect_all(detector, seg_texts, expected)
        per_text: dict[int, dict[str, list[float]]] = defaultdict(dict)
        for (index, count), (code, prob) in zip(seg_owner, seg_result, strict=True):
            if code != UND and prob >= segment_bar:
                tally = per_text[index].setdefault(code, [0.0, 0.0])
                tally[0] += count
                tally[1] += count * prob
        for index, tally in per_text.items():
            ranked = sorted(tally.items(), key=lambda kv: (-kv[1][0], order[kv[0]]))
            if len(ranked) >= 2 and ranked[1][1][0] >= recipe.mixed_min_letters:
                first, second = ranked[0], ranked[1]
                confidence = first[1][1] / first[1][0]
                mixed_info[index] = (first[0], second[0], confidence, {k: int(v[0]) for k, v in ranked})
    return [(code, prob, mixed_info.get(index)) for index, (code, prob) in enumerate(detected)]


def identify_answers(
    answers: pd.DataFrame,
    study: Study,
    decisions: Decisions,
    ledger: Ledger,
    reporter: Reporter,
    *,
    mapper: Mapper | None = None,
) -> pd.DataFrame:
    """Add language, confidence, language_source, mixed and second_language to a copy of the answers.

    Each distinct detection text is detected once by :func:`identify_texts`,
    run by ``mapper`` (in this process by default; see ``mapping.py``).

    Raises
    ------
    SettingsError
        An expected language without a profile or unknown to the detector,
        or a ``languages.default`` outside ``languages.expected``.
    """
    settings = study.identify
    expected = list(study.languages.expected)
    check_languages(study, make_detector(settings.detector))
    # A shallow copy: pandas copies on write, so the new columns leave the caller's table alone.
    out = answers.copy(deep=False)
    n = len(out)
    order = {code: i for i, code in enumerate(expected)}
    hint_table = _hint_table(study)
    fallback = study.languages.fallback
    scripts = scripts_of(expected)

    # Memory: no Python string per answer for ids, sources, rows or texts. Cleaned texts are
    # factorised on their Arrow array (only distinct texts become Python strings), answers with a
    # language decision are found column-wise, and id, source and row are fetched only for the
    # answers that get a ledger event (see ``_events``).
    decided_at = (
        out[C.ANSWER_ID].astype(str).isin(list(decisions.language)).to_numpy(dtype=bool)
        if n and decisions.language else np.zeros(n, dtype=bool)
    )
    decided_ids = out[C.ANSWER_ID].astype(str).to_numpy(dtype=object)[decided_at] if decided_at.any() else []
    decided_of = dict(zip(np.flatnonzero(decided_at).tolist(), decided_ids, strict=True))
    if n:
        text_codes, text_uniques = pd.factorize(out[C.CLEAN_TEXT], use_na_sentinel=True)
        distinct_cleaned = [v if isinstance(v, str) else "" for v in np.asarray(text_uniques, dtype=object).tolist()]
        text_codes = text_codes.tolist()
    else:
        text_codes, distinct_cleaned = [], []
    # Flags may come back from Parquet as arrays; read them as plain lists (see the loop below).
    flags_in = out[C.FLAGS].to_numpy(dtype=object) if n and C.FLAGS in out else np.full(n, None, dtype=object)
    # Hints repeat (a handful of codes): each answer points at one of the distinct values.
    if C.HINT in out and n:
        hint_codes, hint_uniques = pd.factorize(out[C.HINT])
        hint_values = np.asarray(hint_uniques, dtype=object).tolist() + [None]  # code -1 (missing) -> None
        hints = [hint_values[c] for c in hint_codes.tolist()]
        del hint_codes, hint_uniques
    else:
        hints = [None] * n

    # Which distinct texts need the detector.
    reporter.update(STAGE, 0, n, "preparing texts")
    valid_decisions = {a: code for a, code in decisions.language.items() if code in order or code == UND}
    texts: list[str | None] = []
    letters: list[int] = []
    distinct: dict[str, int] = {}
    # Survey answers repeat: prepare each distinct cleaned text once.
    prepared_of: list[tuple[str, int] | None] = [None] * len(distinct_cleaned)
    empty_prepared: tuple[str, int] | None = None
    for i in range(n):
        value = flags_in[i]
        junk = value is not None and any(f in JUNK_CODES for f in _as_list(value))
        if (i in decided_of and decided_of[i] in valid_decisions) or junk:
            texts.append(None)
            letters.append(0)
            continue
        code = text_codes[i]
        if code < 0:  # a missing text reads as ""
            if empty_prepared is None:
                blank = detection_text("", scripts)
                empty_prepared = (blank, count_letters(blank))
            text, count = empty_prepared
        else:
            if prepared_of[code] is None:
                prepared = detection_text(distinct_cleaned[code], scripts)
                prepared_of[code] = (prepared, count_letters(prepared))
            text, count = prepared_of[code]  # type: ignore[misc]
        texts.append(text)
        letters.append(count)
        if count >= settings.min_letters and text not in distinct:
            distinct[text] = len(distinct)
    del prepared_of, distinct_cleaned, text_codes
    unique = list(distinct)
    results = (mapper or LocalMapper()).map(
        identify_texts, unique, identify_recipe(study), stage=STAGE,
        what=f"detecting the languages of {len(unique):,} distinct texts", reporter=reporter,
    )
    detected = [(code, prob) for code, prob, _mixed in results]
    mixed_info = {index: mixed for index, (_c, _p, mixed) in enumerate(results) if mixed is not None}
    del results

    languages: list[str] = []
    confidences: list[float] = []
    sources_col: list[str] = []
    mixed_col: list[bool] = []
    second_col: list[str | None] = []
    flags_out: list[list[str]] = []
    #: (answer position, status, code, message); id, source and row are added in ``_events``.
    events: list[tuple[int, str, str, str]] = []
    for i in range(n):
        value = flags_in[i]
        # The clean stage's list is shared when nothing is added (no copy per answer; lists are
        # never changed in place); arrays read back from Parquet become lists.
        flags = value if type(value) is list and all(type(f) is str for f in value) else _as_list(value)
        mixed, second = False, None
        aid = decided_of.get(i)
        decided = decisions.language.get(aid) if aid is not None else None
        if decided is not None and aid not in valid_decisions:
            events.append(
                (i, "flagged", "decision_ignored",
                 f"language decision '{decided}' ignored: not in languages.expected ({', '.join(expected)})")
            )  # fmt: skip
            decided = None
        if decided is not None:
            label, confidence, source = decided, 1.0, "decision"
            events.append((i, "kept", "language_by_decision", f"language set to '{decided}' by decision"))
        else:
            text = texts[i]
            guess, prob = UND, 0.0
            if text is not None and letters[i] >= settings.min_letters:
                index = distinct[text]
                guess, prob = detected[index]
                if index in mixed_info:
                    guess, second, prob, tally = mixed_info[index]
                    mixed = True
                    flags = [*flags, "mixed_language"]
                    spread = ", ".join(f"{k} {v} letters" for k, v in tally.items())
                    events.append((i, "flagged", "mixed_language", f"mixed languages: {spread}"))
            if guess != UND and (prob >= settings.min_confidence or mixed):
                label, confidence, source = guess, prob, "detector"
            else:
                label, source = UND, "detector"
                hint = _read_hint(hints[i], hint_table) if fallback == "hint" else None
                if hint is not None:
                    label, source = hint, "hint"
                elif fallback == "default" and study.languages.default:
                    label, source = study.languages.default, "default"
                confidence = prob if guess == label else 0.0
                # The reason is spelled out only for the answers that need it.
                if text is None:
                    reason = "not a real answer (see clean flags); not detected"
                elif letters[i] < settings.min_letters:
                    reason = f"too few letters to detect ({letters[i]} < identify.min_letters {settings.min_letters})"
                elif guess != UND:
                    reason = f"detector unsure ({guess} {prob:.2f} < identify.min_confidence {settings.min_confidence})"
                else:
                    reason = "detector found no usable features"
                if label == UND:
                    message = f"language undetermined: {reason}"
                    if fallback == "hint":
                        message += "; no usable hint"
                    events.append((i, "kept", "language_und", message))
                else:
                    message = f"language '{label}' from the {source}: {reason}"
                    events.append((i, "kept", f"language_from_{source}", message))
        languages.append(label)
        confidences.append(float(confidence))
        sources_col.append(source)
        mixed_col.append(mixed)
        second_col.append(second)
        flags_out.append(flags)
    ledger.extend(_events(out, events))
    del events

    out[C.LANGUAGE] = pd.Series(languages, index=out.index, dtype=str)
    out[C.CONFIDENCE] = pd.Series(confidences, index=out.index, dtype=float)
    out[C.LANGUAGE_SOURCE] = pd.Series(sources_col, index=out.index, dtype=str)
    out[C.MIXED] = pd.Series(mixed_col, index=out.index, dtype=bool)
    out[C.SECOND_LANGUAGE] = pd.Series(second_col, index=out.index, dtype=object)
    out[C.FLAGS] = pd.Series(flags_out, index=out.index, dtype=object)
    reporter.update(STAGE, n, n, f"{sum(1 for x in languages if x == UND):,} answers undetermined")
    return out
