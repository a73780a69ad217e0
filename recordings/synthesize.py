#!/usr/bin/env python3
"""Build the wordspot demo corpus (synthetic speech for the bakery scenario).

Every audio file and manifest under ``recordings/`` comes out of this script, byte for
byte the same on every run with the same seed. It drives three Debian text-to-speech
engines (espeak-ng, flite, festival with three voice packages) and sox, and does all the
signal work (trimming, levels, room tone, resampling, noise mixing) itself with numpy,
scipy and soxr so that nothing random escapes the seed.

Usage::

    python recordings/synthesize.py                 # rebuild everything in recordings/
    python recordings/synthesize.py --check         # verify files against the index (no engines)
    python recordings/synthesize.py --out DIR --only 'audio/train/flite-slt/seven-*'

Safety: the script keeps an index of the files it made, with their SHA-256 checksums
(``made-files.sha256``). It refuses to overwrite any file that is not in that index, or
whose content no longer matches it (someone edited it), and it says so.

Determinism: every random choice comes from a generator seeded with (seed, CRC-32 of the
output path), so one file's draws do not depend on which other files are built or in
which order; sox runs with ``-R`` (repeatable) and writes floating point, so it adds no
dither.
"""

from __future__ import annotations

import argparse
import csv
import fnmatch
import hashlib
import io
import os
import shutil
import subprocess
import sys
import tempfile
import time
import zlib
from collections import Counter
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import soundfile as sf
import soxr
from joblib import Parallel, delayed
from scipy.signal import butter, lfilter

SEED = 3141
SAMPLE_RATE = 16000
INDEX_NAME = "made-files.sha256"

#: Words spoken in training and test (the bakery command set).
VOCABULARY = (
    "zero one two three four five six seven eight nine "
    "timer minutes seconds next back repeat pause resume cancel "
    "oven mixer start stop yes no"
).split()

#: Words in the lexicon that no training transcript contains; every one of their phones
#: occurs in a training word (checked in ``check_new_word_phones``).
NEW_WORDS = ("dough", "bread", "proof", "faster", "slower")

SNRS_DB = (20, 10, 5)
NOISE_TYPES = ("babble", "fan")

# Per-take variation (drawn per file from the seeded generator).
RATE_RANGE = (0.85, 1.15)        # speaking-rate factor, > 1 is faster
SEMITONE_RANGE = (-2.5, 2.5)     # pitch shift
PAD_RANGE_S = (0.2, 0.6)         # room tone before and after the speech
SPEECH_RMS_DBFS = (-27.0, -21.0)  # speech level over the spoken span
ROOM_TONE_DBFS = (-74.0, -66.0)  # quiet, low-passed noise: never digital silence
PEAK_LIMIT = 10 ** (-3 / 20)     # clean speech peaks stay below -3 dBFS

# Sentences for the babble noise: none of them contains a command word (checked).
BABBLE_TEXT = (
    "the market was busy early this morning and the weather stayed mild",
    "she carried a basket of apples along the river path to the farm",
    "we talked about the garden and the new fence by the old barn",
    "my cousin moved to a small town near the coast last summer",
    "the library closes early on holidays so bring the books today",
    "he painted the kitchen walls a pale green colour over the weekend",
    "the train was late because of leaves on the line near the bridge",
    "our neighbours are planting roses and tulips along their fence",
)

# Distractors and long-recording talk: bakery and kitchen words and sentences of our own that
# are no command. The generator refuses any text holding a command word, a new word, one of
# their plurals or a listed sound-alike of one (``check_not_commands``).
DISTRACTOR_WORDS = (
    "flour butter sugar honey yeast apron basket ladle whisk spoon kettle napkin counter shelf "
    "tray crust pastry muffin biscuit cookie cherry lemon almond walnut raisin cinnamon vanilla "
    "ginger cream cheese pumpkin apple croissant bagel pretzel scone waffle pancake cupboard "
    "fridge freezer saucepan spatula sieve jug custard icing sprinkles bucket towel broom "
    "customer delivery morning "
    # near a command in sound on purpose (mixer, stop, six, next, repeat, timer)
    "mister stock sticks nest reheat timber"
).split()

DISTRACTOR_SENTENCES = (
    "the rolls need a little more salt today",
    "could you pass me the big wooden spoon",
    "the flour delivery came early this morning",
    "my hands are covered in sticky butter",
    "these croissants look lovely and golden",
    "we are almost out of brown sugar",
    "please wipe the counter when you have a moment",
    "the customers liked the lemon tarts yesterday",
    "put the cooling rack by the window",
    "i think the cherry jam needs more sugar",
    "the apron hook by the door is broken",
    "have you seen the big blue bowl",
    "the cinnamon buns sell out every saturday",
    "let me wash my hands first",
    "the pastry should rest in the cold room",
    "this batch of scones came out well",
    "the walnut loaf smells wonderful",
    "can somebody sweep the floor near the sink",
    "the crust on this tart is a bit pale",
    "we should order more vanilla and almonds",
    "the kettle is boiling in the staff room",
    "keep the broken biscuits aside",
    "the honey cake needs a thin layer of icing",
    "my sister is coming in at noon today",
    "the pumpkin muffins were a hit last week",
    "grab a clean towel from the shelf",
    "the ginger snaps are in the round tin",
    "the sieve is hanging above the sink",
    "we sold every bagel before lunch",
    "the window display needs fresh flowers",
)

LONG_TALK = (
    "good morning everyone the shop opens in half an hour",
    "the rye loaves need a little longer in the tins",
    "somebody left the flour sack open again",
    "the baguettes are cooling on the rack by the door",
    "we have a big order of rolls from the cafe",
    "i will glaze the fruit buns after this tray",
    "the butter is still very hard",
    "please keep the side door shut",
    "the apricot pastries sold well on saturday",
    "did anybody taste the new rhubarb filling",
    "the poppy seed rolls look a bit flat today",
    "let us make extra cheese scones this afternoon",
    "the floor near the sink is slippery",
    "i like the smell of toasted hazelnuts",
    "the delivery van is parked across the street",
    "we need more paper bags at the till",
    "the chocolate brownies are cut and wrapped",
    "the lady from the flower shop wants a birthday cake",
    "my arms are tired from kneading all morning",
    "the sesame bagels go in the basket on the left",
    "wipe the scales when you finish weighing",
    "the plum tart could use a pinch of sugar",
    "the light in the cold room flickers",
    "they painted the cafe across the road",
    "the raisin buns are a customer favourite",
    "please bring the spare apron from the cupboard",
    "the crumb cake needs a little more butter",
    "we ran out of oat milk at lunchtime",
    "the almond croissants are still warm",
    "the window glass is steamed up again",
)

#: Words that sound like a command or new word (same pronunciation in the CMU dictionary),
#: refused in distractor and talk text along with the words themselves and their plurals.
SOUND_ALIKES = ("to", "too", "for", "fore", "won", "ate", "know", "paws", "doe", "bred", "oh")

#: Kitchen noise recipes (``make_noise``): the two of test-noisy and three more.
KITCHEN_NOISES = ("mixer", "fan", "clatter", "water", "babble")
DISTRACTOR_NOISE_CLIPS = 12          # per recipe
DISTRACTOR_NOISE_SECONDS = (1.0, 4.0)
DISTRACTOR_NOISE_DBFS = (-45.0, -30.0)  # RMS of a noise-only clip
NOISE_PEAK_LIMIT = 10 ** (-12 / 20)  # noise peaks, so speech (< -3 dBFS) plus noise never clips

