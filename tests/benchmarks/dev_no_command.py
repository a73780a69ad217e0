#!/usr/bin/env python3
"""Two dev sets with no command: everyday words said alone by the dev voices, and impacts.

* ``everyday words``: ``n`` frequent English words (wordfreq's list, the first 5,000)
  that are none of the bakery lexicon's words, the demo's new words, the demo's distractor
  words or sound-alikes, nor a plural of one, nor a word whose dictionary pronunciation
  (``language.lexicon.suggest_pronunciations``, the CMU dictionary) is a command word's
  (a true homophone such as "for"/"four" cannot be told apart by sound), nor one of a few
  rude words, abbreviations and names (``LEFT_OUT``); drawn with a seed
  of their own, each said once by one of the dev voices (``dev_candidate`` in
  ``recordings/voices.csv``, in turn) through the demo generator (``recordings/synthesize.py``:
  the same engines, random rate and pitch, trimming, levels and room tone), in memory. Needs
  the text-to-speech engines; without them the set is empty.
* ``impacts``: ``n`` clips of 1-4 s of knocks, clinks, taps and scrapes
  (:func:`wordspot.audio.impacts.impact_noise`, another seed than training's) at -45 to -25
  dBFS over a floor of fan noise or mains hum 15-30 dB below them: the kind is the one the
  background items and calibration clips may learn from (so not unseen), the mixture and
  levels are not.

Every command word recognised in either set is a false accept.

    python tests/benchmarks/dev_no_command.py   # prints the words drawn
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))
RATE = 16000

#: Seeds of the two sets (not the demo generator's, not the training's).
WORDS_SEED = 20261203
IMPACTS_SEED = 31122026

#: Words left out of the draw: rude words, letter abbreviations, brand names, given names and surnames.
LEFT_OUT = frozenset("fuck fucking fucked shit damn hell sex sexy porn ass bitch fbi nfl nba cia usa com info www "
                     "instagram facebook google twitter youtube amazon iphone dna hamilton jackson johnson hillary johnny henry "
                     "davis lewis".split())


def everyday_words(n: int = 150, seed: int = WORDS_SEED) -> list[str]:
    """``n`` frequent English words that are no command (module docstring), in drawn order."""
    import wordfreq

    sys.path.insert(0, str(REPO / "recordings"))
    import synthesize as demo

    from wordspot.language.lexicon import read_lexicon, suggest_pronunciations

    lexicon = read_lexicon(REPO / "lexicon" / "bakery.txt")
    commands = set(lexicon.words) | set(demo.NEW_WORDS)
    banned = commands | set(demo.DISTRACTOR_WORDS) | set(demo.SOUND_ALIKES)
    banned |= {w + "s" for w in banned} | {w + "es" for w in banned}
    command_sounds = {p for w in commands for p in suggest_pronunciations([w]).get(w, [])}
    command_sounds |= {tuple(p) for w in lexicon.words for p in lexicon.pronunciations(w)}
    pool = []
    for w in wordfreq.top_n_list("en", 5000):
        if not (w.isascii() and w.isalpha() and 3 <= len(w) <= 10) or w in banned or w in LEFT_OUT:
            continue
        prons = suggest_pronunciations([w]).get(w, [])
        if not prons or any(tuple(p) in command_sounds for p in prons):
            continue
        pool.append(w)
    rng = np.random.default_rng(seed)
    return [pool[i] for i in rng.choice(len(pool), size=min(n, len(pool)), replace=False)]


def everyday_word_set(n: int = 150, seed: int = WORDS_SEED) -> list[tuple[np.ndarray, list[str]]]:
    """``n`` (waveform at 16 kHz, []) pairs of everyday words said alone, or [] without the engines."""
    from dev_phrases import demo_generator, said_by_dev_voices

    demo = demo_generator("everyday words")
    if demo is None:
        return []
    words = everyday_words(n, seed)
    return [(w, []) for w in said_by_dev_voices(demo, "dev-everyday", words, lambda i, w: f"w-{w}.flac", seed)]


def impact_set(n: int = 60, seed: int = IMPACTS_SEED) -> list[tuple[np.ndarray, list[str]]]:
    """``n`` (waveform at 16 kHz, []) clips of impacts over a floor of fan noise or hum."""
    from wordspot.audio.augment import background

    rng = np.random.default_rng(seed)
    out = []
    for i in range(n):
        length = int(rng.uniform(1.0, 4.0) * RATE)
        level = rng.uniform(-45.0, -25.0)
        x = background("impacts", length, level, rng)
        floor = background("fan" if i % 2 else "hum", length, level - rng.uniform(15.0, 30.0), rng,
                           mains=50.0 if rng.random() < 0.5 else 60.0)
        out.append((np.asarray(x + floor, dtype=np.float32), []))
    return out


if __name__ == "__main__":
    print(" ".join(everyday_words()))
