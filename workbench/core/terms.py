"""Terms: each answer's cleaned text -> the ordered list of terms that weighting counts.

Per language (built lazily, only for the languages the answers carry):

* **tokens** — spaCy's blank tokenizer for the language (``spacy.blank(code)``;
  no model, nothing downloaded), or the trained pipeline the study names in
  ``terms.pipelines`` when the user has installed one. Placeholders from the
  clean stage (``⟨email⟩``...) and emoji sequences are kept whole.
* **lemmas** — the profile's lemmatiser (``lemmas.py``): spaCy lookup tables
  (exact form, then lower case, then title case), simplemma, or none. ``und``
  answers get no lemmas.
* **overrides** — profile ``lemma_overrides.toml`` < study
  ``terms.lemma_overrides`` < UI decisions; a key may be a written form
  (checked first) or a lemma; chains resolve, cycles are errors.
* **term** — the (overridden) lemma lower-cased the language's way and NFC;
  accents are never stripped.
* **token rules** — punctuation and placeholders never become terms; numbers
  (tokens with a digit and no letter) are kept only with
  ``terms.keep_numbers``; emoji are terms with ``terms.keep_emoji`` (skin-tone
  modifiers and the emoji presentation selector removed, so 👍🏽 counts as 👍);
  words whose term is shorter than ``terms.min_length`` characters are dropped.
* **stop words** — ``stopwords.py``; **phrases** — ``phrases.py``.

Every rule above depends on the token alone, so each distinct token of a
language is worked out once per run and each distinct cleaned text once.
``und`` answers are tokenised with spaCy's multi-language tokenizer; their
stop list is the union of the study languages' lists. They keep their terms
in the answers table but get a vocabulary only with ``terms.include_und``.

Vocabularies count answers that enter weighting only (``enters_weighting``
true, not excluded by a decision): ``tf`` is the total number of occurrences,
``df`` the number of answers holding the term. Answers left with no term get
a ledger event (stage ``terms``, status ``flagged``, code ``no_terms``).
"""

from __future__ import annotations

import functools
import re
import time
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from workbench.core.corpus import ANSWER_ID, CLEAN_TEXT, ENTERS_WEIGHTING, LANGUAGE, ROW, SOURCE, TERMS
from workbench.core.decisions import Decisions
from workbench.core.errors import InputError
from workbench.core.lemmas import (
    IdentityLemmatiser,
    Lemmatiser,
    PipelineLemmatiser,
    load_pipeline,
    lowercase,
    make_lemmatiser,
    resolve_overrides,
)
from workbench.core.ledger import Ledger
from workbench.core.mapping import LocalMapper, Mapper, fingerprint
from workbench.core.phrases import CONTENT, MIDDLE, UNIGRAM, ExpressionMatcher, Unit, assemble
from workbench.core.pii import PLACEHOLDER_RE
from workbench.core.profiles import LanguageProfile, load_profile
from workbench.core.progress import Reporter
from workbench.core.settings import UNDETERMINED, Study, Terms
from workbench.core.stopwords import StopList, effective_stop_list

STAGE = "terms"
#: Flag bit (beside the phrase flags) marking a unit removed as a stop word.
STOP = 8

# Characters that may start an emoji or a placeholder; only texts holding one
# take the slower path that puts spaces around them before tokenising.
_SPECIAL = re.compile("[⟨\u00a9\u00ae\u203c-\u3299\ufe0f\U0001f000-\U0001faff]")
_EDGE_HYPHENS = "-‐‑"
_SKIN_AND_VARIATION = re.compile("[\U0001f3fb-\U0001f3ff\ufe0f]")


# --------------------------------------------------------------------------- result


@dataclass
class TermsResult:
    """What the terms stage hands on.

    Attributes
    ----------
    answers
        The input table plus the ``terms`` column (a list of str per answer, in text order).
    vocabularies
        Per language: ``term``, ``tf`` (total count), ``df`` (answers holding it),
        ``words`` (1 for a single term, 2–3 for n-grams and expressions by word count),
        sorted by ``tf`` descending then ``term``. Only answers that enter weighting count.
    stop_hits
        Per language: the stop words removed, ``term``, ``tf``, ``df``, same counting.
    overrides_applied
        ``"lang:key->target"`` -> number of tokens the override changed (all answers).
    stop_words
        The effective stop list per language (normalised terms), for the UI.
    backends
        Per language, the tokenizer and lemmatiser used (for the manifest).
    notes
        One-line remarks for the user (empty stop lists, conflicting stop words...).
    seconds
        Per language, time spent building its pipeline (tables opened or built).
    """

    answers: pd.DataFrame
    vocabularies: dict[str, pd.DataFrame]
    stop_hits: dict[str, pd.DataFrame]
    overrides_applied: dict[str, int]
    stop_words: dict[str, frozenset[str]]
    backends: dict[str, str] = field(default_factory=dict)
    notes: list[str] = field(default_factory=list)
    seconds: dict[str, float] = field(default_factory=dict)