# Long recordings: talk, kitchen noise, quiet and embedded commands, 1-2 minutes each.
LONG_RECORDINGS = 6
LONG_COMMANDS = (10, 15)        # embedded commands per recording (inclusive)
LONG_TALK_SENTENCES = (9, 13)   # inclusive
LONG_COMMAND_GAP_S = (0.5, 3.0)  # pause between a command and the speech next to it
LONG_TALK_GAP_S = (0.3, 1.2)     # pause between two talk sentences
LONG_QUIET_S = (2.0, 6.0)        # a stretch of room tone only (between talk sentences)
LONG_NOISE_ALONE_S = (1.5, 4.0)  # a stretch of noise without speech (between talk sentences)
LONG_NOISE_ALONE_DBFS = (-46.0, -30.0)
LONG_BED_DBFS = (-52.0, -36.0)   # noise under speech
LONG_ENDS_S = (0.5, 2.0)         # room tone at the start and the end
LONG_SECONDS = (60.0, 120.0)     # the generator refuses a recording outside this length

ESPEAK_BASE_RATE = 175   # words a minute (engine default)
ESPEAK_BASE_PITCH = 50   # 0..99 (engine default)
ESPEAK_PITCH_PER_SEMITONE = 8.0
FESTIVAL_DIPHONE_STRETCH = 1.1  # the diphone voices' own Duration_Stretch


@dataclass(frozen=True)
class Voice:
    """One distinct voice setting: the manifests' ``speaker``."""

    voice_id: str
    engine: str            # "espeak", "flite" or "festival"
    engine_voice: str      # the name the engine knows it by
    source_talker: str     # the human (or synthetic) talker the voice is built from
    split: str             # "train" or "test"
    takes: int             # takes per word in its word set
    f0_base: float = 0.0   # flite: measured default mean F0 when the engine honours it
    native_pitch: bool = True  # False: pitch (and for HTS also rate) applied with sox
    native_rate: bool = True
    dev_candidate: bool = False
    extra: dict = field(default_factory=dict, compare=False, hash=False)


# espeak-ng ignores a variant after the name "en-gb" (same output as plain en-gb, exit 0);
# the same British voice takes variants when called "en". Checked by check_espeak_voices_differ.
ESPEAK_ENGINE_NAME = {"en-gb": "en"}


def _espeak(accent: str, variant: str, split: str, takes: int, dev: bool = False) -> Voice:
    vid = f"espeak-{accent}-{variant}"
    return Voice(vid, "espeak", f"{ESPEAK_ENGINE_NAME.get(accent, accent)}+{variant}", vid, split, takes,
                 dev_candidate=dev, extra={"accent": accent, "variant": variant})


# Split by source talker: rms and ked only in test; kal, awb, slt only in train. The espeak
# voices are split so that no accent and no variant is in both train and test.
VOICES = (
    # train: voices built from recordings of real talkers carry the most weight
    Voice("flite-kal16", "flite", "kal16", "kal", "train", 5, f0_base=100.0),
    Voice("flite-awb", "flite", "awb", "awb", "train", 5, f0_base=133.0, dev_candidate=True),
    Voice("flite-slt", "flite", "slt", "slt", "train", 5, f0_base=173.0),
    Voice("festival-kal", "festival", "kal_diphone", "kal", "train", 5),
    Voice("festival-slt", "festival", "cmu_us_slt_arctic_hts", "slt", "train", 5,
          native_pitch=False, native_rate=False),
    _espeak("en-us", "m1", "train", 3),
    _espeak("en-us", "f1", "train", 3),
    _espeak("en-gb", "m3", "train", 3, dev=True),
    _espeak("en-gb", "f3", "train", 3),
    _espeak("en-gb-x-rp", "m5", "train", 3),
    _espeak("en-gb-x-rp", "klatt", "train", 3),
    _espeak("en-gb-x-gbclan", "f5", "train", 3, dev=True),
    _espeak("en-us-nyc", "m7", "train", 3),
    # test: unseen talkers, at least one voice from each engine
    Voice("flite-rms", "flite", "rms", "rms", "test", 2, native_pitch=False),
    Voice("festival-ked", "festival", "ked_diphone", "ked", "test", 2),
    _espeak("en-gb-scotland", "f2", "test", 2),
    _espeak("en-029", "m4", "test", 2),
    _espeak("en-gb-x-gbcwmd", "f4", "test", 2),
)

# Debian packages that provide each engine or voice; named when one is missing.
REQUIRED_PROGRAMS = {"espeak-ng": "espeak-ng", "flite": "flite", "festival": "festival", "sox": "sox"}
FESTIVAL_VOICE_DIRS = {
    "kal_diphone": ("/usr/share/festival/voices/english/kal_diphone", "festvox-kallpc16k"),
    "ked_diphone": ("/usr/share/festival/voices/english/ked_diphone", "festvox-kdlpc16k"),
    "cmu_us_slt_arctic_hts": ("/usr/share/festival/voices/us/cmu_us_slt_arctic_hts",
                              "festvox-us-slt-hts"),
}


class CorpusError(RuntimeError):
    """Anything that stops the corpus build, with a message saying what to do."""


# --------------------------------------------------------------------------- planning

@dataclass(frozen=True)
class Take:
    """One clean recording to synthesise."""

    set_name: str
    voice: Voice
    text: str
    take: int
    rel_path: str


@dataclass(frozen=True)
class NoisyTake:
    """One test utterance mixed with noise at a given SNR."""

    clean: Take
    snr_db: int
    noise: str
    rel_path: str


def rng_for(seed: int, key: str) -> np.random.Generator:
    """A generator that depends only on the seed and the key (an output path)."""
    return np.random.default_rng([seed, zlib.crc32(key.encode("utf-8"))])


def slug(text: str) -> str:
    return text.replace(" ", "-")


def phrase_list(seed: int, n_phrases: int = 125) -> list[str]:
    """Multi-word bakery commands (2-4 words), distinct, in a seeded order."""
    rng = rng_for(seed, "phrases")
    fixed = [
        "oven start", "oven stop", "mixer start", "mixer stop", "start mixer", "stop mixer",
        "start oven", "stop oven", "start timer", "stop timer", "pause timer", "resume timer",
        "cancel timer", "pause mixer", "resume mixer", "yes cancel", "no cancel", "yes stop",
        "no stop", "yes start", "no repeat", "repeat next", "back back", "next next",
        "cancel oven timer", "yes stop mixer", "no resume", "oven timer stop", "mixer timer start", "repeat back",
        "pause oven", "resume oven", "cancel mixer", "yes next", "no back",
    ]
    digits = VOCABULARY[:10]
    pool: list[str] = list(dict.fromkeys(fixed))
    templates = (
        "timer {a} minutes", "timer {a} seconds", "timer {a} {b} minutes",
        "timer {a} {b} seconds", "{a} minutes", "{a} seconds", "oven {a} minutes",
        "mixer {a} minutes", "mixer {a} seconds", "oven timer {a} minutes",
        "{a} {b} seconds", "{a} {b} minutes",
    )
    while len(pool) < n_phrases:
        template = templates[int(rng.integers(len(templates)))]
        phrase = template.format(a=digits[int(rng.integers(1, 10))], b=digits[int(rng.integers(10))])
        if phrase not in pool:
            pool.append(phrase)
    order = rng.permutation(len(pool))
    phrases = [pool[i] for i in order]
    for p in phrases:
        n = len(p.split())
        assert 2 <= n <= 4 and all(w in VOCABULARY for w in p.split()), p
    return phrases


