"""The clean stage: normalise each answer, mask personal data, flag junk and duplicates.

``raw_text`` is never touched. Each answer gains:

``clean_text``
    the normalised text **with personal data already replaced** by typed
    placeholders (``⟨email⟩``, ``⟨phone⟩``, ``⟨url⟩``, ``⟨iban⟩``, ``⟨card⟩``).
    Later stages and every export read this column, so nothing personal can
    leak past clean by accident.
``masks``
    one ``(type, start, end)`` per placeholder, as offsets **into clean_text**:
    ``clean_text[start:end]`` is the placeholder itself. This is the choice a
    screen can use directly (highlight the span it shows); offsets into the
    raw text would point at the personal data, which is exactly what a
    review screen should not have to handle, and offsets into an unmasked
    clean text exist in no column.
``flags``
    reason codes, in order: at most one content code from ``nonanswer.py``
    (``empty``, ``pii_only``, ``emoji_only``, ``punctuation_only``,
    ``non_answer``, ``keyboard_mash``, ``too_short``) and at most one
    duplicate code from ``duplicates.py`` (``same_respondent_repeat``,
    ``duplicate``, ``near_duplicate``); identify may add ``mixed_language``.
``duplicate_of``
    the answer id of the first occurrence for duplicate codes, else ``None``.
``enters_weighting``
    False when a junk code is set (all codes above except ``emoji_only`` and
    ``mixed_language``) unless ``clean.flagged_enter_weighting``, and False
    whenever the answer is excluded by a decision.

Normalisation, in order (:func:`normalise_text`)
------------------------------------------------
1. Lone UTF-16 surrogates (from broken JSON or Excel files) are paired up
   where they form a valid pair and dropped otherwise — never a crash.
2. Mojibake repair with ftfy (``clean.repair_mojibake``), run only when
   ftfy's ``is_bad`` heuristic sees mojibake: its full fixer costs ~75 µs an
   answer, the check ~12 µs, and pure ASCII text cannot be mojibake at all.
3. HTML entities decoded (``html.unescape``; ``&amp;`` → ``&``).
4. Unicode NFC.
5. Control characters (category Cc) and invisible format characters
   (category Cf: zero-width space, word joiner, BOM, soft hyphen,
   left-to-right and right-to-left marks and embeddings) removed — except the
   zero-width joiner and non-joiner, which are part of emoji sequences and of
   Persian/Indic spelling, and the tag characters of flag emoji.
6. Every run of white space (including line breaks and no-break spaces)
   becomes one space; leading and trailing space is dropped.

Decisions
---------
``decisions.non_answer[answer_id]`` True adds ``non_answer``; False removes
every content code that means "not a real answer" (the analyst has read it
and says it is one). ``decisions.exclude[answer_id]`` True keeps the answer
out of weighting, with an ``excluded_by_decision`` ledger event.
"""

from __future__ import annotations

import html
import re
import unicodedata
from collections import Counter
from dataclasses import dataclass

import ftfy
import pandas as pd
from ftfy.badness import BADNESS_RE, is_bad

from workbench.core import corpus as C
from workbench.core.decisions import Decisions
from workbench.core.duplicates import DUPLICATE_CODES, duplicate_key, find_duplicates
from workbench.core.duplicates import MESSAGES as DUPLICATE_MESSAGES
from workbench.core.errors import SettingsError
from workbench.core.ledger import Ledger
from workbench.core.mapping import LocalMapper, Mapper, fingerprint
from workbench.core.nonanswer import JUNK_CODES, MESSAGES, NonAnswerRules, char_class, phrase_key
from workbench.core.pii import check_regions, default_regions, mask_personal_data
from workbench.core.profiles import LanguageProfile
from workbench.core.progress import Reporter
from workbench.core.settings import Study

STAGE = "clean"
#: Codes that keep an answer out of weighting (unless the study lets flagged answers in).
WEIGHTING_JUNK = JUNK_CODES | frozenset(DUPLICATE_CODES)

_KEEP_FORMAT = {0x200C, 0x200D}


def _removal_table() -> dict[int, None]:
    table: dict[int, None] = {}
    # Cc and Cf characters live in planes 0, 1 and 14 only; scanning those
    # instead of all 1.1 million code points keeps the import fast.
    for cp in (*range(0x20000), *range(0xE0000, 0xE1000)):
        if 0xE0020 <= cp <= 0xE007F or cp in _KEEP_FORMAT or cp in (0x09, 0x0A, 0x0D):
            continue
        if unicodedata.category(chr(cp)) in ("Cc", "Cf"):
            table[cp] = None
    return table


_REMOVE = _removal_table()
_SURROGATE_RE = re.compile("[\ud800-\udfff]")

