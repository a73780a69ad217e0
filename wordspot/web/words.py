"""The words the recording page asks for, and the lexicon file that spells them.

The page lists every word of the lexicon file. A word typed on the page that the lexicon
lacks gets the open CMU pronouncing dictionary's pronunciation as a suggestion
(:func:`wordspot.language.lexicon.suggest_pronunciations`, the same as ``wordspot lexicon
suggest``); once the person confirms it (or types phones), one line is added to the
lexicon file, which is rewritten atomically. A word longer than :data:`MAX_WORD_LENGTH`
characters is refused here, since every take of it is saved under a file name made of it.
"""

from __future__ import annotations

import threading
from pathlib import Path

from wordspot.errors import LexiconError
from wordspot.language.lexicon import (
    ARPABET_PHONES,
    Lexicon,
    check_word,
    format_entry,
    read_lexicon,
    suggest_pronunciations,
)
from wordspot.util.atomic import write_bytes_atomically

__all__ = ["MAX_WORD_LENGTH", "WordList"]

#: Longest word the page adds (the takes of a word are files named after it).
MAX_WORD_LENGTH = 40
_JSON_KINDS = {type(None): "null", bool: "true or false", int: "a number", float: "a number",
               list: "a list", dict: "an object"}


def _text(value, what: str) -> str:
    """``value`` if it is a string; otherwise a LexiconError naming what arrived instead."""
    if not isinstance(value, str):
        got = _JSON_KINDS.get(type(value), type(value).__name__)
        raise LexiconError(f"{what} must be text, got {got}")
    return value


def _checked_word(value) -> str:
    word = check_word(_text(value, "the word").strip())
    if len(word) > MAX_WORD_LENGTH:
        raise LexiconError(f"the word {word[:MAX_WORD_LENGTH]}... is {len(word)} characters long; "
                           f"at most {MAX_WORD_LENGTH} characters are accepted (type one command word)")
    return word


class WordList:
    """The lexicon file behind the page; created on the first added word if missing.

    Parameters
    ----------
    path : str or path
        The lexicon file (``--lexicon``, or the takes folder's ``pronunciations.txt``,
        see :func:`wordspot.web.takes.folder_pronunciations`).
    """

    def __init__(self, path):
        self.path = Path(path)
        self._lock = threading.Lock()
        self.lexicon = read_lexicon(self.path) if self.path.exists() else Lexicon(source=str(self.path))

    @property
    def words(self) -> tuple[str, ...]:
        return self.lexicon.words

    def pronunciations(self, word: str) -> list[str]:
        """The word's pronunciations as space-separated phones (empty if unknown)."""
        word = word.lower()
        return [" ".join(p) for p in self.lexicon.pronunciations(word)] if word in self.lexicon else []

    def suggest(self, word: str) -> dict:
        """What the page shows for a typed word: known already, or suggested phones."""
        word = _checked_word(word)
        known = self.pronunciations(word)
        if known:
            return {"word": word, "known": True, "pronunciations": known}
        found = suggest_pronunciations([word])[word]
        return {"word": word, "known": False, "pronunciations": [" ".join(p) for p in found]}

    def add(self, word: str, phones: str) -> dict:
        """Add ``word phones`` to the lexicon file (ARPAbet phones only) and return the entry.

        Raises
        ------
        LexiconError
            A word that is not text, too long or holds a bad character; phones that are not
            text, or a phone that is not an ARPAbet phone (the message names it and lists
            the known ones).
        """
        word = _checked_word(word)
        units = _text(phones, "the phones").upper().split()
        entry = Lexicon([(word, units)], inventory=ARPABET_PHONES, source="the typed pronunciation")
        line = format_entry(word, units)
        with self._lock:
            new = entry.pronunciations(word)[0]
            if word not in self.lexicon or new not in self.lexicon.pronunciations(word):
                old = self.path.read_bytes() if self.path.exists() else b""
                if old and not old.endswith(b"\n"):
                    old += b"\n"
                text = old + (line + "\n").encode("utf-8")
                try:
                    write_bytes_atomically(self.path, text)
                except OSError as exc:
                    raise LexiconError(f"{self.path}: cannot add {word} ({exc.strerror or exc}); "
                                       "check that the folder is writable") from None
                self.lexicon = read_lexicon(self.path)
        return {"word": word, "known": True, "pronunciations": self.pronunciations(word)}