def plan(seed: int) -> tuple[dict[str, list[Take]], list[NoisyTake]]:
    """Every output file of the corpus, in manifest order."""
    sets: dict[str, list[Take]] = {"train": [], "test": [], "new-words": [], "test-phrases": []}
    for voice in VOICES:
        words_set = "train" if voice.split == "train" else "test"
        for word in VOCABULARY:
            for t in range(1, voice.takes + 1):
                rel = f"audio/{words_set}/{voice.voice_id}/{word}-t{t}.flac"
                sets[words_set].append(Take(words_set, voice, word, t, rel))
    test_voices = [v for v in VOICES if v.split == "test"]
    for voice in test_voices:
        for word in NEW_WORDS:
            for t in (1, 2):
                rel = f"audio/new-words/{voice.voice_id}/{word}-t{t}.flac"
                sets["new-words"].append(Take("new-words", voice, word, t, rel))
    for i, phrase in enumerate(phrase_list(seed)):
        voice = test_voices[i % len(test_voices)]
        rel = f"audio/test-phrases/{voice.voice_id}/p{i + 1:03d}-{slug(phrase)}.flac"
        sets["test-phrases"].append(Take("test-phrases", voice, phrase, 1, rel))
    # To fit the size budget, the first take of every test voice and word is mixed at every
    # SNR (so the SNRs compare the same utterances), with one noise type per utterance:
    # for each voice a seeded half of the words gets babble, the other half fan noise.
    noisy: list[NoisyTake] = []
    for voice in test_voices:
        order = rng_for(seed, f"noise-type/{voice.voice_id}").permutation(len(VOCABULARY))
        babble_words = {VOCABULARY[i] for i in order[: len(VOCABULARY) // 2]}
        for take in sets["test"]:
            if take.voice != voice or take.take != 1:
                continue
            noise = "babble" if take.text in babble_words else "fan"
            for snr in SNRS_DB:
                rel = (f"audio/test-noisy/{voice.voice_id}/"
                       f"{slug(take.text)}-t{take.take}-{noise}-snr{snr:02d}.flac")
                noisy.append(NoisyTake(take, snr, noise, rel))
    return sets, noisy


def check_not_commands(texts, what: str) -> None:
    """Refuse text that holds a command word, a new word, a plural of one or a sound-alike."""
    banned = set(VOCABULARY) | set(NEW_WORDS) | set(SOUND_ALIKES)
    banned |= {w + "s" for w in VOCABULARY + list(NEW_WORDS)}
    for text in texts:
        _check_text(text)
        clash = sorted(set(text.split()) & banned)
        if clash:
            raise CorpusError(f"{what} {text!r} holds command or new words {clash}; reword it")


@dataclass(frozen=True)
class NoiseClip:
    """One noise-only distractor file: kitchen noise over room tone, no speech."""

    kind: str
    rel_path: str
    seconds: float
    dbfs: float


def plan_distractors(seed: int) -> tuple[list[Take], list[NoiseClip]]:
    """The distractor set: words and sentences by the test voices, then noise-only clips.

    Each word and each sentence is spoken by two test voices (rotating pairs), so every
    voice says as many as the others; noise clips take their length and level from the seed.
    """
    check_not_commands(DISTRACTOR_WORDS, "distractor word")
    check_not_commands(DISTRACTOR_SENTENCES, "distractor sentence")
    voices = [v for v in VOICES if v.split == "test"]
    takes = []
    for i, word in enumerate(DISTRACTOR_WORDS):
        for voice in (voices[i % 5], voices[(i + 2) % 5]):
            rel = f"audio/distractors/{voice.voice_id}/w-{word}.flac"
            takes.append(Take("distractors", voice, word, 1, rel))
    for i, sentence in enumerate(DISTRACTOR_SENTENCES):
        for voice in (voices[i % 5], voices[(i + 1) % 5]):
            rel = f"audio/distractors/{voice.voice_id}/s{i + 1:02d}-{slug(' '.join(sentence.split()[:4]))}.flac"
            takes.append(Take("distractors", voice, sentence, 1, rel))
    clips = []
    for kind in KITCHEN_NOISES:
        for j in range(1, DISTRACTOR_NOISE_CLIPS + 1):
            rel = f"audio/distractors/noise/{kind}-{j:02d}.flac"
            rng = rng_for(seed, "clip/" + rel)
            clips.append(NoiseClip(kind, rel, float(rng.uniform(*DISTRACTOR_NOISE_SECONDS)),
                                   float(rng.uniform(*DISTRACTOR_NOISE_DBFS))))
    return takes, clips


@dataclass(frozen=True)
class LongEvent:
    """One stretch of a long recording, in time order.

    ``kind`` is "talk" or "command" (``take`` is the speech), "quiet" (room tone only) or
    "noise" (kitchen noise ``noise`` alone, at ``dbfs``); ``gap_s`` is the pause before it.
    """

    kind: str
    gap_s: float
    take: Take | None = None
    seconds: float = 0.0
    noise: str = ""
    dbfs: float = 0.0


@dataclass(frozen=True)
class NoiseBed:
    """Kitchen noise running under the speech events ``first`` to ``last`` (inclusive)."""

    noise: str
    first: int
    last: int
    before_s: float
    after_s: float
    dbfs: float


@dataclass(frozen=True)
class LongPlan:
    """One long recording: its events, the noise under them and the room tone."""

    rel_path: str
    voice: Voice
    events: tuple[LongEvent, ...]
    beds: tuple[NoiseBed, ...]
    lead_s: float
    tail_s: float
    tone_dbfs: float
    tone_pole: float

    @property
    def takes(self) -> list[Take]:
        return [e.take for e in self.events if e.take is not None]


def plan_long(seed: int) -> list[LongPlan]:
    """The long recordings: talk sentences with commands, quiet and noise between and under.

    Commands sit in the pauses between talk sentences (one to several in a row, each with a
    pause of ``LONG_COMMAND_GAP_S`` on both sides); quiet and noise-alone stretches sit only
    between two talk sentences, so every command keeps its short pauses.
    """
    check_not_commands(LONG_TALK, "talk sentence")
    if set(LONG_TALK) & set(DISTRACTOR_SENTENCES):
        raise CorpusError("long-recording talk must differ from the distractor sentences")
    voices = [v for v in VOICES if v.split == "test"]
    phrases = phrase_list(seed)
    # Command counts spread over the whole range: the range's values in a seeded order.
    span = LONG_COMMANDS[1] - LONG_COMMANDS[0] + 1
    counts = [LONG_COMMANDS[0] + int(i) % span for i in rng_for(seed, "long-commands").permutation(LONG_RECORDINGS)]
    plans = []
    for k in range(LONG_RECORDINGS):
        voice = voices[k % len(voices)]
        rel = f"audio/long/{voice.voice_id}/long-{k + 1:02d}.flac"
        rng = rng_for(seed, "plan/" + rel)
        n_cmd = counts[k]
        n_talk = int(rng.integers(LONG_TALK_SENTENCES[0], LONG_TALK_SENTENCES[1] + 1))
        talk = [LONG_TALK[i] for i in rng.choice(len(LONG_TALK), size=n_talk, replace=False)]
        commands = [VOCABULARY[int(rng.integers(len(VOCABULARY)))] if rng.random() < 0.4
                    else phrases[int(rng.integers(len(phrases)))] for _ in range(n_cmd)]
        # Slots 0..n_talk lie before, between and after the talk sentences; a few get a quiet
        # or noise stretch, the others share the commands.
        n_stretch = int(rng.integers(2, 5))
        stretch_slots = sorted(int(i) for i in rng.choice(np.arange(1, n_talk), size=n_stretch, replace=False))
        free = [i for i in range(n_talk + 1) if i not in stretch_slots]
        per_slot = Counter(int(free[int(rng.integers(len(free)))]) for _ in range(n_cmd))
        kinds: list[tuple] = []
        c = 0
        for slot in range(n_talk + 1):
            if slot in stretch_slots:
                if rng.random() < 0.5:
                    kinds.append(("quiet", float(rng.uniform(*LONG_QUIET_S))))
                else:
                    kinds.append(("noise", float(rng.uniform(*LONG_NOISE_ALONE_S)),
                                  KITCHEN_NOISES[int(rng.integers(len(KITCHEN_NOISES)))],
                                  float(rng.uniform(*LONG_NOISE_ALONE_DBFS))))
            for _ in range(per_slot[slot]):
                kinds.append(("command", commands[c]))
                c += 1
            if slot < n_talk:
                kinds.append(("talk", talk[slot]))
        events = []
        previous = None
        for i, spec in enumerate(kinds):
            if spec[0] in ("quiet", "noise"):
                gap = float(rng.uniform(*LONG_TALK_GAP_S))
                seconds = spec[1]
                events.append(LongEvent(spec[0], gap, seconds=seconds, noise=spec[2] if spec[0] == "noise" else "",
                                        dbfs=spec[3] if spec[0] == "noise" else 0.0))
                previous = spec[0]
                continue
            if previous is None:
                gap = 0.0  # the room tone lead comes first
            elif "command" in (spec[0], previous):
                gap = float(rng.uniform(*LONG_COMMAND_GAP_S))
            else:
                gap = float(rng.uniform(*LONG_TALK_GAP_S))
            part = f"{rel}#{i:02d}-{slug(spec[1])}"
            events.append(LongEvent(spec[0], gap, take=Take("long", voice, spec[1], 1, part)))
            previous = spec[0]
        speech = [i for i, e in enumerate(events) if e.take is not None]
        beds = []
        for _ in range(int(rng.integers(2, 4))):
            first = int(rng.integers(len(speech)))
            last = min(len(speech) - 1, first + int(rng.integers(0, 4)))
            beds.append(NoiseBed(KITCHEN_NOISES[int(rng.integers(len(KITCHEN_NOISES)))],
                                 speech[first], speech[last], float(rng.uniform(0.3, 2.0)),
                                 float(rng.uniform(0.3, 2.0)), float(rng.uniform(*LONG_BED_DBFS))))
        lead = float(rng.uniform(*LONG_ENDS_S))  # within LONG_COMMAND_GAP_S too, for a command first or last
        tail = float(rng.uniform(*LONG_ENDS_S))
        plans.append(LongPlan(rel, voice, tuple(events), tuple(beds), lead, tail,
                              float(rng.uniform(*ROOM_TONE_DBFS)), float(rng.uniform(0.95, 0.985))))
    return plans


# --------------------------------------------------------------------------- engines

def check_engines() -> None:
    """Stop with the Debian package to install when an engine or voice is missing."""
    missing = []
    for prog, pkg in REQUIRED_PROGRAMS.items():
        if shutil.which(prog) is None:
            missing.append(f"program '{prog}' (Debian package {pkg})")
    for name, (path, pkg) in FESTIVAL_VOICE_DIRS.items():
        if not Path(path).is_dir():
            missing.append(f"festival voice '{name}' (Debian package {pkg})")
    if missing:
        pkgs = sorted({m.split("package ")[1].rstrip(")") for m in missing})
        raise CorpusError("missing: " + "; ".join(missing)
                          + f". Install with: apt-get install {' '.join(pkgs)}")


def _run(cmd: list[str], what: str) -> None:
    proc = subprocess.run(cmd, capture_output=True, text=True)
    if proc.returncode != 0:
        raise CorpusError(f"{what} failed (exit {proc.returncode}): {' '.join(cmd)}\n{proc.stderr}")


def _check_text(text: str) -> None:
    if not text or not all(c.isalpha() and c.islower() or c == " " for c in text):
        raise CorpusError(f"text to speak must be lowercase words, got {text!r}")


@dataclass(frozen=True)
class Draw:
    """The random settings of one take."""

    rate: float
    semitones: float
    lead_s: float
    tail_s: float
    speech_dbfs: float
    tone_dbfs: float
    tone_pole: float


def draw_for(seed: int, rel_path: str) -> Draw:
    rng = rng_for(seed, rel_path)
    return Draw(
        rate=float(rng.uniform(*RATE_RANGE)),
        semitones=float(rng.uniform(*SEMITONE_RANGE)),
        lead_s=float(rng.uniform(*PAD_RANGE_S)),
        tail_s=float(rng.uniform(*PAD_RANGE_S)),
        speech_dbfs=float(rng.uniform(*SPEECH_RMS_DBFS)),
        tone_dbfs=float(rng.uniform(*ROOM_TONE_DBFS)),
        tone_pole=float(rng.uniform(0.95, 0.985)),
    )


def espeak_command(voice: Voice, text: str, draw: Draw | None, out: Path) -> list[str]:
    rate = ESPEAK_BASE_RATE if draw is None else round(ESPEAK_BASE_RATE * draw.rate)
    pitch = ESPEAK_BASE_PITCH if draw is None else int(np.clip(
        round(ESPEAK_BASE_PITCH + ESPEAK_PITCH_PER_SEMITONE * draw.semitones), 0, 99))
    return ["espeak-ng", "-v", voice.engine_voice, "-s", str(rate), "-p", str(pitch),
            "-w", str(out), text]


def flite_command(voice: Voice, text: str, draw: Draw | None, out: Path) -> list[str]:
    cmd = ["flite", "-voice", voice.engine_voice]
    if draw is not None:
        cmd += ["--setf", f"duration_stretch={1.0 / draw.rate:.4f}"]
        if voice.native_pitch:
            cmd += ["--setf", f"int_f0_target_mean={voice.f0_base * 2 ** (draw.semitones / 12):.2f}"]
    return cmd + ["-t", text, "-o", str(out)]


def festival_script(voice: Voice, items: list[tuple[str, Draw | None, Path]]) -> str:
    """One festival session that speaks many items with one voice."""
    lines = [f"(voice_{voice.engine_voice})"]
    for text, draw, out in items:
        if voice.native_rate and draw is not None:
            lines.append(f"(Parameter.set 'Duration_Stretch {FESTIVAL_DIPHONE_STRETCH / draw.rate:.4f})")
        if voice.native_pitch and draw is not None:
            mean = 105.0 * 2 ** (draw.semitones / 12)
            std = 15 if voice.engine_voice == "ked_diphone" else 14
            lines.append(f"(set! int_lr_params '((target_f0_mean {mean:.2f}) (target_f0_std {std}) "
                         f"(model_f0_mean 170) (model_f0_std 34)))")
        lines.append(f'(utt.save.wave (utt.synth (Utterance Text "{text}")) "{out}" \'riff)')
    return "\n".join(lines) + "\n"


def synthesize_raw(requests: list[tuple[Voice, str, Draw | None, Path]], jobs: int) -> None:
    """Run the engines; each request writes one raw engine file.

    espeak-ng and flite run one process per item; festival runs one session per voice and
    chunk, so its start-up cost is paid a few times rather than per word.
    """
    singles = [r for r in requests if r[0].engine in ("espeak", "flite")]
    festival: dict[Voice, list] = {}
    for voice, text, draw, out in requests:
        if voice.engine == "festival":
            festival.setdefault(voice, []).append((text, draw, out))
    tasks = []
    for voice, items in festival.items():
        n_chunks = max(1, min(jobs, len(items) // 40 + 1))
        for c in range(n_chunks):
            chunk = items[c::n_chunks]
            script = chunk[0][2].with_suffix(".scm")
            script.write_text(festival_script(voice, chunk))
            tasks.append((["festival", "-b", str(script)], f"festival {voice.engine_voice}"))
    for voice, text, draw, out in singles:
        maker = espeak_command if voice.engine == "espeak" else flite_command
        tasks.append((maker(voice, text, draw, out), f"{voice.engine} {voice.engine_voice}"))
    # Long festival sessions first so the two workers finish together.
    with ThreadPoolExecutor(max_workers=jobs) as pool:
        for fut in [pool.submit(_run, cmd, what) for cmd, what in tasks]:
            fut.result()
    for voice, text, draw, out in requests:
        if not out.is_file() or out.stat().st_size < 100:
            raise CorpusError(f"{voice.engine} voice {voice.engine_voice} made no audio for {text!r}")


# --------------------------------------------------------------------------- signal work

def to_int16(x: np.ndarray) -> np.ndarray:
    return np.clip(np.round(x * 32768.0), -32768, 32767).astype(np.int16)


def flac_bytes(samples: np.ndarray) -> bytes:
    buf = io.BytesIO()
    sf.write(buf, samples, SAMPLE_RATE, format="FLAC", subtype="PCM_16")
    return buf.getvalue()


def read_engine_audio(path: Path, sox_effects: list[str]) -> np.ndarray:
    """Engine output as float64 mono at SAMPLE_RATE, with optional sox effects first."""
    if sox_effects:
        shifted = path.with_name(path.stem + "-sox.wav")
        _run(["sox", "-R", str(path), "-e", "floating-point", "-b", "32", str(shifted)]
             + sox_effects, "sox")
        path = shifted
    x, sr = sf.read(str(path), dtype="float64", always_2d=True)
    x = x.mean(axis=1)
    if sr != SAMPLE_RATE:
        x = soxr.resample(x, sr, SAMPLE_RATE, quality="HQ")
    return x


def trim_silence(x: np.ndarray, floor_db: float = -45.0, margin_s: float = 0.02) -> np.ndarray:
    """Cut the engine's own leading and trailing (near-)silence."""
    hop = SAMPLE_RATE // 100
    n = len(x) // hop
    if n == 0:
        raise CorpusError("engine produced less than 10 ms of audio")
    energy = (x[: n * hop].reshape(n, hop) ** 2).mean(axis=1)
    loud = np.flatnonzero(energy > energy.max() * 10 ** (floor_db / 10))
    margin = int(margin_s * SAMPLE_RATE)
    start = max(0, loud[0] * hop - margin)
    end = min(len(x), (loud[-1] + 1) * hop + margin)
    return x[start:end]


def room_tone(rng: np.random.Generator, n: int, dbfs: float, pole: float) -> np.ndarray:
    """Quiet low-passed noise, like an empty room, at ``dbfs`` RMS."""
    w = rng.standard_normal(n + 2000)
    y = lfilter([1.0 - pole], [1.0, -pole], w)[2000:]
    return y * (10 ** (dbfs / 20) / np.sqrt(np.mean(y ** 2)))


def levelled_speech(take: Take, raw: Path, seed: int) -> np.ndarray:
    """Engine output -> trimmed speech at the take's drawn level (peaks below -3 dBFS)."""
    d = draw_for(seed, take.rel_path)
    v = take.voice
    effects: list[str] = []
    if not v.native_rate:
        effects += ["tempo", "-s", f"{d.rate:.4f}"]
    if not v.native_pitch:
        effects += ["pitch", f"{100 * d.semitones:.1f}"]
    speech = trim_silence(read_engine_audio(raw, effects))
    speech *= 10 ** (d.speech_dbfs / 20) / np.sqrt(np.mean(speech ** 2))
    peak = np.max(np.abs(speech))
    if peak > PEAK_LIMIT:
        speech *= PEAK_LIMIT / peak
    return speech


def finish_take(take: Take, raw: Path, seed: int) -> tuple[bytes, np.ndarray, float, float]:
    """Engine output -> trimmed, levelled speech inside room tone -> FLAC bytes."""
    d = draw_for(seed, take.rel_path)
    speech = levelled_speech(take, raw, seed)
    lead = int(round(d.lead_s * SAMPLE_RATE))
    tail = int(round(d.tail_s * SAMPLE_RATE))
    total = lead + len(speech) + tail
    signal = room_tone(rng_for(seed, "tone/" + take.rel_path), total, d.tone_dbfs, d.tone_pole)
    signal[lead: lead + len(speech)] += speech
    q = to_int16(signal)
    return flac_bytes(q), q, lead / SAMPLE_RATE, (lead + len(speech)) / SAMPLE_RATE


def babble_streams(seed: int, workdir: Path, jobs: int) -> list[np.ndarray]:
    """Long streams of running speech from training voices (never from test voices)."""
    talkers = [v for v in VOICES if v.split == "train" and v.engine in ("espeak", "flite")]
    for text in BABBLE_TEXT:
        clash = set(text.split()) & set(VOCABULARY)
        if clash:
            raise CorpusError(f"babble sentence uses command words {sorted(clash)}: {text!r}")
    requests = []
    for i, voice in enumerate(talkers):
        for j, text in enumerate(BABBLE_TEXT):
            requests.append((voice, text, None, workdir / f"babble-{i:02d}-{j:02d}.wav"))
    synthesize_raw(requests, jobs)
    streams = []
    for i, voice in enumerate(talkers):
        rng = rng_for(seed, f"babble-order/{voice.voice_id}")
        parts = []
        for j in rng.permutation(len(BABBLE_TEXT)):
            s = trim_silence(read_engine_audio(workdir / f"babble-{i:02d}-{j:02d}.wav", []))
            parts += [s / np.sqrt(np.mean(s ** 2)), np.zeros(int(0.15 * SAMPLE_RATE))]
        streams.append(np.concatenate(parts))
    return streams


def make_noise(kind: str, n: int, rng: np.random.Generator, streams: list[np.ndarray]) -> np.ndarray:
    """``n`` samples of one kitchen noise recipe (any level; callers scale it).

    babble: 4-6 overlapping talkers; fan: low-passed noise with blade modulation and mains
    hum; mixer: a motor's hum with harmonics, speed and load wobble and gear rattle; clatter:
    random short decaying knocks and rings (dishes, trays, cutlery); water: band-passed noise
    whose level fluctuates (a running tap, splashes).
    """
    if kind == "mixer":
        return _mixer_noise(n, rng)
    if kind == "clatter":
        return _clatter_noise(n, rng)
    if kind == "water":
        return _water_noise(n, rng)
    if kind == "babble":
        n_talk = int(rng.integers(4, 7))
        picks = rng.choice(len(streams), size=n_talk, replace=False)
        out = np.zeros(n)
        for k in picks:
            s = streams[k]
            start = int(rng.integers(len(s)))
            idx = (start + np.arange(n)) % len(s)
            out += s[idx] * rng.uniform(0.6, 1.0)
        return out
    if kind == "fan":
        t = np.arange(n) / SAMPLE_RATE
        b, a = butter(2, rng.uniform(300, 1200) / (SAMPLE_RATE / 2))
        broadband = lfilter(b, a, rng.standard_normal(n + 4000))[4000:]
        broadband /= np.sqrt(np.mean(broadband ** 2))
        hiss = 0.1 * rng.standard_normal(n)
        mains = 50.0 if rng.random() < 0.5 else 60.0
        hum = sum(rng.uniform(0.1, 0.5) / h * np.sin(2 * np.pi * mains * h * t + rng.uniform(0, 2 * np.pi))
                  for h in range(1, 6))
        blade = 1 + 0.2 * np.sin(2 * np.pi * rng.uniform(8, 25) * t)
        return broadband * blade + hiss + hum
    raise CorpusError(f"unknown noise type {kind!r}")


def _smooth_random(n: int, rng: np.random.Generator, cutoff_hz: float) -> np.ndarray:
    """Slowly varying noise of unit RMS (white noise through a 2nd-order low-pass)."""
    b, a = butter(2, cutoff_hz / (SAMPLE_RATE / 2))
    y = lfilter(b, a, rng.standard_normal(n + SAMPLE_RATE))[SAMPLE_RATE:]
    return y / np.sqrt(np.mean(y ** 2))


def _mixer_noise(n: int, rng: np.random.Generator) -> np.ndarray:
    """A stand mixer: motor hum (fundamental 80-180 Hz, 8 harmonics) whose speed and loudness
    wobble with the load of the dough hook, plus band-limited gear rattle."""
    t = np.arange(n) / SAMPLE_RATE
    f0 = rng.uniform(80, 180)
    speed = 1 + 0.01 * _smooth_random(n, rng, 2.0)
    phase = 2 * np.pi * f0 * np.cumsum(speed) / SAMPLE_RATE
    tilt = rng.uniform(0.5, 1.2)
    hum = sum(rng.uniform(0.5, 1.0) / h ** tilt * np.sin(h * phase + rng.uniform(0, 2 * np.pi))
              for h in range(1, 9))
    wobble = 1 + rng.uniform(0.15, 0.35) * np.sin(2 * np.pi * rng.uniform(0.5, 3.0) * t + rng.uniform(0, 2 * np.pi))
    b, a = butter(2, [rng.uniform(800, 1500) / (SAMPLE_RATE / 2), rng.uniform(3000, 5000) / (SAMPLE_RATE / 2)],
                  btype="band")
    rattle = lfilter(b, a, rng.standard_normal(n))
    rattle *= rng.uniform(0.1, 0.3) * np.sqrt(np.mean(hum ** 2) / np.mean(rattle ** 2))
    return (hum + rattle) * wobble


def _clatter_noise(n: int, rng: np.random.Generator) -> np.ndarray:
    """Dishes and trays: knocks at random times (2-8 a second), each a burst of band-passed
    noise or a ringing tone (1-6 kHz) decaying in 5-80 ms, levels spread over 20 dB."""
    out = np.zeros(n)
    rate = rng.uniform(2, 8)
    count = max(1, int(rng.poisson(rate * n / SAMPLE_RATE)))
    for start in np.sort(rng.integers(0, n, size=count)):
        length = min(n - start, int(0.4 * SAMPLE_RATE))
        t = np.arange(length) / SAMPLE_RATE
        decay = np.exp(-t / rng.uniform(0.005, 0.08))
        if rng.random() < 0.5:
            centre = rng.uniform(1000, 6000)
            b, a = butter(2, [0.7 * centre / (SAMPLE_RATE / 2), min(0.99, 1.3 * centre / (SAMPLE_RATE / 2))],
                          btype="band")
            knock = lfilter(b, a, rng.standard_normal(length))
        else:
            knock = np.sin(2 * np.pi * rng.uniform(1000, 6000) * t + rng.uniform(0, 2 * np.pi))
        knock *= decay / max(np.max(np.abs(knock)), 1e-12)
        out[start: start + length] += knock * 10 ** (rng.uniform(-20, 0) / 20)
    return out


def _water_noise(n: int, rng: np.random.Generator) -> np.ndarray:
    """A running tap: noise band-passed to 300-5000 Hz (edges drawn) whose level fluctuates
    (gurgle, 3-12 Hz) around a slowly drifting mean."""
    low, high = rng.uniform(300, 800), rng.uniform(2500, 5000)
    b, a = butter(2, [low / (SAMPLE_RATE / 2), high / (SAMPLE_RATE / 2)], btype="band")
    hiss = lfilter(b, a, rng.standard_normal(n + 2000))[2000:]
    gurgle = np.exp(0.35 * _smooth_random(n, rng, rng.uniform(3, 12)))
    drift = np.exp(0.2 * _smooth_random(n, rng, 0.5))
    return hiss * gurgle * drift


def scaled_noise(kind: str, n: int, dbfs: float, rng: np.random.Generator, streams: list[np.ndarray],
                 fade_s: float = 0.04) -> np.ndarray:
    """``n`` samples of a noise recipe at ``dbfs`` RMS, faded in and out, peaks below -12 dBFS."""
    noise = make_noise(kind, n, rng, streams)
    noise *= 10 ** (dbfs / 20) / np.sqrt(np.mean(noise ** 2))
    peak = np.max(np.abs(noise))
    if peak > NOISE_PEAK_LIMIT:
        noise *= NOISE_PEAK_LIMIT / peak
    m = min(int(fade_s * SAMPLE_RATE), n // 2)
    if m:
        ramp = 0.5 - 0.5 * np.cos(np.pi * np.arange(m) / m)
        noise[:m] *= ramp
        noise[n - m:] *= ramp[::-1]
    return noise


def make_noise_clip(clip: NoiseClip, seed: int, streams: list[np.ndarray]) -> bytes:
    """A noise-only distractor: room tone with the noise over all but 0.05-0.3 s at each end."""
    rng = rng_for(seed, clip.rel_path)
    total = int(round(clip.seconds * SAMPLE_RATE))
    lead, tail = (int(rng.uniform(0.05, 0.3) * SAMPLE_RATE) for _ in range(2))
    signal = room_tone(rng_for(seed, "tone/" + clip.rel_path), total, float(rng.uniform(*ROOM_TONE_DBFS)),
                       float(rng.uniform(0.95, 0.985)))
    signal[lead: total - tail] += scaled_noise(clip.kind, total - lead - tail, clip.dbfs,
                                               rng_for(seed, "noise/" + clip.rel_path), streams)
    return flac_bytes(to_int16(signal))


def long_layout(plan: LongPlan, lengths: list[int]) -> tuple[int, list[int], list[tuple]]:
    """Where everything of a long recording goes, in samples.

    ``lengths`` are the speech parts' lengths (``plan.takes`` order). Returns the total
    length, the start of each speech part, and the noise pieces as (kind, start, length,
    dbfs, key); the key seeds the piece's noise.
    """
    rate = SAMPLE_RATE
    pos = int(round(plan.lead_s * rate))
    starts: list[int] = []
    spans: list[tuple[int, int]] = []   # every event's (start, end)
    noises: list[tuple] = []
    parts = iter(lengths)
    for i, e in enumerate(plan.events):
        pos += int(round(e.gap_s * rate))
        n = next(parts) if e.take is not None else int(round(e.seconds * rate))
        if e.take is not None:
            starts.append(pos)
        elif e.kind == "noise":
            noises.append((e.noise, pos, n, e.dbfs, f"{plan.rel_path}#alone{i:02d}"))
        spans.append((pos, pos + n))
        pos += n
    total = pos + int(round(plan.tail_s * rate))
    for j, bed in enumerate(plan.beds):
        a = max(0, spans[bed.first][0] - int(round(bed.before_s * rate)))
        b = min(total, spans[bed.last][1] + int(round(bed.after_s * rate)))
        noises.append((bed.noise, a, b - a, bed.dbfs, f"{plan.rel_path}#bed{j}"))
    return total, starts, noises


def assemble_long(plan: LongPlan, speech: list[np.ndarray], seed: int,
                  streams: list[np.ndarray]) -> tuple[bytes, list[tuple[float, float, str]]]:
    """Room tone, speech parts and noise pieces summed into one FLAC file.

    Returns the file and one (start, end, words) label per command: the first and last
    sample of the command's trimmed speech, in seconds.
    """
    total, starts, noises = long_layout(plan, [len(x) for x in speech])
    seconds = total / SAMPLE_RATE
    if not LONG_SECONDS[0] <= seconds <= LONG_SECONDS[1]:
        raise CorpusError(f"{plan.rel_path} would last {seconds:.1f} s, outside {LONG_SECONDS}; "
                          "change LONG_COMMANDS or LONG_TALK_SENTENCES")
    signal = room_tone(rng_for(seed, "tone/" + plan.rel_path), total, plan.tone_dbfs, plan.tone_pole)
    for kind, a, n, dbfs, key in noises:
        signal[a: a + n] += scaled_noise(kind, n, dbfs, rng_for(seed, key), streams, fade_s=0.25)
    labels = []
    for e, x, a in zip([e for e in plan.events if e.take is not None], speech, starts):
        signal[a: a + len(x)] += x
        if e.kind == "command":
            labels.append((a / SAMPLE_RATE, (a + len(x)) / SAMPLE_RATE, e.take.text))
    if np.max(np.abs(signal)) >= 32767 / 32768:
        raise CorpusError(f"{plan.rel_path} would clip; lower LONG_BED_DBFS")
    return flac_bytes(to_int16(signal)), labels


def mix_noisy(nt: NoisyTake, clean_q: np.ndarray, span: tuple[float, float], seed: int,
              streams: list[np.ndarray]) -> bytes:
    """Add noise scaled so that the SNR over the speech span equals the label.

    SNR = 10 log10(P_speech / P_noise), both mean powers over the speech span only (the
    room tone before and after the speech is left out of both).
    """
    clean = clean_q.astype(np.float64) / 32768.0
    a, b = (int(round(s * SAMPLE_RATE)) for s in span)
    noise = make_noise(nt.noise, len(clean), rng_for(seed, nt.rel_path), streams)
    p_speech = np.mean(clean[a:b] ** 2)
    p_noise = np.mean(noise[a:b] ** 2)
    noise *= np.sqrt(p_speech / (p_noise * 10 ** (nt.snr_db / 10)))
    mixed = clean + noise
    if np.max(np.abs(mixed)) >= 32767 / 32768:
        raise CorpusError(f"{nt.rel_path} would clip; lower SPEECH_RMS_DBFS")
    return flac_bytes(to_int16(mixed))


# --------------------------------------------------------------------------- safe output

def sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def read_index(root: Path) -> dict[str, str]:
    path = root / INDEX_NAME
    if not path.is_file():
        return {}
    out = {}
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.strip():
            digest, rel = line.split("  ", 1)
            out[rel] = digest
    return out


class SafeWriter:
    """Writes only files this script made before (per the index) or new paths."""

    def __init__(self, root: Path):
        self.root = root
        self.old = read_index(root)
        self.new: dict[str, str] = {}

    def check_writable(self, rel: str) -> None:
        path = self.root / rel
        if not path.exists():
            return
        if rel not in self.old:
            raise CorpusError(
                f"refusing to overwrite {path}: it was not made by this script (not listed in "
                f"{self.root / INDEX_NAME}). Move it away or delete it yourself, then rerun.")
        if sha256(path.read_bytes()) != self.old[rel]:
            raise CorpusError(
                f"refusing to overwrite {path}: it changed since this script made it (checksum "
                f"differs from {INDEX_NAME}). Keep your edit elsewhere or delete the file, then rerun.")

    def write(self, rel: str, data: bytes) -> None:
        self.check_writable(rel)
        path = self.root / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.with_name(path.name + ".part")
        tmp.write_bytes(data)
        os.replace(tmp, path)
        self.new[rel] = sha256(data)

    def finish(self, full_build: bool) -> list[str]:
        """Write the index; on a full build remove made files that are no longer planned."""
        index = dict(self.old)
        removed = []
        if full_build:
            for rel, digest in self.old.items():
                if rel in self.new:
                    continue
                path = self.root / rel
                if path.is_file() and sha256(path.read_bytes()) == digest:
                    path.unlink()
                    removed.append(rel)
                elif path.exists():
                    print(f"note: leaving {path}: it changed since it was made", file=sys.stderr)
                index.pop(rel)
        index.update(self.new)
        text = "".join(f"{index[rel]}  {rel}\n" for rel in sorted(index))
        (self.root / INDEX_NAME).write_text(text, encoding="utf-8")
        return removed


def verify(root: Path) -> int:
    """Compare files on disk with the index; return the number of problems."""
    index = read_index(root)
    if not index:
        print(f"no index at {root / INDEX_NAME}", file=sys.stderr)
        return 1
    bad = 0
    for rel, digest in sorted(index.items()):
        path = root / rel
        if not path.is_file():
            print(f"missing: {rel}", file=sys.stderr)
            bad += 1
        elif sha256(path.read_bytes()) != digest:
            print(f"changed: {rel}", file=sys.stderr)
            bad += 1
    print(f"{len(index) - bad} of {len(index)} files match {INDEX_NAME}")
    return bad


# --------------------------------------------------------------------------- manifests

def csv_bytes(header: list[str], rows: list[list]) -> bytes:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    w.writerows(rows)
    return buf.getvalue().encode("utf-8")


def voices_csv() -> bytes:
    pkg = {"espeak": "espeak-ng-data", "flite": "flite"}
    rows = []
    for v in VOICES:
        package = pkg.get(v.engine) or FESTIVAL_VOICE_DIRS[v.engine_voice][1]
        rows.append([v.voice_id, v.engine, v.engine_voice, v.source_talker, v.split, v.takes,
                     "yes" if v.dev_candidate else "no", package])
    return csv_bytes(["voice", "engine", "engine_voice", "source_talker", "split",
                      "takes_per_word", "dev_candidate", "debian_package"], rows)


def distractors_csv(takes: list[Take], clips: list[NoiseClip], clean: dict) -> bytes:
    """The distractor manifest: empty transcripts ("no command here"), what each file holds.

    ``kind`` is word, sentence or noise; ``content`` the words said or the noise recipe;
    noise clips have the speaker ``noise-<recipe>`` and no speech span.
    """
    rows = [[t.rel_path, "", t.voice.voice_id, "sentence" if " " in t.text else "word", t.text,
             f"{clean[t.rel_path][2]:.3f}", f"{clean[t.rel_path][3]:.3f}"] for t in takes]
    rows += [[c.rel_path, "", f"noise-{c.kind}", "noise", c.kind, "", ""] for c in clips]
    return csv_bytes(["path", "transcript", "speaker", "kind", "content", "speech_start", "speech_end"], rows)


def long_csv(longs: list[LongPlan], labels: dict[str, list[tuple[float, float, str]]]) -> bytes:
    """The long recordings' reference: ``path,start,end,words``, one row per command.

    A recording without commands gets one row with empty start, end and words.
    """
    rows = []
    for lp in longs:
        found = labels[lp.rel_path]
        rows += [[lp.rel_path, f"{a:.3f}", f"{b:.3f}", words] for a, b, words in found]
        if not found:
            rows.append([lp.rel_path, "", "", ""])
    return csv_bytes(["path", "start", "end", "words"], rows)


def check_new_word_phones(lexicon_path: Path) -> None:
    """Every phone of a new word must occur in some training word."""
    prons: dict[str, list[list[str]]] = {}
    for line in lexicon_path.read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].split()
        if line:
            prons.setdefault(line[0].lower(), []).append(line[1:])
    missing_words = [w for w in list(VOCABULARY) + list(NEW_WORDS) if w not in prons]
    if missing_words:
        raise CorpusError(f"{lexicon_path} lacks {missing_words}")
    train_phones = {p for w in VOCABULARY for pron in prons[w] for p in pron}
    for w in NEW_WORDS:
        for pron in prons[w]:
            extra = set(pron) - train_phones
            if extra:
                raise CorpusError(f"new word {w!r} uses phones {sorted(extra)} that no training word has")


def check_espeak_voices_differ(workdir: Path) -> None:
    """espeak-ng falls back silently on an unknown variant: make sure every voice is distinct."""
    probe = "seven"
    voices = [v for v in VOICES if v.engine == "espeak"]
    accents = sorted({v.extra["accent"] for v in voices})
    requests = [(v, probe, None, workdir / f"probe-{v.voice_id}.wav") for v in voices]
    plain = [Voice(f"plain-{a}", "espeak", ESPEAK_ENGINE_NAME.get(a, a), "", "", 0) for a in accents]
    requests += [(v, probe, None, workdir / f"probe-{v.voice_id}.wav") for v in plain]
    synthesize_raw(requests, 2)
    digest = {v.engine_voice: sha256(out.read_bytes()) for v, _, _, out in requests}
    # Every corpus voice must differ from every other one and from its accent without variant.
    for i, v in enumerate(voices):
        others = [w.engine_voice for w in voices[i + 1:]] + [v.engine_voice.split("+")[0]]
        for other in others:
            if digest[v.engine_voice] == digest[other]:
                raise CorpusError(f"espeak-ng voices {v.engine_voice} and {other} sound the same: "
                                  "a variant or accent is unknown and fell back silently")


# --------------------------------------------------------------------------- main

def _babble_needed(noisy: list[NoisyTake], clips: list[NoiseClip], longs: list[LongPlan]) -> bool:
    kinds = {nt.noise for nt in noisy} | {c.kind for c in clips}
    kinds |= {e.noise for lp in longs for e in lp.events} | {b.noise for lp in longs for b in lp.beds}
    return "babble" in kinds


def build(root: Path, seed: int, only: list[str], jobs: int) -> None:
    t0 = time.time()
    check_engines()
    here = Path(__file__).resolve().parent
    check_new_word_phones(here.parent / "lexicon" / "bakery.txt")
    sets, noisy = plan(seed)
    distractor_takes, clips = plan_distractors(seed)
    longs = plan_long(seed)
    selected = (lambda rel: True) if not only else (
        lambda rel: any(fnmatch.fnmatch(rel, pat) for pat in only))
    writer = SafeWriter(root)
    wanted_noisy = [nt for nt in noisy if selected(nt.rel_path)]
    wanted_clips = [c for c in clips if selected(c.rel_path)]
    wanted_long = [lp for lp in longs if selected(lp.rel_path)]
    needed_clean = {nt.clean.rel_path for nt in wanted_noisy}
    takes = [t for ts in sets.values() for t in ts if selected(t.rel_path) or t.rel_path in needed_clean]
    takes += [t for t in distractor_takes if selected(t.rel_path)]
    parts = [t for lp in wanted_long for t in lp.takes]
    outputs = [t.rel_path for t in takes if selected(t.rel_path)] + [nt.rel_path for nt in wanted_noisy]
    outputs += [c.rel_path for c in wanted_clips] + [lp.rel_path for lp in wanted_long]
    if not only:
        outputs += ["voices.csv", "distractors.csv", "long.csv"]
        outputs += [f"{name}.csv" for name in list(sets) + ["test-noisy"]]
    for rel in outputs:  # fail before any slow work
        writer.check_writable(rel)

    with tempfile.TemporaryDirectory(prefix="wordspot-corpus-") as tmp:
        work = Path(tmp)
        check_espeak_voices_differ(work)
        raw = {t.rel_path: work / f"raw-{i:05d}.wav" for i, t in enumerate(takes + parts)}
        synthesize_raw([(t.voice, t.text, draw_for(seed, t.rel_path), raw[t.rel_path])
                        for t in takes + parts], jobs)
        print(f"engines done: {len(takes) + len(parts)} takes in {time.time() - t0:.1f} s", flush=True)
        # Worker start-up costs seconds: small builds run in this process.
        small = len(takes) + len(parts) + len(wanted_noisy) + len(wanted_clips) < 40
        workers = 1 if small else jobs
        finished = Parallel(n_jobs=workers)(delayed(finish_take)(t, raw[t.rel_path], seed) for t in takes)
        clean = {t.rel_path: f for t, f in zip(takes, finished)}
        for t in takes:
            if selected(t.rel_path):
                writer.write(t.rel_path, clean[t.rel_path][0])
        print(f"clean audio written in {time.time() - t0:.1f} s", flush=True)
        streams = (babble_streams(seed, work, jobs) if _babble_needed(wanted_noisy, wanted_clips, wanted_long)
                   else [])
        if wanted_noisy:
            mixed = Parallel(n_jobs=workers)(
                delayed(mix_noisy)(nt, clean[nt.clean.rel_path][1], clean[nt.clean.rel_path][2:],
                                   seed, streams) for nt in wanted_noisy)
            for nt, data in zip(wanted_noisy, mixed):
                writer.write(nt.rel_path, data)
        made = Parallel(n_jobs=workers)(delayed(make_noise_clip)(c, seed, streams) for c in wanted_clips)
        for c, data in zip(wanted_clips, made):
            writer.write(c.rel_path, data)
        speech = Parallel(n_jobs=workers)(delayed(levelled_speech)(t, raw[t.rel_path], seed) for t in parts)
        speech_of = {t.rel_path: x for t, x in zip(parts, speech)}
        assembled = Parallel(n_jobs=workers)(
            delayed(assemble_long)(lp, [speech_of[t.rel_path] for t in lp.takes], seed, streams)
            for lp in wanted_long)
        labels = {}
        for lp, (data, lp_labels) in zip(wanted_long, assembled):
            writer.write(lp.rel_path, data)
            labels[lp.rel_path] = lp_labels
    if not only:
        header = ["path", "transcript", "speaker", "speech_start", "speech_end"]
        for name, ts in sets.items():
            rows = [[t.rel_path, t.text, t.voice.voice_id, f"{clean[t.rel_path][2]:.3f}",
                     f"{clean[t.rel_path][3]:.3f}"] for t in ts]
            writer.write(f"{name}.csv", csv_bytes(header, rows))
        rows = [[nt.rel_path, nt.clean.text, nt.clean.voice.voice_id, nt.snr_db, nt.noise,
                 f"{clean[nt.clean.rel_path][2]:.3f}", f"{clean[nt.clean.rel_path][3]:.3f}",
                 nt.clean.rel_path] for nt in noisy]
        writer.write("test-noisy.csv", csv_bytes(header[:3] + ["snr_db", "noise"] + header[3:]
                                                 + ["clean_path"], rows))
        writer.write("distractors.csv", distractors_csv(distractor_takes, clips, clean))
        writer.write("long.csv", long_csv(longs, labels))
        writer.write("voices.csv", voices_csv())
    removed = writer.finish(full_build=not only)
    for rel in removed:
        print(f"removed stale {rel}")
    print(f"wrote {len(writer.new)} files to {root} in {time.time() - t0:.1f} s")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent,
                        help="folder to build into (default: the folder of this script)")
    parser.add_argument("--seed", type=int, default=SEED, help=f"master seed (default {SEED})")
    parser.add_argument("--only", action="append", default=[], metavar="GLOB",
                        help="build only audio files whose path (relative to --out) matches; "
                             "no manifests are written; may be repeated")
    parser.add_argument("--jobs", type=int, default=2, help="parallel workers (default 2)")
    parser.add_argument("--check", action="store_true",
                        help="only compare the files on disk with the index of made files")
    args = parser.parse_args(argv)
    try:
        if args.check:
            return 1 if verify(args.out) else 0
        args.out.mkdir(parents=True, exist_ok=True)
        build(args.out, args.seed, args.only, max(1, args.jobs))
    except CorpusError as exc:
        print(f"synthesize.py: error: {exc}", file=sys.stderr)
        return 2
    return 0


if __name__ == "__main__":
    sys.exit(main())
