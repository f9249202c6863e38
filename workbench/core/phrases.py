"""Phrases: n-grams formed before stop-word removal, and fixed multi-word expressions.

The terms stage turns each token into a *unit*: its term and a set of flags
saying what the unit may do.

``UNIGRAM``  the unit is a term on its own (kept words, kept numbers, emoji);
``EDGE``     it may start or end an n-gram (kept words and numbers);
``MIDDLE``   it may stand inside an n-gram (kept words, numbers, connector words).

Stop words, punctuation, placeholders and dropped tokens carry no flag, so an
n-gram never spans them: phrases are formed on the full token sequence
*before* stop words are removed, which is what keeps "car" and "year" in
"car of the year" from becoming the bigram "car year". Connector words
(``connectors.txt``: "of", "de", "für"...) are the exception: they may stand
inside a phrase ("cup of tea") but never at its start or end. Emoji are
terms on their own and never part of a phrase. An n-gram is the terms of its
units joined by one space, so "cups of tea" gives "cup of tea".

Fixed expressions (``terms.expressions``) are matched first, on either the
lower-cased written forms or the terms of consecutive tokens, longest match
first; a match becomes one unit whose term is the expression as written
(lower-cased, NFC, single spaces). It is always a term, even when it holds
stop words ("out of stock"), and it is not extended into longer n-grams.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

UNIGRAM = 1
EDGE = 2
MIDDLE = 4
#: A kept word or number.
CONTENT = UNIGRAM | EDGE | MIDDLE

#: (lower-cased written form, term, flags) of one token.
Unit = tuple[str, str, int]


def assemble(units: Sequence[Unit], max_n: int) -> list[str]:
    """The terms of one answer, in order: at each position its unigram, then the longer n-grams starting there.

    An n-gram of length n over units u_i .. u_{i+n-1} is kept when u_i and
    u_{i+n-1} carry ``EDGE`` and every unit between them carries ``MIDDLE``.
    """
    if max_n <= 1:
        return [term for _form, term, flags in units if flags & UNIGRAM]
    out: list[str] = []
    count = len(units)
    for i, (_form, term, flags) in enumerate(units):
        if flags & UNIGRAM:
            out.append(term)
        if not flags & EDGE:
            continue
        parts = [term]
        for j in range(i + 1, min(i + max_n, count)):
            next_flags = units[j][2]
            if next_flags & EDGE:
                out.append(" ".join([*parts, units[j][1]]))
            if not next_flags & MIDDLE:
                break
            parts.append(units[j][1])
    return out


@dataclass
class ExpressionMatcher:
    """Finds the study's fixed expressions of one language in a unit sequence.

    Each expression is given as the keys of its tokens twice: lower-cased
    written forms and terms; a token matches an expression token when either
    of its own keys equals the corresponding key.
    """

    #: first key -> list of (forms, terms, output term), longest first
    _by_first: dict[str, list[tuple[tuple[str, ...], tuple[str, ...], str]]] = field(default_factory=dict)

    def add(self, forms: Sequence[str], terms: Sequence[str], output: str) -> None:
        if not forms:
            return
        entry = (tuple(forms), tuple(terms), output)
        for key in {forms[0], terms[0]}:
            bucket = self._by_first.setdefault(key, [])
            if entry not in bucket:
                bucket.append(entry)
                bucket.sort(key=lambda e: -len(e[0]))

    def __bool__(self) -> bool:
        return bool(self._by_first)

    def apply(self, units: Sequence[Unit]) -> tuple[list[Unit], list[str]]:
        """Replace every match by one unit; returns the new units and the expressions found."""
        out: list[Unit] = []
        found: list[str] = []
        i, count = 0, len(units)
        by_first = self._by_first
        while i < count:
            form, term, _flags = units[i]
            candidates = by_first.get(form) or by_first.get(term)
            matched = None
            if candidates:
                for forms, terms, output in candidates:
                    n = len(forms)
                    if i + n <= count and all(
                        units[i + k][0] == forms[k] or units[i + k][1] == terms[k] for k in range(n)
                    ):
                        matched = (n, output)
                        break
            if matched:
                n, output = matched
                out.append((output, output, UNIGRAM))
                found.append(output)
                i += n
            else:
                out.append(units[i])
                i += 1
        return out, found
