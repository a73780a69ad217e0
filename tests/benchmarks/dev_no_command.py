#!/usr/bin/env python3
"""Three dev sets with no command: everyday words said alone by the dev voices, and two kinds of impacts.

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
* ``other impacts``: ``n`` clips of 1-5 s of a second recipe made here for dev only, which
  no training item or calibration example shares (so a gain on it is not learning the
  recipe): rattles (trains of 4-30 sub-millisecond clicks at 2-6 kHz, 8-60 ms apart, as
  cutlery in a drawer), lids (a struck pan lid: 3-6 partials at 150-1200 Hz ringing
  0.2-0.8 s with a 3-9 Hz wobble), thuds (low-passed noise below 120-600 Hz dying in
  15-80 ms), bounces (3-7 knocks of one dropped object, each gap 0.6-0.8 of the one
  before, quieter each time) and chopping (4-12 bursts of 1-4 kHz noise dying in 4-15 ms
  at a steady 2-5 a second); 1-4 groups a clip at -35 to -15 dBFS over white, pink or
  brown room tone 10-40 dB below (louder, and on other floors, than ``impacts``).

Every command word recognised in either set is a false accept.

    python tests/benchmarks/dev_no_command.py   # prints the words drawn
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
from scipy import signal

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[1]
sys.path.insert(0, str(HERE))
RATE = 16000

#: Seeds of the two sets (not the demo generator's, not the training's).
WORDS_SEED = 20261203
IMPACTS_SEED = 31122026
OTHER_IMPACTS_SEED = 5122026

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


def _rattle(rng, rate):
    n_clicks = int(rng.integers(4, 31))
    gaps = rng.uniform(0.008, 0.060, n_clicks)
    out = np.zeros(int((gaps.sum() + 0.01) * rate) + 1)
    centre = rng.uniform(2000.0, 6000.0)
    sos = signal.butter(2, [centre / 1.5, min(centre * 1.5, 0.45 * rate)], btype="band", fs=rate, output="sos")
    at = 0.0
    for g in gaps:
        k = int(rng.uniform(0.0003, 0.001) * rate) + 2
        i = int(at * rate)
        out[i:i + k] += rng.uniform(0.2, 1.0) * rng.standard_normal(k)[:len(out) - i]
        at += g
    return signal.sosfilt(sos, out)


def _lid(rng, rate):
    tau = rng.uniform(0.2, 0.8)
    n = int(3 * tau * rate)
    t = np.arange(n) / rate
    x = np.zeros(n)
    base = rng.uniform(150.0, 400.0)
    for k in range(int(rng.integers(3, 7))):
        f = min(base * (k + 1) * rng.uniform(0.97, 1.08), 1200.0 + 200.0 * k)
        x += rng.uniform(0.3, 1.0) / (1 + 0.5 * k) * np.sin(2 * np.pi * f * t + rng.uniform(0, 2 * np.pi))
    wobble = 1.0 + 0.6 * np.sin(2 * np.pi * rng.uniform(3.0, 9.0) * t)
    x *= np.exp(-t / tau) * wobble
    strike = int(0.004 * rate)
    x[:strike] += 0.8 * rng.standard_normal(strike)
    return x


def _thud(rng, rate):
    tau = rng.uniform(0.015, 0.080)
    n = int(5 * tau * rate) + 1
    sos = signal.butter(4, rng.uniform(120.0, 600.0), btype="low", fs=rate, output="sos")
    return signal.sosfilt(sos, rng.standard_normal(n) * np.exp(-np.arange(n) / (tau * rate)))


def _bounce(rng, rate):
    hits = int(rng.integers(3, 8))
    gap, shrink = rng.uniform(0.15, 0.35), rng.uniform(0.6, 0.8)
    parts, gain = [], 1.0
    f = rng.uniform(200.0, 900.0)
    for _ in range(hits):
        tau = rng.uniform(0.01, 0.03)
        m = int(gap * rate)
        t = np.arange(m) / rate
        knock = np.sin(2 * np.pi * f * t) * np.exp(-t / tau)
        knock[:int(0.002 * rate)] += 0.5 * rng.standard_normal(int(0.002 * rate))
        parts.append(gain * knock)
        gap *= shrink
        gain *= rng.uniform(0.5, 0.8)
    return np.concatenate(parts)


def _chop(rng, rate):
    beats = int(rng.integers(4, 13))
    step = 1.0 / rng.uniform(2.0, 5.0)
    out = np.zeros(int((beats * step + 0.05) * rate))
    centre = rng.uniform(1000.0, 4000.0)
    sos = signal.butter(2, [centre / 1.4, centre * 1.4], btype="band", fs=rate, output="sos")
    for b in range(beats):
        tau = rng.uniform(0.004, 0.015)
        m = int(5 * tau * rate)
        burst = signal.sosfilt(sos, rng.standard_normal(m)) * np.exp(-np.arange(m) / (tau * rate))
        i = int((b + rng.uniform(-0.08, 0.08)) * step * rate)  # steady beat, a little jitter
        i = max(0, min(i, len(out) - m))
        out[i:i + m] += rng.uniform(0.6, 1.0) * burst
    return out


#: The second recipe's kinds (dev only; not :mod:`wordspot.audio.impacts`).
OTHER_KINDS = {"rattle": _rattle, "lid": _lid, "thud": _thud, "bounce": _bounce, "chop": _chop}


def _floor(kind, n, rng):
    x = rng.standard_normal(n)
    if kind == "pink":
        from wordspot.audio.augment import pink_noise

        x = pink_noise(n, rng, sample_rate=RATE)
    elif kind == "brown":
        x = np.cumsum(x)
        x = signal.sosfilt(signal.butter(1, 20.0, btype="high", fs=RATE, output="sos"), x)
    return x / (np.sqrt(np.mean(x**2)) + 1e-12)


def other_impact_set(n: int = 60, seed: int = OTHER_IMPACTS_SEED) -> list[tuple[np.ndarray, list[str]]]:
    """``n`` (waveform at 16 kHz, []) clips of the second, dev-only recipe (module docstring)."""
    rng = np.random.default_rng(seed)
    names = sorted(OTHER_KINDS)
    out = []
    for i in range(n):
        length = int(rng.uniform(1.0, 5.0) * RATE)
        x = np.zeros(length)
        for _ in range(int(rng.integers(1, 5))):
            ev = OTHER_KINDS[names[int(rng.integers(len(names)))]](rng, RATE)
            ev = ev / (np.max(np.abs(ev)) + 1e-12) * 10.0 ** (-rng.uniform(0.0, 10.0) / 20.0)
            at = int(rng.integers(max(1, length - min(len(ev), length // 2))))
            m = min(len(ev), length - at)
            x[at:at + m] += ev[:m]
        level = rng.uniform(-35.0, -15.0)
        x *= 10.0 ** (level / 20.0) / (np.sqrt(np.mean(x**2)) + 1e-12)
        floor = _floor(("white", "pink", "brown")[i % 3], length, rng) * 10.0 ** ((level - rng.uniform(10.0, 40.0)) / 20.0)
        y = x + floor
        peak = np.max(np.abs(y))
        if peak > 0.99:  # keep the peaks inside full scale (impulsive clips have a high crest factor)
            y *= 0.99 / peak
        out.append((np.asarray(y, dtype=np.float32), []))
    return out


if __name__ == "__main__":
    print(" ".join(everyday_words()))