# As ranges (25 instead of 127 characters): the per-character test is five times cheaper.
_REMOVE_RE = re.compile(char_class(_REMOVE))
_FTFY_CONFIG = ftfy.TextFixerConfig(unescape_html=False, normalization="NFC", explain=False)


def _badness_width() -> int:
    """Longest match of ftfy's mojibake pattern if every match must hold a non-ASCII character, else 0.

    Read off the pattern's parse tree: each alternative must have a
    mandatory character (a literal or a class with no ASCII member), and
    nothing may look around (only ``^``, which a search from a later position
    does not match, as in the whole text). Then a match lies within ``width``
    characters of one of the text's non-ASCII characters, and searching the
    windows around them gives the same answer as searching the whole text.
    A future ftfy whose pattern fails the check is searched whole.
    """
    try:
        from re import _constants as K  # noqa: N812 - the re module's own opcode names
        from re import _parser

        pattern = BADNESS_RE
        if pattern.flags & re.IGNORECASE:
            return 0
        tree = _parser.parse(pattern.pattern, pattern.flags)
        width = tree.getwidth()[1]
        if width >= _parser.MAXREPEAT:
            return 0

        def non_ascii(op: object, av: object) -> bool:
            if op is K.LITERAL:
                return av >= 128  # type: ignore[operator]
            if op is K.IN:
                return all(
                    (o is K.LITERAL and a >= 128) or (o is K.RANGE and a[0] >= 128)  # type: ignore[index,operator]
                    for o, a in av  # type: ignore[attr-defined]
                )
            return False

        def plain(items: object) -> bool:
            for op, av in items:  # type: ignore[attr-defined]
                if op is K.AT:
                    if av is not K.AT_BEGINNING:
                        return False
                elif op in (K.ASSERT, K.ASSERT_NOT, K.GROUPREF, K.GROUPREF_EXISTS):
                    return False
                if op is K.BRANCH and not all(plain(b) for b in av[1]):
                    return False
                if op in (K.MAX_REPEAT, K.MIN_REPEAT, K.POSSESSIVE_REPEAT) and not plain(av[2]):
                    return False
                if op is K.SUBPATTERN and not plain(av[-1]):
                    return False
            return True

        items = list(tree)
        branches = items[0][1][1] if len(items) == 1 and items[0][0] is K.BRANCH else [items]
        if not plain(items) or not all(any(non_ascii(op, av) for op, av in b) for b in branches):
            return 0
        return int(width)
    except Exception:  # noqa: BLE001 - a private parser that may change: fall back to the whole search
        return 0


_BADNESS_WIDTH = _badness_width()
_NON_ASCII_RE = re.compile(r"[^\x00-\x7f]+")


def _is_bad(text: str) -> bool:
    """ftfy's ``is_bad`` (mojibake seen), searched only near non-ASCII characters when that is exact.

    The pattern tries some 40 alternatives at every position; survey text is
    mostly ASCII, so the windows are a small part of it.
    """
    width = _BADNESS_WIDTH
    if not width:
        return is_bad(text)
    lo: int | None = None
    hi = 0
    for m in _NON_ASCII_RE.finditer(text):  # runs of non-ASCII characters
        start = max(0, m.start() - width + 1)
        if lo is None:
            lo = start
        elif start > hi:
            if BADNESS_RE.search(text, lo, hi):
                return True
            lo = start
        hi = m.end() - 1 + width
    return lo is not None and BADNESS_RE.search(text, lo, hi) is not None


def normalise_text(raw: str, repair_mojibake: bool = True) -> tuple[str, list[str]]:
    """Normalise one answer (steps in the module docstring).

    Returns the text and notes on repairs worth telling the user about
    (``"surrogates"``, ``"mojibake"``).
    """
    notes: list[str] = []
    text = raw
    if _SURROGATE_RE.search(text):
        # Pairs written as two escaped halves become one character; halves
        # without a partner become U+FFFD and are dropped just below.
        text = text.encode("utf-16", "surrogatepass").decode("utf-16", "replace").replace("\ufffd", "")
        notes.append("surrogates")
    if text.isascii():
        if "&" in text:
            text = html.unescape(text)
            if not text.isascii():
                text = unicodedata.normalize("NFC", text)
    else:
        if repair_mojibake and _is_bad(text):
            fixed = ftfy.fix_text(text, _FTFY_CONFIG)
            if fixed != text:
                notes.append("mojibake")
                text = fixed
        if "&" in text:
            text = html.unescape(text)
        text = unicodedata.normalize("NFC", text)
    if _REMOVE_RE.search(text):
        text = text.translate(_REMOVE)
    return " ".join(text.split()), notes


_NOTE_MESSAGES = {
    "surrogates": "invalid UTF-16 surrogate characters removed",
    "mojibake": "mis-decoded characters (mojibake) repaired",
}


