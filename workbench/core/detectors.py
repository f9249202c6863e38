"""Language detectors behind one small interface, restricted to a study's expected languages.

A detector takes a batch of texts and the expected language codes and
returns, per text, ``(code, probability)`` where the probabilities of the
expected languages sum to 1 — so ``probability`` is the detector's confidence
that the answer is in ``code`` *given* it is in one of the expected languages.
A text without usable features gets ``("und", 0.0)``. With a single expected
language every text with features gets that language with probability 1:
restriction leaves nothing to choose, and only ``identify.min_letters``
still applies.

Implementations
---------------
``py3langid`` (default)
    Naive Bayes over byte n-grams (Lui & Baldwin's langid.py model, as
    repackaged by py3langid). Restricted with ``set_languages``; the
    posterior over the expected languages is the softmax of the
    log-likelihood scores divided by ``sqrt(n_bytes)`` — py3langid 0.4's own
    calibration, which keeps long texts from being scored 1.0 regardless of
    evidence::

        p(l | x) = exp(s_l / sqrt(n)) / sum_k exp(s_k / sqrt(n))

    We score a whole batch at once: the model's byte automaton is stepped for
    all texts together (sorted by length, one vectorised step per byte
    position), and the n-gram counts form one sparse matrix multiplied by the
    model's weight table — about 13× faster than calling ``classify`` per
    text, with the same numbers (tests compare with ``rank``).
``langdetect``
    The port of Nakatani Shuyo's language-detection library. Its sampler is
    random, so the seed is fixed (0) on our own factory instance — the same
    input gives the same output on every run and machine. Instead of
    renormalising the full model's output (which drops every language below
    0.1 and stops iterating once *some* language passes 0.99999), the factory
    loads only the expected languages' profiles: the restriction then happens
    inside the model, which is the same posterior without the truncation.
    Far slower than py3langid (a few hundred texts per second).
``lingua`` (optional, if ``lingua-language-detector`` is installed)
    Evaluated in the benchmark; not selectable in a study (see identify.py
    for the measurement that chose the default).
``ensemble``
    py3langid and langdetect must agree; the confidence is the smaller of the
    two probabilities, and a disagreement gives ``("und", 0.0)`` — so the
    answer falls back (hint, default or und). Fewer wrong labels, more ``und``.

Codes
-----
Our codes are ISO 639-1 as used by ``lang_profiles/``; the one code the
libraries spell differently is Norwegian Bokmål (``nb``), which py3langid and
langdetect call ``no``.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence
from typing import Protocol

import numpy as np
import scipy.sparse as sp

UND = "und"
#: Our code -> library code, where they differ.
_LIBRARY_CODE = {"nb": "no"}


def _to_library(code: str) -> str:
    return _LIBRARY_CODE.get(code, code)


class Detector(Protocol):
    """What identify needs from a language detector."""

    name: str

    def supported(self) -> frozenset[str]:
        """Our language codes this detector can recognise."""
        ...

    def detect(self, texts: list[str], expected: list[str]) -> list[tuple[str, float]]:
        """Per text, the most probable expected language and its probability (``("und", 0.0)`` if no features)."""
        ...


# --------------------------------------------------------------------------- py3langid


@functools.lru_cache(maxsize=1)
def _langid_model():  # noqa: ANN202 - a py3langid object, untyped upstream
    from py3langid.langid import MODEL_FILE, LanguageIdentifier

    return LanguageIdentifier.from_model_file(MODEL_FILE, norm_probs=True)


class Py3LangidDetector:
    """py3langid restricted to the expected languages; batched scoring."""

    name = "py3langid"

    def supported(self) -> frozenset[str]:
        labels = set(_langid_model().labels)
        reverse = {v: k for k, v in _LIBRARY_CODE.items()}
        return frozenset(reverse.get(label, label) for label in labels)

    @functools.lru_cache(maxsize=8)  # noqa: B019 - a handful of language sets per process
    def _restricted(self, expected: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray, list[str]]:
        model = _langid_model()
        _, _, classes = model._full_model
        columns = [list(classes).index(_to_library(code)) for code in expected]
        full_ptc, full_pc, _ = model._full_model
        ptc = np.asarray(full_ptc[:, columns], dtype=np.float32)
        pc = np.asarray(full_pc[columns], dtype=np.float32)
        return ptc, pc, list(expected)

    def detect(self, texts: list[str], expected: list[str]) -> list[tuple[str, float]]:
        if not texts:
            return []
        ptc, pc, codes = self._restricted(tuple(expected))
        # As py3langid does: all-caps text scores like lower case.
        data = [(t.lower() if t.isupper() else t).encode("utf-8", "replace") for t in texts]
        rows, cols = _walk(data)
        lengths = np.fromiter((len(d) or 1 for d in data), dtype=np.float32, count=len(data))
        counts = sp.csr_matrix(
            (np.ones(len(rows), dtype=np.float32), (rows, cols)), shape=(len(texts), ptc.shape[0])
        )
        counts.sum_duplicates()
        has_features = np.diff(counts.indptr) > 0
        counts.data = np.log1p(counts.data)
        scores = np.asarray(counts @ ptc) + pc
        scores /= np.sqrt(lengths)[:, None]
        scores -= scores.max(axis=1, keepdims=True)
        np.exp(scores, out=scores)
        scores /= scores.sum(axis=1, keepdims=True)
        best = scores.argmax(axis=1)
        return [
            (codes[best[r]], float(scores[r, best[r]])) if has_features[r] else (UND, 0.0)
            for r in range(len(texts))
        ]


#: Texts longer than this many bytes are walked one by one (a long text would
#: keep a whole batch stepping for its length).
_LONG_BYTES = 2000
_BATCH_WALK = 4096


@functools.lru_cache(maxsize=1)
def _tables() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    model = _langid_model()
    # A view on the model's own table (no copy of its ~10 million entries).
    nextmove = np.frombuffer(model.tk_nextmove, dtype=np.dtype(model.tk_nextmove.typecode))
    rowbase = np.asarray(model._rowbase, dtype=np.int64)
    output = np.asarray(model.tk_output, dtype=np.int64)
    return nextmove, rowbase, output


def _walk(data: list[bytes]) -> tuple[np.ndarray, np.ndarray]:
    """Run py3langid's byte automaton over every text; (text row, feature) per feature hit.

    The automaton is walked for a whole batch at once: texts are sorted by
    length, and at each byte position one vectorised step moves every text
    still that long. Each text's path is exactly the one-by-one walk's.
    """
    nextmove, rowbase, output = _tables()
    rows: list[np.ndarray] = []
    cols: list[np.ndarray] = []
    lengths = np.fromiter((len(d) for d in data), dtype=np.int64, count=len(data))
    order = np.argsort(lengths, kind="stable")
    short = order[lengths[order] <= _LONG_BYTES]
    for first in range(0, len(short), _BATCH_WALK):
        batch = short[first : first + _BATCH_WALK]
        size = int(lengths[batch[-1]])
        if size == 0:
            continue
        matrix = np.frombuffer(b"".join(data[i].ljust(size, b"\0") for i in batch), dtype=np.uint8)
        matrix = matrix.reshape(len(batch), size).astype(np.int64)
        batch_lengths = lengths[batch]
        states = np.zeros(len(batch), dtype=np.int64)
        start = 0
        for position in range(size):
            # batch is sorted by length: texts shorter than position+1 are a prefix
            while batch_lengths[start] <= position:
                start += 1
            live = nextmove[rowbase[states[start:]] + matrix[start:, position]]
            states[start:] = live
            features = output[live]
            hit = np.flatnonzero(features >= 0)
            if len(hit):
                rows.append(batch[start + hit])
                cols.append(features[hit])
    for index in order[lengths[order] > _LONG_BYTES].tolist():
        found = _walk_one(data[index])
        rows.append(np.full(len(found), index, dtype=np.int64))
        cols.append(np.asarray(found, dtype=np.int64))
    if not rows:
        return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    return np.concatenate(rows), np.concatenate(cols)


def _walk_one(data: bytes) -> list[int]:
    """py3langid's own walk, for long texts."""
    model = _langid_model()
    step, base, out = model.tk_nextmove, model._rowbase, model.tk_output
    state = 0
    found: list[int] = []
    for byte in data:
        state = step[base[state] + byte]
        feature = out[state]
        if feature >= 0:
            found.append(feature)
    return found


