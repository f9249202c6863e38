"""Non-answers: stock phrases, answers without letters, keyboard mash, answers too short.

Everything here looks at one cleaned answer at a time (placeholders removed)
and returns at most one reason code; duplicates are ``duplicates.py``'s job.

Reason codes, checked in this order
-----------------------------------
``empty``
    nothing left after cleaning (only white space, control or zero-width characters).
``pii_only``
    nothing but masked personal data (``⟨email⟩``), so nothing to analyse.
``emoji_only``
    emoji (and punctuation) but no letters. Informational, **not** junk: an
    emoji can be a term (``terms.keep_emoji``), and "👍" is an opinion.
``punctuation_only``
    no letters and no emoji: punctuation, symbols and digits ("-", "...", "5", "??").
``non_answer``
    the whole answer equals a phrase from the expected languages' profiles
    (``non_answers.txt``) or the study's ``clean.non_answers``, compared by
    :func:`phrase_key`. Clean runs before languages are identified, so the
    union of the expected languages' lists is used; phrases are whole-answer
    matches, so one language's phrase rarely collides with a real answer in
    another.
``keyboard_mash``
    see :func:`is_keyboard_mash`.
``too_short``
    fewer than ``clean.min_chars`` non-space characters.
"""

from __future__ import annotations

import functools
import re
import unicodedata
from collections.abc import Iterable

import emoji

from workbench.core.pii import PLACEHOLDER_RE

#: Codes that mean "not a real answer"; such answers stay out of weighting
#: unless the study says otherwise. ``emoji_only`` is deliberately absent.
JUNK_CODES = frozenset({"empty", "pii_only", "punctuation_only", "non_answer", "keyboard_mash", "too_short"})

MESSAGES = {
    "empty": "nothing left after cleaning",
    "pii_only": "only masked personal data, no words",
    "emoji_only": "only emoji; kept, emoji can be terms",
    "punctuation_only": "no letters: only punctuation, symbols or digits",
    "non_answer": "matches a non-answer phrase",
    "keyboard_mash": "looks like keyboard mash",
    "too_short": "shorter than clean.min_chars",
}

_APOSTROPHES = "'’‘`´ʼ"
_APOSTROPHE_RE = re.compile("[" + re.escape(_APOSTROPHES) + "]")
#: Combining marks (category Mn), removed after NFD; they live in planes 0, 1
#: and 14 (variation selectors).
_MARKS = {cp: None for cp in (*range(0x20000), *range(0xE0100, 0xE01F0)) if unicodedata.category(chr(cp)) == "Mn"}


def char_class(code_points: Iterable[int]) -> str:
    """A regex character class of the code points, consecutive ones as ranges.

    For a class reaching beyond plane 0, ``re`` cannot use a bitmap and tests
    each member in turn, so fewer, wider ranges make each character's test cheaper.
    """
    ranges: list[list[int]] = []
    for cp in sorted(code_points):
        if ranges and ranges[-1][1] == cp - 1:
            ranges[-1][1] = cp
        else:
            ranges.append([cp, cp])
    return "[" + "".join(re.escape(chr(a)) if a == b else f"{re.escape(chr(a))}-{re.escape(chr(b))}" for a, b in ranges) + "]"


#: The plane-0 marks as one class: ``re`` tests plane-0 classes with a bitmap,
#: about twice as fast as ``str.translate``'s dictionary look-up per character.
#: Text with characters beyond plane 0 (rare) keeps the translate table.
_MARKS_BMP_RE = re.compile(char_class(cp for cp in _MARKS if cp < 0x10000))
_NON_WORD = re.compile(r"[\W_]+")


def phrase_key(text: str) -> str:
    """Comparison form of a phrase: casefolded, apostrophes dropped, accents
    stripped, every other non-letter/non-digit run turned into one space.

    ``"N/A"`` → ``"n a"``, ``"Don’t know!"`` → ``"dont know"``,
    ``"Weiß nicht"`` → ``"weiss nicht"``, ``"No sé"`` → ``"no se"``.
    """
    text = text.casefold()
    if not text.isascii() or "'" in text or "`" in text:
        text = _APOSTROPHE_RE.sub("", text)
    if not text.isascii():
        text = unicodedata.normalize("NFD", text)
        text = _MARKS_BMP_RE.sub("", text) if max(text) <= "\uffff" else text.translate(_MARKS)
    return _NON_WORD.sub(" ", text).strip()