def _phrases(study: Study, profiles: dict[str, LanguageProfile]) -> list[str]:
    phrases = list(study.clean.non_answers)
    for code in study.languages.expected:
        profile = profiles.get(code)
        if profile is not None:
            phrases.extend(profile.non_answers)
    return phrases


def _regions(study: Study) -> tuple[str, ...]:
    regions = [r.upper() for r in study.clean.phone_regions]
    unknown = check_regions(regions)
    if unknown:
        raise SettingsError(
            f"clean.phone_regions: unknown region code(s) {', '.join(unknown)}; "
            "use ISO 3166 two-letter codes such as DE, FR, GB"
        )
    return tuple(regions) if regions else default_regions(study.languages.expected)


#: What cleaning one raw text gives: masked clean text, masks, content code, repair notes,
#: and the duplicate key (``duplicates.duplicate_key`` of the masked text; ``""`` for junk,
#: which the duplicate search skips).
CleanedText = tuple[str, tuple[tuple[str, int, int], ...], str | None, tuple[str, ...], str]


@dataclass(frozen=True)
class CleanRecipe:
    """Everything cleaning one text depends on (picklable; see ``mapping.py``)."""

    kinds: tuple[str, ...]
    regions: tuple[str, ...]
    phrases: tuple[str, ...]
    min_chars: int
    repair_mojibake: bool
    key: str = ""

    def build(self) -> tuple[NonAnswerRules, CleanRecipe]:
        return NonAnswerRules(self.phrases, self.min_chars), self


def clean_recipe(study: Study, profiles: dict[str, LanguageProfile]) -> CleanRecipe:
    """The recipe of a study's per-text cleaning.

    Raises
    ------
    SettingsError
        An unknown phone region in ``clean.phone_regions``.
    """
    settings = study.clean
    parts = (tuple(settings.mask), _regions(study), tuple(_phrases(study, profiles)), settings.min_chars,
             settings.repair_mojibake)
    return CleanRecipe(*parts, key=fingerprint("clean", *parts))


def clean_texts(texts: list[str], kit: tuple[NonAnswerRules, CleanRecipe]) -> list[CleanedText]:
    """Normalise, mask and classify each raw text: the per-text part of the stage (pure, no ledger)."""
    rules, recipe = kit
    kinds, regions, repair = recipe.kinds, recipe.regions, recipe.repair_mojibake
    out: list[CleanedText] = []
    for raw in texts:
        text, notes = normalise_text(raw, repair)
        masked, masks = mask_personal_data(text, kinds, regions) if kinds else (text, [])
        code, key = rules.classify_keyed(masked)
        if code is not None and code in WEIGHTING_JUNK:
            key = ""
        elif key is None:
            key = duplicate_key(masked)
        out.append((masked, tuple(masks), code, tuple(notes), key))
    return out


def _as_text(value: object) -> str:
    if isinstance(value, str):
        return value
    if value is None or (isinstance(value, float) and value != value):
        return ""
    return str(value)


