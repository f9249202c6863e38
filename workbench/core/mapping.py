"""How the stages run their per-text work: in this process, or spread over an engine's workers.

The expensive part of clean, identify and terms is pure and per distinct
text: normalise and mask a raw text, detect the language of a cleaned text,
tokenise and lemmatise a (language, text) pair. Each of those stages is
written as

1. a **work function** ``work(items, kit) -> results`` — module level,
   pure, one result per item in the same order, no ledger, no reporter;
2. a **recipe**: a small picklable object naming everything the work needs
   (settings, profiles, decisions) with a ``key`` (a fingerprint of its
   content) and a ``build()`` that turns it into the *kit* of live objects
   the work uses (detectors, spaCy tokenizers, lemma tables);
3. the **reduce**: the rest of the stage — duplicates, ledger events,
   vocabularies — run once over the whole answers table.

The stage hands (work, distinct items, recipe) to a :class:`Mapper`. The
:class:`LocalMapper` (the default) runs the work in this process in chunks,
reporting progress between chunks; the Dask engine
(``workbench.core.distributed``) runs the same work function on partitions
of the items on its workers. Both engines therefore share every line of
stage logic, and the results — aligned with the items, whatever the
partitioning — are identical.

A kit is built once per process and recipe: :func:`kit_for` keeps the most
recent kits by key, so a worker that receives twenty partitions builds its
spaCy pipelines and detectors once. Keys are content fingerprints
(:func:`fingerprint`): equal content may in rare cases give two keys (a
harmless rebuild), different content never shares one.
"""

from __future__ import annotations

import hashlib
import pickle
import threading
from collections import OrderedDict
from collections.abc import Callable, Sequence
from typing import Any, Protocol, TypeVar

from workbench.core.progress import Reporter

R = TypeVar("R")

#: ``work(items, kit) -> results``: one result per item, same order.
Work = Callable[[list[Any], Any], list[Any]]

#: Items per call of a work function in this process (progress and cancel between calls).
LOCAL_CHUNK = 5000
#: Kits kept per process (a study's clean, identify and terms kits, and one spare).
_KITS_KEPT = 4


class Recipe(Protocol):
    """A picklable description of the live objects a stage's work needs."""

    #: Fingerprint of everything that changes what ``build`` returns.
    key: str

    def build(self) -> Any:
        """The kit: detectors, tokenizers, tables... Called once per process and key."""
        ...


class Mapper(Protocol):
    """Runs work functions over items; the engine behind the per-text stages."""

    #: ``"local"`` or ``"dask"``.
    name: str

    def map(self, work: Work, items: Sequence[Any], recipe: Recipe, *, stage: str, what: str,
            reporter: Reporter) -> list[Any]:
        """``work`` over every item, results in item order; progress as ``what`` under ``stage``."""
        ...

    def call(self, func: Callable[[Any], R], recipe: Recipe) -> R:
        """``func(kit)`` once, where the work runs (summaries of a kit, e.g. its stop lists)."""
        ...


def fingerprint(*parts: Any) -> str:
    """A content key for a recipe: SHA-256 of the pickled parts (first 24 hex digits)."""
    return hashlib.sha256(pickle.dumps(parts, protocol=5)).hexdigest()[:24]


_kits: OrderedDict[str, Any] = OrderedDict()
_kits_lock = threading.Lock()


def kit_for(recipe: Recipe) -> Any:
    """The kit of ``recipe``, built on first use in this process and kept for later calls."""
    with _kits_lock:
        if recipe.key in _kits:
            _kits.move_to_end(recipe.key)
            return _kits[recipe.key]
    # Built outside the lock: a build may take seconds, and two threads
    # building the same kit at once only waste time, never give a wrong one.
    kit = recipe.build()
    with _kits_lock:
        _kits[recipe.key] = kit
        while len(_kits) > _KITS_KEPT:
            _kits.popitem(last=False)
    return kit


def run_work(work: Work, items: list[Any], recipe: Recipe) -> list[Any]:
    """What an engine's worker runs for one partition: the work with this process's kit."""
    results = work(items, kit_for(recipe))
    if len(results) != len(items):
        raise AssertionError(f"{work.__name__} returned {len(results)} results for {len(items)} items")
    return results


def call_with_kit(func: Callable[[Any], R], recipe: Recipe) -> R:
    """What an engine's worker runs for :meth:`Mapper.call`."""
    return func(kit_for(recipe))


class LocalMapper:
    """Runs work in this process, ``LOCAL_CHUNK`` items at a time.

    Kits live as long as the mapper (one run), not the process: a run of the
    terminal UI after the user edited a profile or installed a pipeline must
    not see the previous run's objects.
    """

    name = "local"

    def __init__(self, chunk: int = LOCAL_CHUNK) -> None:
        self.chunk = chunk
        self._kits: dict[str, Any] = {}

    def kit(self, recipe: Recipe) -> Any:
        if recipe.key not in self._kits:
            self._kits[recipe.key] = recipe.build()
        return self._kits[recipe.key]

    def map(self, work: Work, items: Sequence[Any], recipe: Recipe, *, stage: str, what: str,
            reporter: Reporter) -> list[Any]:
        items = list(items)
        if not items:
            return []
        kit = self.kit(recipe)
        out: list[Any] = []
        for start in range(0, len(items), self.chunk):
            out.extend(work(items[start : start + self.chunk], kit))
            reporter.update(stage, min(start + self.chunk, len(items)), len(items), what)
        return out

    def call(self, func: Callable[[Any], R], recipe: Recipe) -> R:
        return func(self.kit(recipe))