# --------------------------------------------------------------------------- langdetect


@functools.lru_cache(maxsize=8)
def _langdetect_factory(library_codes: tuple[str, ...]):  # noqa: ANN202 - langdetect's own class
    from importlib import resources

    from langdetect.detector_factory import DetectorFactory

    factory = DetectorFactory()
    factory.seed = 0
    folder = resources.files("langdetect") / "profiles"
    factory.load_json_profile([(folder / code).read_text(encoding="utf-8") for code in library_codes])
    return factory


class LangdetectDetector:
    """langdetect, seeded, with only the expected languages' profiles loaded."""

    name = "langdetect"

    def supported(self) -> frozenset[str]:
        from importlib import resources

        reverse = {v: k for k, v in _LIBRARY_CODE.items()}
        folder = resources.files("langdetect") / "profiles"
        return frozenset(reverse.get(p.name, p.name) for p in folder.iterdir() if not p.name.startswith("."))

    def detect(self, texts: list[str], expected: list[str]) -> list[tuple[str, float]]:
        from langdetect.lang_detect_exception import LangDetectException

        if len(expected) == 1:
            return [(expected[0], 1.0) if any(c.isalpha() for c in t) else (UND, 0.0) for t in texts]
        library = tuple(_to_library(c) for c in expected)
        back = dict(zip(library, expected, strict=True))
        factory = _langdetect_factory(library)
        result: list[tuple[str, float]] = []
        for text in texts:
            detector = factory.create()
            detector.append(text)
            try:
                ranked = detector.get_probabilities()
            except LangDetectException:
                ranked = []
            if ranked:
                result.append((back[ranked[0].lang], float(ranked[0].prob)))
            else:
                result.append((UND, 0.0))
        return result