def emoji_name(term: str) -> str | None:
    """The English Unicode name of an emoji term ("👍" -> "thumbs up"), or ``None`` for other terms."""
    import emoji

    data = emoji.EMOJI_DATA.get(term) or emoji.EMOJI_DATA.get(term + "\ufe0f")
    if data is None:
        return None
    return data["en"].strip(":").replace("_", " ")


# --------------------------------------------------------------------------- tokenizers


def _word_like(form: str) -> bool:
    return any(ch.isalpha() for ch in form)


def _is_number(form: str) -> bool:
    return any(ch.isdigit() for ch in form)


def _is_emoji(form: str) -> bool:
    import emoji

    return emoji.purely_emoji(form) and not form.isspace()


def _emoji_or_placeholder_match(previous: Any) -> Any:
    """A tokenizer ``token_match`` that keeps placeholders and emoji sequences whole."""

    def match(text: str) -> Any:
        found = PLACEHOLDER_RE.fullmatch(text)
        if found is None and _SPECIAL.match(text) and _is_emoji(text):
            found = re.fullmatch(".+", text, re.S)
        if found is None and previous is not None:
            found = previous(text)
        return found

    return match


@functools.lru_cache(maxsize=32)
def blank_tokenizer(spacy_code: str) -> Any:
    """spaCy's rule-based tokenizer of a language (``xx`` for the multi-language one), set up once per process."""
    import spacy

    try:
        nlp = spacy.blank(spacy_code)
    except (ImportError, KeyError, ValueError) as exc:
        from workbench.core.errors import SettingsError

        raise SettingsError(
            f"spaCy has no tokenizer for language '{spacy_code}' ({exc}); fix spacy_code in its profile.toml"
        ) from None
    tokenizer = nlp.tokenizer
    tokenizer.token_match = _emoji_or_placeholder_match(tokenizer.token_match)
    return tokenizer


def _space_out(text: str) -> str:
    """Put spaces around placeholders and emoji so the tokenizer sees them as chunks of their own."""
    import emoji

    if "⟨" in text:
        text = PLACEHOLDER_RE.sub(lambda m: f" {m.group(0)} ", text)
    return emoji.replace_emoji(text, lambda chars, _data: f" {chars} ")


# --------------------------------------------------------------------------- one language