# ----------------------------------------------------------------- keyboard mash

#: Letter rows of common keyboard layouts (QWERTY with national letters,
#: QWERTZ, AZERTY, Russian ЙЦУКЕН, Greek). Two letters are neighbours when
#: adjacent in one row.
KEYBOARD_ROWS = (
    "qwertyuiop", "asdfghjkl", "zxcvbnm",
    "qwertzuiopü", "asdfghjklöä", "yxcvbnm",  # German, Swedish, Finnish
    "asdfghjkløæ", "qwertyuiopå",  # Danish, Norwegian
    "asdfghjklñ",  # Spanish
    "azertyuiop", "qsdfghjklmù", "wxcvbn",  # French
    "йцукенгшщзхъ", "фывапролджэ", "ячсмитьбю",
    "ςερτυθιοπ", "ασδφγηξκλ", "ζχψωβνμ",
)  # fmt: skip
_STEP: dict[tuple[str, str], int] = {}
for _row in KEYBOARD_ROWS:
    for _a, _b in zip(_row, _row[1:], strict=False):
        _STEP[(_a, _b)] = 1
        _STEP[(_b, _a)] = -1

#: Base letters counted as vowels (after accents are stripped); y counts, since
#: it carries the vowel in many words of the Latin-script languages.
_VOWELS = frozenset("aeiouyæøœåı" "аеёиоуыэюяіїє" "αεηιουω")
_WORD_RE = re.compile(r"[^\W\d_]+")
#: Letters of the Latin (incl. Extended Additional), Greek and Cyrillic blocks.
_VOWEL_SCRIPTS = re.compile("^[a-z\u00c0-\u024f\u1e00-\u1eff\u0370-\u03ff\u1f00-\u1fff\u0400-\u04ff]+$")

#: Thresholds, tuned on the word lists of spacy-lookups-data (see tests):
#: a keyboard walk of this many keys in one direction ("asdfg", "lkjhg")...
MASH_WALK = 5
#: ...or a whole token that walks the keyboard and is at least this long ("asdf").
MASH_WHOLE_WALK = 4
#: a run of this many consonants (German compounds reach 8: "Angstschweiß")...
MASH_CONSONANT_RUN = 9
#: ...a token this long without any vowel ("sdfjkl"; Czech "čtvrt" has 5)...
MASH_NO_VOWEL = 6
#: ...one letter repeated this often in a row ("aaaa", "fffff")...
MASH_REPEAT = 4
#: ...or at least this many letters drawn from at most two distinct ones ("jfjfjf", "hahaha").
MASH_TWO_LETTERS = 6
#: Share of an answer's letters that must lie in mash-like tokens.
MASH_SHARE = 0.6


def _base(ch: str) -> str:
    return unicodedata.normalize("NFD", ch)[0]


@functools.lru_cache(maxsize=200_000)
def _token_is_mash(token: str) -> bool:
    """Whether one lowercase letter token looks like keyboard mash (rules in :func:`is_keyboard_mash`)."""
    n = len(token)
    if n < MASH_WHOLE_WALK:
        return False
    if len(set(token)) <= 2 and n >= MASH_TWO_LETTERS:
        return True
    run_vowel = 0
    longest_consonants = 0
    consonants = 0
    repeat = 1
    walk = 1
    direction = 0
    whole_walk = True
    previous = ""
    for ch in token:
        base = _base(ch)
        if base in _VOWELS:
            run_vowel += 1
            consonants = 0
        else:
            consonants += 1
            longest_consonants = max(longest_consonants, consonants)
        if previous:
            repeat = repeat + 1 if ch == previous else 1
            if repeat >= MASH_REPEAT:
                return True
            step = _STEP.get((previous, ch), 0)
            if step == 0:
                whole_walk = False
                walk, direction = 1, 0
            elif step == direction:
                walk += 1
            else:
                walk, direction = 2, step
            if walk >= MASH_WALK:
                return True
        previous = ch
    if whole_walk:
        return True
    if not _VOWEL_SCRIPTS.match(token):
        return False  # vowels are only known for Latin, Greek and Cyrillic letters
    if longest_consonants >= MASH_CONSONANT_RUN:
        return True
    return run_vowel == 0 and n >= MASH_NO_VOWEL