# --------------------------------------------------------------------------- lingua (optional)


class LinguaDetector:
    """lingua-language-detector (optional): confidence values over the expected languages."""

    name = "lingua"

    def supported(self) -> frozenset[str]:
        from lingua import Language

        return frozenset(lang.iso_code_639_1.name.lower() for lang in Language.all())

    @functools.lru_cache(maxsize=4)  # noqa: B019 - a handful of language sets per process
    def _detector(self, expected: tuple[str, ...]):  # noqa: ANN202 - lingua's own class
        from lingua import IsoCode639_1, LanguageDetectorBuilder

        codes = [getattr(IsoCode639_1, c.upper()) for c in expected]
        return LanguageDetectorBuilder.from_iso_codes_639_1(*codes).with_preloaded_language_models().build()

    def detect(self, texts: list[str], expected: list[str]) -> list[tuple[str, float]]:
        if len(expected) == 1:
            return [(expected[0], 1.0) if any(c.isalpha() for c in t) else (UND, 0.0) for t in texts]
        detector = self._detector(tuple(expected))
        result: list[tuple[str, float]] = []
        for values in detector.compute_language_confidence_values_in_parallel(texts):
            top = values[0] if values else None
            if top is None or top.value <= 0.0 or math.isnan(top.value):
                result.append((UND, 0.0))
            else:
                result.append((top.language.iso_code_639_1.name.lower(), float(top.value)))
        return result


# --------------------------------------------------------------------------- ensemble


class EnsembleDetector:
    """Accept a label only when all member detectors agree; confidence is the smallest."""

    name = "ensemble"

    def __init__(self, members: Sequence[Detector] | None = None) -> None:
        self.members = list(members) if members else [Py3LangidDetector(), LangdetectDetector()]

    def supported(self) -> frozenset[str]:
        return frozenset.intersection(*(m.supported() for m in self.members))

    def detect(self, texts: list[str], expected: list[str]) -> list[tuple[str, float]]:
        votes = [m.detect(texts, expected) for m in self.members]
        result: list[tuple[str, float]] = []
        for labels in zip(*votes, strict=True):
            codes = {code for code, _ in labels}
            if len(codes) == 1 and UND not in codes:
                result.append((labels[0][0], min(p for _, p in labels)))
            else:
                result.append((UND, 0.0))
        return result


#: The detectors a study can name (``identify.detector``); one explicit dict.
DETECTORS: dict[str, type] = {
    "py3langid": Py3LangidDetector,
    "langdetect": LangdetectDetector,
    "ensemble": EnsembleDetector,
}


def make_detector(name: str) -> Detector:
    """The detector a study names (``lingua`` too, for the benchmark, when installed)."""
    if name == "lingua":
        return LinguaDetector()
    return DETECTORS[name]()