def clean_answers(
    answers: pd.DataFrame,
    study: Study,
    profiles: dict[str, LanguageProfile],
    decisions: Decisions,
    ledger: Ledger,
    reporter: Reporter,
    *,
    mapper: Mapper | None = None,
) -> pd.DataFrame:
    """Add the clean columns to a copy of the answers table.

    Each distinct raw text is normalised, masked and classified once (survey
    answers repeat a lot) by :func:`clean_texts`, run by ``mapper`` (in this
    process by default; see ``mapping.py``); duplicates are then found over
    the whole table.
    Every answer gets at least one ledger event: one per flag (``flagged``),
    per mask or repair (``kept``), or a single ``cleaned`` event.

    Raises
    ------
    SettingsError
        An unknown phone region in ``clean.phone_regions``.
    """
    settings = study.clean
    recipe = clean_recipe(study, profiles)
    out = answers.copy()
    n = len(out)
    raws = [_as_text(v) for v in out[C.RAW_TEXT].tolist()] if n else []

    reporter.update(STAGE, 0, n, "normalising and masking")
    distinct = list(dict.fromkeys(raws))
    mapped = (mapper or LocalMapper()).map(
        clean_texts, distinct, recipe, stage=STAGE, what=f"normalising and masking {len(distinct):,} distinct texts",
        reporter=reporter,
    )
    cache = dict(zip(distinct, mapped, strict=True))
    del distinct, mapped
    results = [cache[raw] for raw in raws]
    texts = [r[0] for r in results]
    content = [r[2] for r in results]

    reporter.update(STAGE, n, n, "looking for duplicates")
    ids = out[C.ANSWER_ID].astype(str).tolist() if n else []
    respondents = out[C.RESPONDENT_ID].astype(str).tolist() if n else []
    questions = out[C.QUESTION].astype(str).tolist() if n else []
    duplicates = find_duplicates(
        respondents,
        questions,
        texts,
        [code is None or code not in WEIGHTING_JUNK for code in content],
        settings.near_duplicate_min_chars,
        settings.near_duplicate,
        keys=[r[4] for r in results],
        # The bar stays full (the texts are cleaned); the message counts on, and Esc still cancels.
        progress=lambda what, done, total: reporter.update(STAGE, n, n, f"{what}: {done:,} of {total:,}"),
    )

    sources = out[C.SOURCE].astype(str).tolist() if n else []
    rows = [int(r) for r in out[C.ROW].tolist()] if n else []
    flags_col: list[list[str]] = []
    dup_col: list[str | None] = []
    enters_col: list[bool] = []
    events = []
    non_answer_verdicts, excluded = decisions.non_answer, decisions.exclude
    for i in range(n):
        aid, src, row = ids[i], sources[i], rows[i]
        masked, masks, code, notes, _ = results[i]
        if (code is None and duplicates[i] is None and not masks and not notes
                and aid not in non_answer_verdicts and aid not in excluded):  # fmt: skip
            # The common case, nothing to flag, keep or decide: what the steps below give, directly.
            events.append(("answer", aid, src, row, STAGE, "kept", "cleaned", "cleaned"))
            flags_col.append([])
            dup_col.append(None)
            enters_col.append(True)
            continue
        flags: list[str] = []
        recorded = False
        if code is not None:
            flags.append(code)
            detail = f' ("{phrase_key(masked)}")' if code == "non_answer" else ""
            events.append(("answer", aid, src, row, STAGE, "flagged", code, MESSAGES[code] + detail))
        dup = duplicates[i]
        duplicate_of = None
        if dup is not None:
            dcode, other, score = dup
            duplicate_of = ids[other]
            flags.append(dcode)
            message = DUPLICATE_MESSAGES[dcode].format(other=duplicate_of, score=score)
            events.append(("answer", aid, src, row, STAGE, "flagged", dcode, message))

        verdict = decisions.non_answer.get(aid)
        if verdict is True and "non_answer" not in flags:
            flags.insert(0, "non_answer")
            events.append(("answer", aid, src, row, STAGE, "flagged", "non_answer", "marked as a non-answer by decision"))
        elif verdict is False and any(f in JUNK_CODES for f in flags):
            removed = [f for f in flags if f in JUNK_CODES]
            flags = [f for f in flags if f not in JUNK_CODES]
            events.append(
                ("answer", aid, src, row, STAGE, "kept", "answer_by_decision",
                 f"kept as a real answer by decision (removed: {', '.join(removed)})")
            )  # fmt: skip
            recorded = True

        junk = any(f in WEIGHTING_JUNK for f in flags)
        enters = not junk or settings.flagged_enter_weighting
        if junk and settings.flagged_enter_weighting:
            events.append(
                ("answer", aid, src, row, STAGE, "kept", "flagged_enters_weighting",
                 "flagged but enters weighting (clean.flagged_enter_weighting = true)")
            )  # fmt: skip
        if decisions.exclude.get(aid):
            enters = False
            events.append(("answer", aid, src, row, STAGE, "flagged", "excluded_by_decision", "excluded by decision"))
        if masks:
            counts = Counter(m[0] for m in masks)
            what = ", ".join(f"{k} {v}" for k, v in sorted(counts.items()))
            events.append(("answer", aid, src, row, STAGE, "kept", "masked", f"personal data masked: {what}"))
            recorded = True
        for note in notes:
            events.append(("answer", aid, src, row, STAGE, "kept", f"repaired_{note}", _NOTE_MESSAGES[note]))
            recorded = True
        if not flags and not recorded and not decisions.exclude.get(aid):
            events.append(("answer", aid, src, row, STAGE, "kept", "cleaned", "cleaned"))
        flags_col.append(flags)
        dup_col.append(duplicate_of)
        enters_col.append(enters)
    ledger.extend(events)

    out[C.CLEAN_TEXT] = pd.Series(texts, index=out.index, dtype=str)
    out[C.MASKS] = pd.Series([list(r[1]) for r in results], index=out.index, dtype=object)
    out[C.FLAGS] = pd.Series(flags_col, index=out.index, dtype=object)
    out[C.DUPLICATE_OF] = pd.Series(dup_col, index=out.index, dtype=object)
    out[C.ENTERS_WEIGHTING] = pd.Series(enters_col, index=out.index, dtype=bool)
    reporter.update(STAGE, n, n, f"{sum(1 for f in flags_col if f):,} answers flagged")
    return out
