"""A confidence calibration for a starter model, fitted on many voices of the starter corpus.

A model adapted from a starter fits its own calibration on the user's held-out takes
(:mod:`wordspot.evaluation.calibrate`); with too few takes it keeps the starter's, so that
it can say "no command" from its first minute. The starter's calibration cannot know the
user's words, so it is fitted over many small vocabularies drawn from the corpus's words:

1. draw ``vocabularies`` sets of ``words`` command words (seeded) among the words that
   recordings of the corpus say alone;
2. for each set, recognise with that set as the lexicon (the filler on, no threshold):
   (a) the recordings saying one of those words (each word heard is labelled right or
   wrong by the word alignment), also played faster; (b) a sample of the other recordings,
   mostly sentences, some single words, holding none of the set's words: every word heard
   is wrong; (c) clips of
   jumbled speech of the set's recordings (:mod:`wordspot.audio.jumble`): all wrong;
   (d) background-only clips (noise, hum, babble of the corpus's voices;
   :func:`wordspot.training.backgrounds.background_wave`): all wrong; optionally (e) noisy
   copies of the command recordings (:func:`calibrate.noisy_copies`), labelled as in (a),
   (f) phrases of 2-3 command recordings of one voice (:func:`calibrate.joined_phrases`),
   labelled as in (a), (g) clips of impacts (knocks, clinks, taps, scrapes;
   :mod:`wordspot.audio.impacts`) over a faint floor, all wrong, and (h) more one-word
   recordings of other words, all wrong;
3. fit the logistic regression on the measures :func:`calibrate.calibration_measures`
   chooses (the posterior measures too when the model has a state scorer), a measure whose
   weight opposes its meaning capped as in every calibration (``cap_quantile``).

The measures are margins and per-frame scores, not word identities, so one fit serves any
vocabulary. Recordings the model was trained on give measures that are too good; use a split
it has not heard (the starter corpus's dev split).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np

from wordspot.audio.augment import snr_range
from wordspot.decoding.decoder import DecoderSettings, build_recognizer
from wordspot.errors import TrainingError, WordspotError
from wordspot.evaluation.calibrate import (DEFAULT_CAP_QUANTILE, CalibrationConfig, CalibrationExamples,
                                           fit_calibration, joined_phrases, noisy_copies)
from wordspot.evaluation.reliability import word_hits

__all__ = ["StarterCalibrationConfig", "starter_calibration_examples", "fit_starter_calibration"]


@dataclass(frozen=True)
class StarterCalibrationConfig:
    """How a starter's calibration is fitted.

    Parameters
    ----------
    vocabularies : int
        Vocabularies drawn.
    words : tuple of (int, int)
        Each vocabulary holds from ``words[0]`` to ``words[1]`` words (uniform).
    other_talk : int
        Sentences without the vocabulary's words recognised per vocabulary (at most; other
        talk is mostly sentences).
    other_words : int
        One-word recordings of other words recognised per vocabulary.
    jumbled : int
        Clips of jumbled speech per vocabulary.
    noise : int
        Background-only clips per vocabulary.
    speeds : tuple of float
        The command recordings are also recognised played this many times faster
        (``training.data.speed_copy``; words inside phrases are quicker than said alone).
    noisy : int
        Noisy copies of each command recording (babble of the vocabulary's other voices
        two times in three, else steady noise), recognised at speed 1. 0: none.
    noise_snr_db : (float, float)
        Their SNR range (dB over the speech part).
    phrases : int
        Phrases of 2-3 command recordings of one voice joined with short pauses, per
        vocabulary, each played at one of ``speeds``. 0: none.
    impacts : int
        Clips of 1-4 s of impacts at -60 to -20 dBFS over a faint floor, per vocabulary
        (source "impacts"). 0: none.
    more_words : int
        One-word recordings of other words per vocabulary beyond ``other_words``, drawn
        apart so that every other example stays as it was (source "other word alone"). 0: none.
    seed : int
    settings : DecoderSettings
        How the recordings are recognised (no threshold in any case).
    penalty : float
        L2 penalty of the logistic regression.
    cap_quantile : float in (0, 1] or None
        Cap of the measures whose weight opposes their meaning
        (``CalibrationConfig.cap_quantile``). None: no cap (the starters shipped before
        2026-12-04).
    """

    vocabularies: int = 12
    words: tuple[int, int] = (8, 30)
    other_talk: int = 50
    other_words: int = 10
    jumbled: int = 8
    noise: int = 8
    speeds: tuple[float, ...] = (1.0, 1.25)
    noisy: int = 0
    noise_snr_db: tuple[float, float] = (5.0, 25.0)
    phrases: int = 0
    impacts: int = 0
    more_words: int = 0
    seed: int = 0
    settings: DecoderSettings = DecoderSettings(min_confidence=0.0)
    penalty: float = CalibrationConfig.penalty
    cap_quantile: float | None = DEFAULT_CAP_QUANTILE

    def __post_init__(self) -> None:
        for name in ("vocabularies", "other_talk", "other_words", "jumbled", "noise", "noisy", "phrases", "impacts",
                     "more_words"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < (1 if name == "vocabularies" else 0):
                raise TrainingError(f"starter calibration: {name} must be a whole number >= "
                                    f"{1 if name == 'vocabularies' else 0}, got {v!r}")
        lo, hi = self.words
        if not (isinstance(lo, int) and isinstance(hi, int) and 2 <= lo <= hi):
            raise TrainingError(f"starter calibration: words must be two whole numbers 2 <= low <= high, "
                                f"got {self.words!r}")
        if not self.speeds or not all(isinstance(f, (int, float)) and 0.5 <= f <= 2.0 for f in self.speeds):
            raise TrainingError(f"starter calibration: speeds must be factors from 0.5 to 2, got {self.speeds!r}")
        CalibrationConfig(cap_quantile=self.cap_quantile)  # refuses a cap out of (0, 1]
        if snr_range(self.noise_snr_db) is None:
            raise TrainingError(f"starter calibration: noise_snr_db must be two finite numbers low <= high in dB "
                                f"(e.g. (5, 25)), got {self.noise_snr_db!r}")


def _load(model, path) -> np.ndarray | None:
    from wordspot.audio.reading import load_audio

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return load_audio(path, sample_rate=model.features.sample_rate)
    except WordspotError:
        return None


def starter_calibration_examples(model, utterances: Sequence,
                                 config: StarterCalibrationConfig = StarterCalibrationConfig(), *, report=None) -> CalibrationExamples:
    """Measures and right / wrong labels over the drawn vocabularies (module docstring).

    Parameters
    ----------
    model : AcousticModel
        The starter (its lexicon must hold the recordings' words).
    utterances : sequence of Utterance
        Recordings it was not trained on, of many voices; one-word recordings give the commands.

    Raises
    ------
    TrainingError
        Fewer distinct one-word recordings' words than a vocabulary needs.
    """
    from wordspot.audio.features import compute_features
    from wordspot.audio.jumble import jumbled_speech
    from wordspot.training.backgrounds import background_wave, plan_backgrounds
    from wordspot.training.data import speed_copy

    say = report or (lambda line: None)
    rate = model.features.sample_rate
    known = set(model.lexicon.words)
    usable = [u for u in utterances if u.words and set(u.words) <= known]
    alone = sorted({u.words[0] for u in usable if len(u.words) == 1})
    if len(alone) < config.words[1]:
        raise TrainingError(f"starter calibration: the recordings say {len(alone)} distinct words alone, "
                            f"fewer than the {config.words[1]} a vocabulary may hold")
    waves: dict[str, np.ndarray | None] = {}

    def wave(u):
        key = str(u.path)
        if key not in waves:
            waves[key] = _load(model, u.path)
        return waves[key]

    rng = np.random.default_rng([config.seed, 0x73746172])
    by_speaker: dict[str, list] = {}
    for u in usable:
        by_speaker.setdefault(str(u.speaker), []).append(u)
    rows, right, removed, jumbled, source = [], [], [], [], []
    failed: set[str] = set()

    def add(segments, labels, all_wrong=False, in_jumble=False, where=None):
        rows.extend(s.measures for s in segments)
        right.extend(labels)
        removed.extend([all_wrong] * len(segments))
        jumbled.extend([in_jumble] * len(segments))
        where = where or ("jumbled" if in_jumble else "held-out, own words removed" if all_wrong else "held-out")
        source.extend([where] * len(segments))

    settings = replace(config.settings, min_confidence=0.0)
    for v in range(config.vocabularies):
        k = int(rng.integers(config.words[0], config.words[1] + 1))
        vocab = sorted(rng.choice(alone, size=k, replace=False).tolist())
        lexicon = model.lexicon.restricted_to(vocab)
        rec = build_recognizer(model, settings=settings, lexicon=lexicon)
        chosen = set(vocab)
        commands = [u for u in usable if len(u.words) == 1 and u.words[0] in chosen]
        talk = [u for u in usable if len(u.words) > 1 and not set(u.words) & chosen]
        words = [u for u in usable if len(u.words) == 1 and u.words[0] not in chosen]
        others = ([talk[i] for i in rng.permutation(len(talk))[:config.other_talk]]
                  + [words[i] for i in rng.permutation(len(words))[:config.other_words]])

        def heard(w):
            got = rec.decode(compute_features(w, model.features))
            return got.segments + got.dropped

        for is_command, u in [(True, u) for u in commands] + [(False, u) for u in others]:
            w = wave(u)
            if w is None:
                failed.add(str(u.path))
                continue
            for f in config.speeds if is_command else (1.0,):
                segs = heard(w if f == 1.0 else speed_copy(w, rate, f))
                add(segs, word_hits(u.words, [s.word for s in segs]) if is_command else [False] * len(segs),
                    all_wrong=not is_command)
        extra = np.random.default_rng([config.seed, 0x636F6E64, v])  # apart, so the other draws stay as they were
        said = [(u, wave(u)) for u in commands]
        said = [(u, w) for u, w in said if w is not None]
        if config.noisy:
            for k, w in noisy_copies([w for _, w in said], [str(u.speaker) for u, _ in said], config.noisy,
                                     snr_db=config.noise_snr_db, seed=int(extra.integers(2**31)), sample_rate=rate):
                segs = heard(w)
                add(segs, word_hits(said[k][0].words, [s.word for s in segs]), where="noisy")
        if config.phrases:
            for ws, w in joined_phrases([w for _, w in said], [u.words for u, _ in said],
                                        [str(u.speaker) for u, _ in said], config.phrases, speeds=config.speeds,
                                        seed=int(extra.integers(2**31)), sample_rate=rate):
                segs = heard(w)
                add(segs, word_hits(ws, [s.word for s in segs]), where="phrase")
        if config.impacts:
            for r in plan_backgrounds(config.impacts, [], seed=int(extra.integers(2**31)), seconds=(1.0, 4.0),
                                      levels=(-60.0, -20.0), kinds=("impacts",)):
                segs = heard(background_wave(r, {}, rate))
                add(segs, [False] * len(segs), all_wrong=True, where="impacts")
        if config.more_words:
            taken = {str(u.path) for u in others}
            spare = [u for u in words if str(u.path) not in taken]
            for i in extra.permutation(len(spare))[:config.more_words]:
                w = wave(spare[i])
                if w is None:
                    failed.add(str(spare[i].path))
                    continue
                segs = heard(w)
                add(segs, [False] * len(segs), all_wrong=True, where="other word alone")
        clips = []
        if config.jumbled:
            speaker = sorted({str(u.speaker) for u in commands})
            for j in range(config.jumbled):
                own = [wave(u) for u in by_speaker[speaker[j % len(speaker)]]]
                clips += jumbled_speech([w for w in own if w is not None][:40], rate, 1, rng)
        for c in clips:
            segs = heard(c)
            add(segs, [False] * len(segs), all_wrong=True, in_jumble=True)
        if config.noise:
            pool = {}
            for name, utts in sorted(by_speaker.items()):
                got = [w for w in (wave(u) for u in utts[:6]) if w is not None]
                pool[name] = list(enumerate(got))
            kinds = ("white", "pink", "hum", "dither", "fan", "babble")
            for r in plan_backgrounds(config.noise, sorted(pool), seed=int(rng.integers(2**31)),
                                      seconds=(1.0, 4.0), levels=(-60.0, -20.0), kinds=kinds):
                segs = heard(background_wave(r, pool, rate))
                add(segs, [False] * len(segs), all_wrong=True, where="noise only")
        say(f"starter calibration: vocabulary {v + 1}/{config.vocabularies} ({k} words): {len(commands)} "
            f"command recordings, {len(others)} other, {len(clips)} jumbled clips, {config.noise} noise clips; "
            f"{sum(right)} right and {len(right) - sum(right)} wrong words so far")
    from wordspot.decoding.confidence import MEASURE_NAMES

    measures = np.array(rows, dtype=np.float64).reshape(len(rows), len(MEASURE_NAMES))
    return CalibrationExamples(measures, np.array(right, dtype=bool), np.array(removed, dtype=bool),
                               np.array(jumbled, dtype=bool), recordings=len(usable) - len(failed),
                               failed=sorted(failed), source=np.array(source, dtype="<U32"))


def fit_starter_calibration(model, utterances: Sequence,
                            config: StarterCalibrationConfig = StarterCalibrationConfig(), *, report=None):
    """The starter's calibration and its examples: ``(Calibration or None, CalibrationExamples)``.

    None (with one warning) when a class is missing or the fit fails.
    """
    examples = starter_calibration_examples(model, utterances, config, report=report)
    cal = fit_calibration(examples, config=CalibrationConfig(min_items=1, min_per_class=5, penalty=config.penalty,
                                                             cap_quantile=config.cap_quantile))
    return cal, examples