class LanguageTermer:
    """Turns texts of one language into term lists; caches every distinct token it meets.

    Build it with :func:`make_termer`; the UI may call :meth:`terms` on a
    single text to preview what the stage does.
    """

    def __init__(
        self,
        language: str,
        profile: LanguageProfile | None,
        settings: Terms,
        decisions: Decisions,
        *,
        lemmatiser: Lemmatiser,
        tokenizer: Any = None,
        pipeline: Any = None,
        stop_base: frozenset[str] | None = None,
    ) -> None:
        self.language = language
        self.profile = profile
        self.settings = settings
        self.lemmatiser = lemmatiser
        self.tokenizer = tokenizer
        self.pipeline = pipeline
        where = f"lang_profiles/{language}/lemma_overrides.toml"
        layers = [(where, dict(profile.lemma_overrides))] if profile is not None else []
        layers.append((f"study terms.lemma_overrides.{language}", dict(settings.lemma_overrides.get(language, {}))))
        layers.append((f"decisions (lemma, {language})", dict(decisions.lemma.get(language, {}))))
        self.overrides = resolve_overrides(layers, language)
        self._info: dict[str, Unit | None] = {}
        self._rule: dict[str, str] = {}
        self._chunk_units: dict[str, tuple[Unit, ...]] = {}
        self._chunk_rules: dict[str, tuple[str, ...]] = {}
        self.stop_list: StopList = effective_stop_list(
            language, profile, settings, decisions, self.normalise, base=stop_base
        )
        self.stop_terms = self.stop_list.terms
        connectors = sorted(profile.connectors) if profile is not None else []
        self.connectors = frozenset(lowercase(c, language) for c in connectors) | frozenset(self.normalise(connectors))
        self.expressions = ExpressionMatcher()
        for text in settings.expressions.get(language, []):
            forms = [f for f in self._forms(text) if not f.isspace()]
            self.expressions.add(
                [lowercase(f, language) for f in forms],
                self.normalise(forms),
                " ".join(lowercase(text, language).split()),
            )

    # -- normalisation shared by tokens and word lists

    def _term(self, form: str, lemma: str) -> tuple[str, str | None]:
        """(term, override rule applied or None) for one word token."""
        language = self.language
        if self.overrides:
            key = lowercase(form, language)
            target = self.overrides.get(key)
            if target is None:
                key = lowercase(lemma, language)
                target = self.overrides.get(key)
            if target is not None:
                return target, f"{language}:{key}->{target}"
        return lowercase(lemma, language), None

    def normalise(self, words: Sequence[str]) -> list[str]:
        """The term each word would get as a token (used for stop words, connectors, expressions)."""
        words = list(words)
        lemmas = self.lemmatiser.lemmas(words)
        return [self._term(w, lem)[0] for w, lem in zip(words, lemmas, strict=True)]

    # -- tokens

    def _forms(self, text: str) -> list[str]:
        if _SPECIAL.search(text):
            text = _space_out(text)
        if self.pipeline is not None:
            return [t.text for t in self.pipeline.make_doc(text)]
        return [t.text for t in self.tokenizer(text)]

    def _keys_of(self, texts: Sequence[str]) -> list[list[str]]:
        """Token keys per text: the written form, or ``form\\x00lemma`` with a trained pipeline."""
        if self.pipeline is None:
            tokenizer = self.tokenizer
            out = []
            for text in texts:
                if _SPECIAL.search(text):
                    text = _space_out(text)
                out.append([t.text for t in tokenizer(text)])
            return out
        prepared = (_space_out(t) if _SPECIAL.search(t) else t for t in texts)
        return [
            [t.text if t.lemma_ in ("", t.text) else f"{t.text}\x00{t.lemma_}" for t in doc]
            for doc in self.pipeline.pipe(prepared, batch_size=256)
        ]

    def _learn(self, keys: set[str]) -> None:
        """Work out the unit of every new token key."""
        settings, language = self.settings, self.language
        words: list[tuple[str, str, str | None]] = []
        for key in keys:
            form, _, given = key.partition("\x00")
            if form.isspace() or not form:
                self._info[key] = None
            elif PLACEHOLDER_RE.fullmatch(form):
                self._info[key] = (form, "", 0)
            elif _word_like(form):
                # Hyphens left at a token's edge by the tokenizer (French "-moi",
                # German "Sitz-" in "Sitz- und Stehplätze") are not part of the word.
                words.append((key, form.strip(_EDGE_HYPHENS) or form, given or None))
            elif _is_emoji(form):
                term = _SKIN_AND_VARIATION.sub("", form) or form
                flags = UNIGRAM if settings.keep_emoji and term not in self.stop_terms else 0
                self._info[key] = (form, term, flags)
            elif _is_number(form):
                self._info[key] = (form, form, CONTENT if settings.keep_numbers else 0)
            else:
                self._info[key] = (form, "", 0)
        if not words:
            return
        need = [form for _k, form, given in words if given is None]
        looked_up = dict(zip(need, self.lemmatiser.lemmas(need), strict=True)) if need else {}
        stop, connectors, min_length = self.stop_terms, self.connectors, settings.min_length
        for key, form, given in words:
            term, rule = self._term(form, given or looked_up[form])
            if rule:
                self._rule[key] = rule
            lower = lowercase(form, language)
            connector = term in connectors or lower in connectors
            if term in stop:
                flags = STOP | (MIDDLE if connector else 0)
            elif connector:
                flags = MIDDLE | (UNIGRAM if len(term) >= min_length else 0)
            elif len(term) < min_length:
                flags = 0
            else:
                flags = CONTENT
            self._info[key] = (lower, term, flags)

    def _prepare_chunks(self, chunks: set[str]) -> None:
        """Tokenise new whitespace-delimited chunks and store their units.

        spaCy's rule-based tokenizer never joins or splits across white space
        (that is why it caches per chunk itself), so tokenising each distinct
        chunk once gives exactly the tokens of tokenising whole texts, without
        building a ``Doc`` per answer.
        """
        tokenizer = self.tokenizer
        token_lists = {chunk: [t.text for t in tokenizer(chunk)] for chunk in chunks}
        info = self._info
        new = {form for forms in token_lists.values() for form in forms if form not in info}
        if new:
            self._learn(new)
        rules, chunk_units, chunk_rules = self._rule, self._chunk_units, self._chunk_rules
        for chunk, forms in token_lists.items():
            chunk_units[chunk] = tuple(u for u in map(info.__getitem__, forms) if u is not None)
            if rules:
                found = tuple(r for f in forms if (r := rules.get(f)))
                if found:
                    chunk_rules[chunk] = found

    def _units_many(self, texts: Sequence[str]) -> tuple[list[list[Unit]], list[list[str]]]:
        """Units of each text, and the lemma overrides each applied."""
        if self.pipeline is not None:
            key_lists = self._keys_of(texts)
            info = self._info
            new = {k for keys in key_lists for k in keys if k not in info}
            if new:
                self._learn(new)
            rules = self._rule
            units = [[u for u in map(info.__getitem__, keys) if u is not None] for keys in key_lists]
            applied = [[r for k in keys if (r := rules.get(k))] if rules else [] for keys in key_lists]
            return units, applied
        chunked = [(_space_out(t) if _SPECIAL.search(t) else t).split() for t in texts]
        chunk_units = self._chunk_units
        new_chunks = {c for chunks in chunked for c in chunks if c not in chunk_units}
        if new_chunks:
            self._prepare_chunks(new_chunks)
        units = [[u for c in chunks for u in chunk_units[c]] for chunks in chunked]
        if self._chunk_rules:
            chunk_rules = self._chunk_rules
            applied = [[r for c in chunks for r in chunk_rules.get(c, ())] for chunks in chunked]
        else:
            applied = [[] for _ in chunked]
        return units, applied

    def terms_many(self, texts: Sequence[str]) -> tuple[list[list[str]], list[list[str]], list[list[str]]]:
        """Per text: its terms, the stop words removed from it, and the lemma overrides applied to it."""
        unit_lists, applied = self._units_many(texts)
        max_n, expressions = self.settings.ngrams, self.expressions
        all_terms, all_stops = [], []
        for units in unit_lists:
            if expressions:
                units, _found = expressions.apply(units)
            all_terms.append(assemble(units, max_n))
            all_stops.append([u[1] for u in units if u[2] & STOP])
        return all_terms, all_stops, applied

    def terms(self, text: str) -> list[str]:
        """Terms of one text (previews; the stage itself batches)."""
        return self.terms_many([text])[0][0]