def is_keyboard_mash(text: str) -> bool:
    """Whether an answer looks like keys hit at random.

    A heuristic (common practice, thresholds tuned so that real words from
    spacy-lookups-data's word lists are almost never hit). Each letter token
    (lower-cased) is *mash-like* when any of these holds:

    * it walks along one keyboard row for :data:`MASH_WALK` keys in one
      direction (``asdfg``, ``poiuy``), or the whole token, at least
      :data:`MASH_WHOLE_WALK` letters, is a walk of neighbouring keys
      (``asdf``, ``jkjk``; rows of QWERTY, QWERTZ, AZERTY, ЙЦУКЕН, Greek);
    * one letter repeats :data:`MASH_REPEAT` times in a row (``aaaa``);
    * it has at least :data:`MASH_TWO_LETTERS` letters from at most two
      distinct letters (``jfjfjf``, ``hahaha``);
    * it has a run of :data:`MASH_CONSONANT_RUN` consonants, or is at least
      :data:`MASH_NO_VOWEL` letters long with no vowel at all (``sdfjkl``) —
      for Latin, Greek and Cyrillic letters only, whose vowels are known
      (Arabic or Hebrew script writes few vowels and would all look mashed).

    The answer is mash when mash-like tokens hold at least
    :data:`MASH_SHARE` of its letters. A character-bigram language model
    would catch more ("dhsjakd" has vowels), but needs per-language letter
    statistics we do not ship; the rules above need none and cost one pass.
    """
    tokens = _WORD_RE.findall(text.lower())
    total = sum(map(len, tokens))
    if total < MASH_WHOLE_WALK:
        return False
    mashed = sum(map(len, filter(_token_is_mash, tokens)))  # no Python frame per token
    return mashed >= MASH_SHARE * total


# ----------------------------------------------------------------- classification


def is_emoji_char(ch: str) -> bool:
    return ch in emoji.EMOJI_DATA


class NonAnswerRules:
    """The non-answer phrases of a study and its minimum length, ready to classify answers."""

    def __init__(self, phrases: Iterable[str], min_chars: int) -> None:
        self.phrases = frozenset(k for k in (phrase_key(p) for p in phrases) if k)
        self.min_chars = min_chars

    def classify(self, text: str) -> str | None:
        """The first reason code that applies to one cleaned answer, or ``None``."""
        return self.classify_keyed(text)[0]

    def classify_keyed(self, text: str) -> tuple[str | None, str | None]:
        """:meth:`classify`, and the :func:`phrase_key` of ``text`` when the check computed it.

        The key comes back (else ``None``) when ``text`` holds no placeholder and
        reached the phrase check: the duplicate search compares the same key,
        so each text is keyed once.
        """
        if not text:
            return "empty", None
        placeholders = "⟨" in text
        content = PLACEHOLDER_RE.sub(" ", text) if placeholders else text
        if not content.strip():
            return "pii_only", None
        has_letters = any(ch.isalpha() for ch in content)
        if not has_letters:
            if any(is_emoji_char(ch) for ch in content):
                return "emoji_only", None
            return "punctuation_only", None
        key = phrase_key(content)
        shared = None if placeholders else key
        if key in self.phrases:
            return "non_answer", shared
        if is_keyboard_mash(content):
            return "keyboard_mash", shared
        if len(content) - content.count(" ") < self.min_chars:  # clean text has single spaces only
            return "too_short", shared
        return None, shared