def make_termer(
    language: str,
    profile: LanguageProfile | None,
    study: Study,
    decisions: Decisions,
    und_stop_words: frozenset[str] | None = None,
) -> LanguageTermer:
    """Build the termer of one language (``und``: no profile, multi-language tokenizer, no lemmas)."""
    settings = study.terms
    if language == UNDETERMINED or profile is None:
        return LanguageTermer(
            UNDETERMINED,
            None,
            settings,
            decisions,
            lemmatiser=IdentityLemmatiser(),
            tokenizer=blank_tokenizer("xx"),
            stop_base=und_stop_words or frozenset(),
        )
    pipeline_name = settings.pipelines.get(language)
    if pipeline_name:
        nlp = load_pipeline(pipeline_name, profile.spacy_code, study.base_dir)
        nlp.tokenizer.token_match = _emoji_or_placeholder_match(nlp.tokenizer.token_match)
        return LanguageTermer(
            language, profile, settings, decisions, lemmatiser=PipelineLemmatiser(nlp, pipeline_name), pipeline=nlp
        )
    return LanguageTermer(
        language,
        profile,
        settings,
        decisions,
        lemmatiser=make_lemmatiser(profile),
        tokenizer=blank_tokenizer(profile.spacy_code),
    )


# --------------------------------------------------------------------------- per-text work


@dataclass(frozen=True)
class TermsRecipe:
    """Everything turning one (language, text) into terms depends on (picklable; see ``mapping.py``).

    ``present`` are the languages the answers carry, sorted; ``profiles``
    holds the profile of each real language among them and, when only
    ``und`` is present, of each expected language (whose stop lists ``und``
    answers share).
    """

    study: Study
    profiles: tuple[tuple[str, LanguageProfile], ...]
    decisions: Decisions
    present: tuple[str, ...]
    key: str = ""

    def build(self) -> TermsKit:
        return TermsKit(self)


def terms_recipe(study: Study, profiles: dict[str, LanguageProfile], decisions: Decisions, present: Sequence[str]) -> TermsRecipe:
    """The recipe for the languages ``present`` in the answers (profiles not given are loaded)."""
    present = tuple(sorted(set(present)))
    real = [lang for lang in present if lang != UNDETERMINED]
    needed = real if real or UNDETERMINED not in present else list(study.languages.expected)
    chosen = tuple((code, profiles.get(code) or load_profile(code)) for code in needed)
    folded = (decisions.stop_add, decisions.stop_remove, decisions.lemma)
    key = fingerprint("terms", study.terms.model_dump(mode="json"), str(study.base_dir), chosen, folded, present)
    return TermsRecipe(study, chosen, decisions, present, key)


class TermsKit:
    """The termers of one recipe, each built on first use (once per process)."""

    def __init__(self, recipe: TermsRecipe) -> None:
        self.recipe = recipe
        self.profiles = dict(recipe.profiles)
        self.termers: dict[str, LanguageTermer] = {}
        self.seconds: dict[str, float] = {}

    def termer(self, language: str) -> LanguageTermer:
        if language in self.termers:
            return self.termers[language]
        recipe = self.recipe
        if language == UNDETERMINED:
            real = [lang for lang in recipe.present if lang != UNDETERMINED]
            if real:
                union = frozenset().union(*(self.termer(lang).stop_terms for lang in real))
            else:
                # Only und answers: the expected languages' stop lists, without keeping their termers.
                union = frozenset().union(*(
                    make_termer(code, profile, recipe.study, recipe.decisions).stop_terms
                    for code, profile in recipe.profiles
                ))
            begin = time.perf_counter()
            termer = make_termer(UNDETERMINED, None, recipe.study, recipe.decisions, und_stop_words=union)
        else:
            begin = time.perf_counter()
            termer = make_termer(language, self.profiles.get(language) or load_profile(language), recipe.study,
                                 recipe.decisions)
        self.seconds[language] = time.perf_counter() - begin
        self.termers[language] = termer
        return termer


#: Per (language, text): its terms, the stop words removed from it, the lemma overrides applied to it.
TermedText = tuple[list[str], list[str], list[str]]


def term_texts(items: list[tuple[str, str]], kit: TermsKit) -> list[TermedText]:
    """Terms of each ``(language, text)``: the per-text part of the stage (pure, no ledger).

    Runs of one language go to its termer together (callers group items by language).
    """
    out: list[TermedText] = []
    start = 0
    while start < len(items):
        language = items[start][0]
        stop = start
        while stop < len(items) and items[stop][0] == language:
            stop += 1
        terms, stops, rules = kit.termer(language).terms_many([text for _lang, text in items[start:stop]])
        out.extend(zip(terms, stops, rules, strict=True))
        start = stop
    return out


@dataclass(frozen=True)
class TermsSummary:
    """Per present language, in build order: what the result reports about its termer."""

    stop_words: dict[str, frozenset[str]]
    backends: dict[str, str]
    conflicts: dict[str, list[str]]
    seconds: dict[str, float]


def terms_summary(kit: TermsKit) -> TermsSummary:
    """Build every present language's termer (real languages first, then ``und``) and describe them."""
    for language in [lang for lang in kit.recipe.present if lang != UNDETERMINED]:
        kit.termer(language)
    if UNDETERMINED in kit.recipe.present:
        kit.termer(UNDETERMINED)
    order = [lang for lang in kit.recipe.present if lang != UNDETERMINED]
    order += [UNDETERMINED] if UNDETERMINED in kit.recipe.present else []
    termers = {lang: kit.termers[lang] for lang in order}
    return TermsSummary(
        stop_words={lang: t.stop_terms for lang, t in termers.items()},
        backends={lang: t.lemmatiser.name for lang, t in termers.items()},
        conflicts={lang: list(t.stop_list.conflicts) for lang, t in termers.items()},
        seconds={lang: kit.seconds.get(lang, 0.0) for lang in order},
    )


# --------------------------------------------------------------------------- the stage


def _require(answers: pd.DataFrame) -> None:
    missing = [c for c in (ANSWER_ID, CLEAN_TEXT, LANGUAGE, ENTERS_WEIGHTING) if c not in answers.columns]
    if missing:
        raise InputError(
            f"the answers table has no column {', '.join(repr(m) for m in missing)}; "
            "run the clean and identify stages before terms"
        )


def _count_table(counter_tf: Counter[str], counter_df: Counter[str]) -> pd.DataFrame:
    frame = pd.DataFrame(
        {
            "term": list(counter_tf.keys()),
            "tf": np.fromiter(counter_tf.values(), dtype=np.int64, count=len(counter_tf)),
        }
    )
    frame["df"] = np.fromiter((counter_df[t] for t in frame["term"]), dtype=np.int64, count=len(frame))
    frame["words"] = np.fromiter((t.count(" ") + 1 for t in frame["term"]), dtype=np.int64, count=len(frame))
    return frame.sort_values(["tf", "term"], ascending=[False, True], kind="stable").reset_index(drop=True)


def extract_terms(
    answers: pd.DataFrame,
    study: Study,
    profiles: dict[str, LanguageProfile],
    decisions: Decisions,
    ledger: Ledger,
    reporter: Reporter,
    *,
    mapper: Mapper | None = None,
) -> TermsResult:
    """Turn every answer's ``clean_text`` into its ordered list of terms.

    Each distinct (language, text) is worked out once by :func:`term_texts`,
    run by ``mapper`` (in this process by default; see ``mapping.py``); the
    vocabularies are then counted over the whole table.

    Parameters
    ----------
    answers
        The identified answers: ``answer_id``, ``clean_text``, ``language``,
        ``enters_weighting`` (``source`` and ``row`` for ledger events).
    study
        ``terms`` settings: ``min_length``, ``keep_numbers``, ``keep_emoji``,
        ``ngrams``, ``expressions``, ``stop_words_add``/``remove``,
        ``lemma_overrides``, ``pipelines``, ``include_und``.
    profiles
        Language profiles by code; a language missing here is loaded from
        ``lang_profiles/`` (an unknown code is a settings error listing the
        supported ones).
    decisions
        ``stop_add``, ``stop_remove``, ``lemma`` and ``exclude`` decisions.
    mapper
        Where the per-text work runs.

    Returns
    -------
    TermsResult
        For answer i with term list T_i that enters weighting, each vocabulary
        counts tf(t) = Σ_i #{k : T_i[k] = t} and df(t) = #{i : t ∈ T_i}.
    """
    _require(answers)
    reporter.update(STAGE, 0, 0, "preparing languages")
    # A shallow copy: pandas copies on write, so adding the terms column leaves the caller's table alone.
    answers = answers.copy(deep=False)
    # One key per (language, text): identical cleaned answers are processed once. The two columns are
    # factorised separately (on their Arrow arrays: no Python string per answer) and their codes
    # combined; factorising the pair codes keeps the order of first appearance.
    language_codes, language_uniques = pd.factorize(answers[LANGUAGE].fillna(UNDETERMINED).astype(str))
    text_codes, text_uniques = pd.factorize(answers[CLEAN_TEXT].fillna("").astype(str))
    pair_codes = language_codes.astype(np.int64) * max(len(text_uniques), 1) + text_codes
    del language_codes, text_codes
    codes, pairs = pd.factorize(pair_codes)
    del pair_codes
    unique_langs = np.asarray(language_uniques, dtype=object)[pairs // max(len(text_uniques), 1)]
    unique_texts = np.asarray(text_uniques, dtype=object)[pairs % max(len(text_uniques), 1)].tolist()
    del text_uniques, pairs
    uniques = unique_texts  # one entry per distinct (language, text)

    excluded = {k for k, v in decisions.exclude.items() if v}
    enters = answers[ENTERS_WEIGHTING].eq(True).to_numpy().copy()
    if excluded:
        enters &= ~answers[ANSWER_ID].isin(excluded).to_numpy()
    weight_of_unique = np.bincount(codes[enters], minlength=len(uniques))
    all_of_unique = np.bincount(codes, minlength=len(uniques))

    present = sorted(set(unique_langs.tolist()))
    mapper = mapper or LocalMapper()
    recipe = terms_recipe(study, profiles, decisions, present)
    # Items grouped by language (stable), so each termer gets long runs.
    order = np.argsort(unique_langs.astype(str), kind="stable") if len(uniques) else np.empty(0, dtype=np.int64)
    total = len(uniques)
    mapped = mapper.map(
        term_texts, [(unique_langs[i], unique_texts[i]) for i in order.tolist()], recipe, stage=STAGE,
        what=f"{total:,} distinct texts", reporter=reporter,
    )
    unique_terms: list[list[str] | None] = [None] * len(uniques)
    unique_stops: list[list[str] | None] = [None] * len(uniques)
    overrides_applied: Counter[str] = Counter()
    for i, (t, s, r) in zip(order.tolist(), mapped, strict=True):
        unique_terms[i] = t
        unique_stops[i] = s
        for rule in r:
            # every answer with this text, entering weighting or not
            overrides_applied[rule] += int(all_of_unique[i])
    del mapped
    # After the map: its termers are built by then (in this process, or on a
    # worker), so the summary costs no second build on the critical path.
    summary = mapper.call(terms_summary, recipe)
    for lang, backend in summary.backends.items():
        reporter.update(STAGE, total, total, f"{lang}: {backend}")

    # Answers with the same (language, text) share one list object: readers never change a term
    # list, and a million answers with half their texts repeated save a list each.
    shared = np.empty(len(unique_terms), dtype=object)
    for i, t in enumerate(unique_terms):
        shared[i] = t
    answers[TERMS] = shared[codes] if len(codes) else np.empty(0, dtype=object)
    del shared

    vocabularies: dict[str, pd.DataFrame] = {}
    stop_hits: dict[str, pd.DataFrame] = {}
    for lang in present:
        if lang == UNDETERMINED and not study.terms.include_und:
            continue
        tf: Counter[str] = Counter()
        df: Counter[str] = Counter()
        stf: Counter[str] = Counter()
        sdf: Counter[str] = Counter()
        for i in np.flatnonzero((unique_langs == lang) & (weight_of_unique > 0)):
            m = int(weight_of_unique[i])
            for counter_tf, counter_df, items in ((tf, df, unique_terms[i]), (stf, sdf, unique_stops[i])):
                if not items:
                    continue
                for term in items:
                    counter_tf[term] += m
                for term in set(items):
                    counter_df[term] += m
        vocabularies[lang] = _count_table(tf, df)
        stop_hits[lang] = _count_table(stf, sdf)

    _ledger_empty(answers, ledger)

    notes: list[str] = []
    for lang, stop_terms in summary.stop_words.items():
        conflicts = summary.conflicts[lang]
        if not stop_terms and lang != UNDETERMINED:
            notes.append(f"the stop list of '{lang}' is empty: every word counts as a term")
        if conflicts:
            shown = ", ".join(conflicts[:5])
            notes.append(
                f"{lang}: {len(conflicts)} stop words are kept as terms because a removal "
                f"takes out their normalised form ({shown})"
            )
    reporter.update(STAGE, total, total, "terms done")
    return TermsResult(
        answers=answers,
        vocabularies=vocabularies,
        stop_hits=stop_hits,
        overrides_applied=dict(sorted(overrides_applied.items())),
        stop_words=dict(summary.stop_words),
        backends=dict(summary.backends),
        notes=notes,
        seconds=dict(summary.seconds),
    )


def _ledger_empty(answers: pd.DataFrame, ledger: Ledger) -> None:
    empty = answers[TERMS].map(len).eq(0).to_numpy()
    if not empty.any():
        return
    rows = answers.loc[empty]
    sources = rows[SOURCE].astype(str).to_numpy() if SOURCE in rows else ""
    numbers = pd.to_numeric(rows[ROW], errors="coerce").fillna(0).astype(np.int64).to_numpy() if ROW in rows else 0
    ledger.bulk(
        "answer",
        rows[ANSWER_ID].astype(str),  # a str column: the ledger keeps it as Arrow strings
        sources,
        numbers,
        STAGE,
        "flagged",
        "no_terms",
        "no term left after stop words and token rules; the answer stays out of the counts",
    )
