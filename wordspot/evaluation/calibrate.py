"""Fitting the confidence calibration at training time, on recordings held out of training.

:func:`train_calibrated` wraps any training function (adapting a model, or training one
from scratch; this module does not import training, the caller hands it in):

1. hold out a share of the recordings (:func:`split_held_out`: per transcript, spread over
   the speakers, seeded; every transcript keeps at least one recording for training), or
   the whole speakers the training function names (its ``speakers_apart``, when adapting
   to recordings of several speakers), of whom about the same share is recognised
   (:func:`recognised_share`);
2. train on the rest;
3. recognise each held-out recording (:func:`calibration_examples`) (a) with the whole
   lexicon, labelling every word heard right or wrong by the word alignment
   (:func:`wordspot.evaluation.reliability.word_hits`), and (b) with the recording's own
   words removed from the lexicon, a stand-in for speech that holds no command: every
   word heard then is wrong. (b) gives the wrong words a clean held-out set would lack;
   (c) recognise clips of the held-out recordings cut into short pieces and joined in
   random order (:mod:`wordspot.audio.jumble`): the user's own phones in an order that
   spells no command, as in other talk; every word heard there is wrong too; optionally,
   in the conditions of use: (d) noisy copies of the held-out recordings (babble or
   steady noise, :func:`wordspot.training.noise.noisy_wave`) recognised as in (a) and (b);
   (e) held-out takes of one speaker joined into short phrases of 2-3 commands with short
   pauses, recognised as in (a) and (b); (f) background-only clips (noise, hum, babble;
   :func:`wordspot.training.backgrounds.background_wave`), every word heard there wrong;
4. fit the logistic regression of right / wrong on the words' measures
   (:func:`wordspot.util.logistic.fit_logistic`), and cap a measure whose weight opposes
   its meaning at the right examples' :data:`DEFAULT_CAP_QUANTILE` (:func:`contrary_caps`);
5. train again on every recording (``refit``; else keep the model trained on the rest)
   and store the calibration in that model.

Too few held-out recordings, or too few words of one kind, skip the calibration with one
warning; the model then keeps the heuristic confidence.
"""

from __future__ import annotations

import threading
import warnings
from dataclasses import dataclass, field, replace
from typing import Callable, Iterator, Sequence

import numpy as np

from wordspot.audio.augment import snr_range
from wordspot.decoding.confidence import (BASE_MEASURE_NAMES, MEASURE_NAMES, OWN_POSTERIOR_MEASURE_NAMES,
                                           OWN_PREFIX, POSTERIOR_MEASURE_NAMES)
from wordspot.decoding.decoder import DecoderSettings, Recognition, build_recognizer
from wordspot.errors import TrainingError, TrainingWarning, WordspotError
from wordspot.evaluation.reliability import word_hits
from wordspot.language.grammar import BigramCounts, estimate_prior
from wordspot.util.logistic import DEFAULT_PENALTY, Calibration, fit_logistic
from wordspot.util.progress import ProgressBar

__all__ = [
    "CalibrationConfig",
    "CalibrationExamples",
    "split_held_out",
    "held_out_recognitions",
    "backwards_recognitions",
    "jumbled_recognitions",
    "DEFAULT_JUMBLED",
    "SOURCES",
    "noisy_copies",
    "joined_phrases",
    "noise_only_clips",
    "clips_of_impacts",
    "calibration_examples",
    "fit_calibration",
    "CALIBRATION_POSTERIOR_MEASURES",
    "MEASURE_SIGNS",
    "DEFAULT_CAP_QUANTILE",
    "contrary_caps",
    "capped_measures",
    "calibration_measures",
    "held_out_parts",
    "recognised_share",
    "CALIBRATION_FOLDS",
    "calibration_note",
    "train_calibrated",
]


#: Clips of jumbled held-out speech in the calibration (chosen on dev material,
#: docs/experiments/2026-12-02-per-phone-measures-and-jumbled-speech.md).
DEFAULT_JUMBLED = 150

#: Where a calibration word was heard (``CalibrationExamples.source``): the held-out
#: recordings with the whole lexicon and with their own words removed, played backwards,
#: jumbled, their noisy copies, phrases joined from them, background-only clips, clips of
#: impacts; a starter's calibration also more one-word recordings of other words.
SOURCES = ("held-out", "held-out, own words removed", "backwards", "jumbled", "noisy",
           "noisy, own words removed", "phrase", "phrase, own words removed", "noise only", "impacts",
           "other word alone")

#: Separate the random streams of the calibration's noisy copies, phrases and noise clips.
_NOISY_STREAM = 0x6E6F6973
_PHRASE_STREAM = 0x70687261
_CLIP_STREAM = 0x636C6970
_IMPACT_STREAM = 0x696D7061

#: The posterior measures (``confidence.POSTERIOR_MEASURE_NAMES``) a calibration uses beside
#: the others when the model has a state scorer; chosen on the dev voices
#: (docs/experiments/2026-12-02-posterior-confidence.md). The worst phone counts the best
#: vowel's posterior on a vowel's frames (``posterior_worst_phone_any_vowel`` instead of
#: ``posterior_worst_phone``): on dev commands said with a vowel the lexicon does not list,
#: adapted model, three seeds, misses at the default threshold 53.6% -> 40.6%, no-command
#: files with a command 12.8% -> 12.9% (docs/experiments/2026-12-03-unlisted-pronunciations.md).
#: A calibration stores the names it uses, so models calibrated before keep theirs.
CALIBRATION_POSTERIOR_MEASURES = ("posterior_mean", "posterior_phone_mean", "posterior_worst_phone_any_vowel",
                                  "posterior_filler_margin")


#: The sign a measure's weight may take when ``CalibrationConfig.weight_signs`` is on: +1
#: when a larger value means more evidence that the word was said (definitions in
#: :mod:`wordspot.decoding.confidence`), -1 when less, and absent (any sign) when the
#: definition gives no direction. Without it a fit may give a measure the wrong sign where
#: it moves with others (``acoustic_per_frame`` came out negative beside the margins), and
#: a word that fits better than any held-out take then loses confidence.
MEASURE_SIGNS = {
    # the word's own states' log score a frame: higher, its frames look more like its
    # phones (rivals are the margins' part; a better fit is no evidence against the word)
    "acoustic_per_frame": +1,
    # the word's score less the best free state's (<= 0): nearer 0, no state explains its
    # frames much better
    "free_margin": +1,
    # "frames_per_phone": no sign (phones too short and too long are both suspicious)
    # the word's score less the best free sequence of phones / the best other command's
    "filler_margin": +1,
    "runner_up_margin": +1,
    # neighbours that are the filler: a command inside other talk rather than between pauses
    "next_to_filler": -1,
    # phones of the pronunciation: short words turn up in other talk more easily
    "phones": +1,
    # the mean of the word's phones' margins over the best free sequence on their frames
    "phone_filler_margin": +1,
    # the state scorer's log posteriors along the word's path (higher: the scorer agrees
    # more with the word's states) and its margin over the filler
    **{name: +1 for name in POSTERIOR_MEASURE_NAMES + OWN_POSTERIOR_MEASURE_NAMES},
}


#: The right examples' quantile at which a measure whose weight opposes its sign is capped
#: (``CalibrationConfig.cap_quantile``; :func:`contrary_caps`). Chosen on dev voices (the
#: ordinary ones over three seeds, two far sets) against no cap and 0.9: at the threshold
#: 0.05 phrase stand-ins WER 4.9% -> 3.8%, 6.9% -> 5.2%, 5.2% -> 3.2%, other talk with a
#: command within the seeds' spread, commands in babble worse (20 dB 36.1% -> 37.7% on the
#: ordinary voices) (docs/experiments/2026-12-03-confidence-unfamiliar-voices.md).
#: In a model file the caps are the calibration's ``upper`` / ``lower``; older files have none.
DEFAULT_CAP_QUANTILE = 0.95


def calibration_measures(measures: np.ndarray) -> tuple[str, ...]:
    """The measures a calibration fitted on ``measures`` (rows in the order of
    ``MEASURE_NAMES``) uses: the base ones, plus :data:`CALIBRATION_POSTERIOR_MEASURES` when
    those are finite in every row (the model has a state scorer), plus the same from the
    second network (``own_`` names) when those are (the model has an ``own_scorer``)."""
    m = np.asarray(measures, dtype=np.float64).reshape(-1, len(MEASURE_NAMES))
    names = BASE_MEASURE_NAMES
    for group in (tuple(CALIBRATION_POSTERIOR_MEASURES), tuple(OWN_PREFIX + n for n in CALIBRATION_POSTERIOR_MEASURES)):
        cols = [MEASURE_NAMES.index(n) for n in group]
        if cols and m.shape[0] and np.isfinite(m[:, cols]).all():
            names = names + group
    return names


@dataclass(frozen=True)
class CalibrationConfig:
    """How the confidence calibration is fitted at training time.

    Parameters
    ----------
    held_out_share : float in (0, 1)
        Share of the recordings of each transcript held out of the first training.
    seed : int
        Seed of the choice of held-out recordings.
    refit : bool or None
        Train again on every recording once the calibration is fitted. None: yes when
        adapting (seconds), no when training from scratch (minutes; the model trained
        without the held-out share is kept). Decided by the caller of :func:`train_calibrated`.
    min_items : int
        Fewest held-out recordings to fit on.
    min_per_class : int
        Fewest right and fewest wrong words to fit on.
    penalty : float
        L2 penalty of the logistic regression (standardised measures).
    weight_signs : bool
        Fit each measure's weight with the sign its meaning implies (:data:`MEASURE_SIGNS`;
        the same penalised likelihood under those bounds); False: any sign.
    cap_quantile : float in (0, 1] or None
        A measure whose fitted weight has the sign opposite to its meaning
        (:data:`MEASURE_SIGNS`; it moves with others that carry the evidence) is capped on
        its better side at this quantile of the right examples' values
        (:func:`contrary_caps`): a word that fits better than most right held-out words
        is not rated lower than one at that quantile. None: no cap.
    settings : DecoderSettings
        How the held-out recordings are recognised (the word loop; no threshold).
    speeds : tuple of float
        Each held-out recording is also recognised played this many times faster
        (``training.data.speed_copy``), so that the calibration holds for quicker and
        slower speech than the takes (words inside a phrase are shorter than the same
        words said alone).
    backwards : bool
        Also recognise each held-out recording played backwards, with the whole lexicon:
        speech of the same voice that says no command, so every word heard is wrong.
    jumbled : int
        Clips of jumbled speech made from the held-out recordings
        (:func:`wordspot.audio.jumble.jumbled_speech`, seeded by ``seed``) recognised with
        the whole lexicon; every word heard there is wrong. 0: none.
    noisy : int
        Noisy copies of each held-out recording (:func:`noisy_copies`: babble of the other
        held-out speakers two times in three, else steady noise), recognised at speed 1 with
        the whole lexicon (right and wrong words in noise) and with the recording's own
        words removed (wrong words in noise). 0: none.
    noise_snr_db : (float, float)
        The noisy copies' SNR is drawn uniformly from this range (dB, over the speech part).
    phrases : int
        Phrases of 2-3 held-out takes of one speaker, cut to their speech and joined with
        short pauses of their room tone (:func:`joined_phrases`), each played at one of
        ``speeds``, recognised with the whole lexicon (words right and wrong in context)
        and with the phrase's words removed. 0: none.
    noise_clips : int
        Background-only clips of 1-4 s (:func:`noise_only_clips`: white, pink, hum, dither,
        fan, babble of the held-out speakers) recognised with the whole lexicon; every word
        heard there is wrong. 0: none.
    impact_clips : int
        Clips of 1-4 s of impacts (knocks, clinks, taps, scrapes; :func:`clips_of_impacts`)
        recognised with the whole lexicon; every word heard there is wrong (source
        "impacts"). Drawn from a stream of their own, so every other example stays the
        same. 0: none.
    """

    held_out_share: float = 0.15
    seed: int = 0
    refit: bool | None = None
    min_items: int = 20
    min_per_class: int = 5
    penalty: float = DEFAULT_PENALTY
    weight_signs: bool = False
    cap_quantile: float | None = DEFAULT_CAP_QUANTILE
    settings: DecoderSettings = field(default_factory=lambda: DecoderSettings(min_confidence=0.0))
    speeds: tuple[float, ...] = (0.9, 1.0, 1.1, 1.25, 1.4)
    backwards: bool = False
    jumbled: int = DEFAULT_JUMBLED
    noisy: int = 0
    noise_snr_db: tuple[float, float] = (5.0, 25.0)
    phrases: int = 0
    noise_clips: int = 0
    impact_clips: int = 0

    def __post_init__(self) -> None:
        s = self.held_out_share
        if isinstance(s, bool) or not isinstance(s, (int, float)) or not 0.0 < s < 1.0:
            raise TrainingError(f"the held-out share for calibration must be between 0 and 1 (e.g. 0.15), got {s!r}")
        if not self.speeds or not all(isinstance(f, (int, float)) and 0.5 <= f <= 2.0 for f in self.speeds):
            raise TrainingError(f"calibration speeds must be factors from 0.5 to 2 (e.g. (0.9, 1.0, 1.1)), "
                                f"got {self.speeds!r}")
        j = self.jumbled
        if isinstance(j, bool) or not isinstance(j, (int, np.integer)) or j < 0:
            raise TrainingError(f"the number of jumbled clips for calibration must be a whole number >= 0 "
                                f"(e.g. {DEFAULT_JUMBLED}), got {j!r}")
        for name, what in (("noisy", "noisy copies of each held-out recording"),
                           ("phrases", "joined phrases"), ("noise_clips", "noise-only clips"),
                           ("impact_clips", "clips of impacts")):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 0:
                raise TrainingError(f"the number of {what} for calibration ({name}) must be a whole number "
                                    f">= 0 (0: none), got {v!r}")
        q = self.cap_quantile
        if q is not None and (isinstance(q, bool) or not isinstance(q, (int, float)) or not 0.0 < q <= 1.0):
            raise TrainingError(f"the calibration's cap quantile must be a number in (0, 1] (e.g. 0.9) or None "
                                f"(no cap), got {q!r}")
        if snr_range(self.noise_snr_db) is None:
            raise TrainingError(f"the calibration's noise SNR range must be two finite numbers low <= high in dB "
                                f"(e.g. (5, 25)), got {self.noise_snr_db!r}")

    def decided(self, *, adapting: bool) -> "CalibrationConfig":
        """This configuration with ``refit`` settled: as given, else True when adapting."""
        return self if self.refit is not None else replace(self, refit=adapting)


@dataclass
class CalibrationExamples:
    """Measures of the words heard on held-out recordings, and whether each is right.

    ``own_words_removed`` marks the words heard with the recording's own words taken out of
    the lexicon, or in recordings with no command (backwards, jumbled, noise only): all
    wrong by construction; ``jumbled`` marks those heard in jumbled speech; ``source``
    says where each word was heard (one of :data:`SOURCES`; when not given, "held-out",
    "held-out, own words removed" or "jumbled" from the two marks).
    """

    measures: np.ndarray
    right: np.ndarray
    own_words_removed: np.ndarray
    jumbled: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))
    recordings: int = 0
    failed: list[str] = field(default_factory=list)
    source: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype="<U32"))

    def __post_init__(self) -> None:
        n = np.asarray(self.right).size
        if np.asarray(self.jumbled).size != n:
            self.jumbled = np.zeros(n, dtype=bool)
        if np.asarray(self.source).size != n:
            removed = np.asarray(self.own_words_removed, dtype=bool)
            self.source = np.where(np.asarray(self.jumbled, dtype=bool), "jumbled",
                                   np.where(removed, "held-out, own words removed", "held-out")).astype("<U32")

    def subset(self, keep: np.ndarray) -> "CalibrationExamples":
        """The examples whose rows ``keep`` (a boolean mask) marks."""
        keep = np.asarray(keep, dtype=bool)
        return CalibrationExamples(self.measures[keep], self.right[keep], self.own_words_removed[keep],
                                   self.jumbled[keep], self.recordings, list(self.failed), self.source[keep])


def split_held_out(utterances: Sequence, share: float, seed: int = 0) -> tuple[list, list]:
    """(training part, held-out part), both in manifest order.

    Per transcript, about ``share`` of its recordings (rounded at random so that the
    expected number is exact) are held out, evenly spaced in the recordings sorted by
    speaker, so every speaker gives about the same share; at least one recording of every
    transcript stays in training.
    """
    rng = np.random.default_rng(seed)
    groups: dict[tuple[str, ...], list[int]] = {}
    for i, u in enumerate(utterances):
        groups.setdefault(tuple(u.words), []).append(i)
    held: set[int] = set()
    for words in sorted(groups):
        members = groups[words]
        n = len(members)
        k = min(int(share * n + rng.random()), n - 1)
        if k <= 0:
            continue
        keys = rng.random(n)
        order = [members[j] for j in sorted(range(n), key=lambda j: (utterances[members[j]].speaker, keys[j]))]
        offset = rng.random()
        held.update(order[int((j + offset) * n / k)] for j in range(k))
    rest = [u for i, u in enumerate(utterances) if i not in held]
    return rest, [u for i, u in enumerate(utterances) if i in held]


def _prior_without(model, lexicon):
    """The model's word-pair prior over the smaller ``lexicon`` (None: uniform)."""
    counts = model.bigrams
    if not set(lexicon.words) <= set(counts.words):
        return None
    order = [0] + [counts.words.index(w) + 1 for w in lexicon.words]
    return estimate_prior(BigramCounts(tuple(lexicon.words), np.asarray(counts.counts)[np.ix_(order, order)]))


class _TwoWays:
    """A recognizer with the whole lexicon and, per set of own words, one without them
    (built when first needed); no confidence threshold."""

    def __init__(self, model, settings: DecoderSettings | None):
        self.model = model
        self.settings = replace(settings or DecoderSettings(), min_confidence=0.0)
        self.full = build_recognizer(model, settings=self.settings)
        self._without: dict[frozenset, object] = {}

    def without(self, words):
        """The recognizer without ``words``; None when there is nothing to remove or nothing would be left."""
        own = frozenset(words)
        others = [w for w in self.model.lexicon.words if w not in own]
        if not own or not others:
            return None
        if own not in self._without:
            lex = self.model.lexicon.restricted_to(others)
            self._without[own] = build_recognizer(self.model, settings=self.settings, lexicon=lex,
                                                  prior=_prior_without(self.model, lex))
        return self._without[own]

    def decode(self, frames, words, path: str) -> tuple[Recognition, Recognition | None]:
        """``(whole, without_own)`` of one clip that says ``words``."""
        rec = self.without(words)
        if rec is None:
            return self.full.decode(frames, path=path), None
        whole, without_own = self.full.decode_with(frames, [rec], path=path)  # state scores computed once
        return whole, without_own


def held_out_recognitions(model, utterances: Sequence, *, settings: DecoderSettings | None = None,
                          quiet: bool = True, speeds=(1.0,), jobs: int = 1
                          ) -> Iterator[tuple[object, Recognition | None, Recognition | None]]:
    """Recognise each recording with the whole lexicon and with its own words removed.

    Yields ``(utterance, whole, without_own)`` in order, once per speed factor of
    ``speeds`` (the recording played that many times faster): ``whole`` is None when the
    file cannot be read; ``without_own`` is None when there is nothing to remove (no
    command) or nothing would be left. No confidence threshold applies (``min_confidence`` 0).
    With ``jobs`` > 1 the recordings are shared among that many threads (as
    ``decoder.recognize_files``: the search releases the interpreter lock); the results
    are the same, in the same order.
    """
    two = _TwoWays(model, settings)
    utterances = list(utterances)
    with ProgressBar(len(utterances), "recognising held-out recordings", quiet=quiet) as bar:
        if jobs <= 1 or len(utterances) <= 1:
            for u in utterances:
                bar.update()
                yield from _recognise_one(two, model, u, speeds)
            return
        from joblib import Parallel, delayed

        for u in utterances:  # every recognizer built once, before the threads share them
            two.without(u.words)
        for got in Parallel(n_jobs=jobs, prefer="threads", return_as="generator")(
                delayed(_recognise_one)(two, model, u, speeds) for u in utterances):
            bar.update()
            yield from got


def _recognise_one(two: "_TwoWays", model, u, speeds) -> list:
    """``[(u, whole, without_own)]`` per speed of one recording (``[(u, None, None)]`` when unreadable)."""
    from wordspot.audio.features import compute_features
    from wordspot.training.data import speed_copy

    rate = model.features.sample_rate
    try:
        wave = _quiet_load(model, u.path)
        copies = [compute_features(speed_copy(wave, rate, f), model.features) for f in speeds]
    except WordspotError:
        return [(u, None, None)]
    out = []
    for frames in copies:
        try:
            whole, without_own = two.decode(frames, u.words, str(u.path))
        except WordspotError:
            out.append((u, None, None))
            continue
        out.append((u, whole, without_own))
    return out


def _quiet_load(model, path) -> np.ndarray:
    """The recording at the model's rate; training has warned about these files already."""
    from wordspot.audio.reading import load_audio

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_audio(path, sample_rate=model.features.sample_rate)


def _readable_waves(model, utterances: Sequence) -> list[tuple[str, np.ndarray]]:
    """(path, waveform at the model's rate) of every recording that can be read."""
    waves = []
    for u in utterances:
        try:
            waves.append((str(u.path), _quiet_load(model, u.path)))
        except WordspotError:
            continue
    return waves


def _recognitions(model, clips, settings: DecoderSettings | None) -> Iterator[Recognition]:
    """``(name, waveform)`` clips recognised with the whole lexicon (no threshold)."""
    from wordspot.audio.features import compute_features

    rec = build_recognizer(model, settings=replace(settings or DecoderSettings(), min_confidence=0.0))
    for name, wave in clips:
        try:
            yield rec.decode(compute_features(wave, model.features), path=name)
        except WordspotError:
            continue


def backwards_recognitions(model, utterances: Sequence, *, settings: DecoderSettings | None = None
                           ) -> Iterator[Recognition]:
    """Each readable recording played backwards, recognised with the whole lexicon (no threshold)."""
    clips = ((name, wave[::-1].copy()) for name, wave in _readable_waves(model, utterances))
    return _recognitions(model, clips, settings)


def jumbled_recognitions(model, utterances: Sequence, n: int, *, seed: int = 0,
                         settings: DecoderSettings | None = None) -> Iterator[Recognition]:
    """``n`` clips of jumbled speech from the readable recordings, recognised with the whole
    lexicon (no threshold)."""
    from wordspot.audio.jumble import jumbled_speech

    waves = [wave for _, wave in _readable_waves(model, utterances)]
    clips = jumbled_speech(waves, model.features.sample_rate, n, np.random.default_rng([seed, 0x6A756D62]))
    return _recognitions(model, (("jumbled held-out speech", c) for c in clips), settings)


def _speech_pool(items) -> dict:
    """Babble talkers: per speaker, (number, speech part) of up to
    ``training.noise.POOL_PER_SPEAKER`` of the ``(speaker, waveform, rate)`` items, in order."""
    from wordspot.audio.augment import speech_span
    from wordspot.training.noise import POOL_PER_SPEAKER

    pool: dict[str, list] = {}
    for k, (speaker, wave, rate) in enumerate(items):
        parts = pool.setdefault(str(speaker), [])
        if len(parts) < POOL_PER_SPEAKER:
            a, b = speech_span(wave, rate)
            parts.append((k, wave[a:b].copy()))
    return pool


def noisy_copies(waves: Sequence, speakers: Sequence, copies: int, *, snr_db=(5.0, 25.0), seed: int = 0,
                 sample_rate: int = 16000) -> list[tuple[int, np.ndarray]]:
    """``copies`` noisy copies of each waveform, copy-major: ``(number of the waveform, copy)``.

    The recipes are those of the training's noisy copies (:func:`wordspot.training.noise.plan_copies`:
    babble two times in three, of up to three to six other speakers' speech parts, never
    the recording itself; else steady noise), drawn from ``seed`` alone at an SNR from
    ``snr_db`` over the speech part (:func:`wordspot.training.noise.noisy_wave`).
    """
    from wordspot.audio.augment import NoiseSettings
    from wordspot.training.noise import noisy_wave, plan_copies

    if copies <= 0 or not len(waves):
        return []
    speakers = [str(s) for s in speakers]
    pool = _speech_pool([(spk, w, sample_rate) for spk, w in zip(speakers, waves)])
    recipes = plan_copies(speakers, NoiseSettings(copies=copies, snr_db=tuple(snr_db)), seed=_NOISY_STREAM + seed)
    return [(r.index, np.asarray(noisy_wave(waves[r.index], r, pool, sample_rate), dtype=np.float32))
            for r in recipes]


def joined_phrases(waves: Sequence, words: Sequence, speakers: Sequence, n: int, *, speeds=(1.0,),
                   seed: int = 0, sample_rate: int = 16000,
                   pause=(0.05, 0.3)) -> list[tuple[tuple[str, ...], np.ndarray]]:
    """``n`` phrases of 2-3 takes of one speaker: ``(words, waveform)``.

    Each take is cut to its speech part (:func:`wordspot.audio.augment.speech_span`, 20 ms
    kept on either side); the takes are joined by pauses of ``pause`` seconds (uniform)
    of the first take's room tone (its samples outside the speech part, looped; faint
    dither when it has none), with 0.2 s of it before and after; the phrase is played
    at one of ``speeds`` (drawn). Speakers take turns; a speaker with fewer than two
    takes is passed over. Seeded; [] when no speaker has two takes.
    """
    from wordspot.audio.augment import dithered_silence, speech_span
    from wordspot.training.data import speed_copy

    by_speaker: dict[str, list[int]] = {}
    for k, (w, spk) in enumerate(zip(words, speakers)):
        if len(w):
            by_speaker.setdefault(str(spk), []).append(k)
    names = [spk for spk in sorted(by_speaker) if len(by_speaker[spk]) >= 2]
    if n <= 0 or not names:
        return []
    rng = np.random.default_rng([seed, _PHRASE_STREAM])
    margin = int(0.02 * sample_rate)
    out = []
    for i in range(n):
        members = by_speaker[names[i % len(names)]]
        k = int(rng.integers(2, 4))
        picks = [members[j] for j in rng.choice(len(members), size=min(k, len(members)), replace=False)]
        cut = []
        for j in picks:
            w = np.asarray(waves[j], dtype=np.float32)
            a, b = speech_span(w, sample_rate)
            cut.append((w, max(a - margin, 0), min(b + margin, w.shape[0])))
        w0, a0, b0 = cut[0]
        tone = np.concatenate([w0[:a0], w0[b0:]])
        if tone.shape[0] < margin:
            tone = dithered_silence(sample_rate, rng).astype(np.float32)
        lead = int(0.2 * sample_rate)
        parts = [np.resize(tone, lead)]
        for m, (w, a, b) in enumerate(cut):
            parts.append(w[a:b])
            gap = int(rng.uniform(*pause) * sample_rate) if m < len(cut) - 1 else lead
            parts.append(np.resize(tone, gap))
        f = float(speeds[int(rng.integers(len(speeds)))])
        phrase = speed_copy(np.concatenate(parts).astype(np.float32), sample_rate, f)
        out.append((tuple(x for j in picks for x in words[j]), phrase))
    return out


def noise_only_clips(waves: Sequence, speakers: Sequence, n: int, *, seed: int = 0,
                     sample_rate: int = 16000) -> list[np.ndarray]:
    """``n`` background-only clips of 1-4 s at -60 to -20 dBFS (white, pink, hum, dither,
    fan, babble of the given speakers' speech parts), from the training's background
    recipes (:func:`wordspot.training.backgrounds.plan_backgrounds`) drawn from ``seed``."""
    from wordspot.training.backgrounds import BACKGROUND_KINDS, background_wave, plan_backgrounds

    if n <= 0:
        return []
    speakers = [str(s) for s in speakers]
    pool = _speech_pool([(spk, w, sample_rate) for spk, w in zip(speakers, waves)])
    recipes = plan_backgrounds(n, sorted(pool), seed=_CLIP_STREAM + seed, seconds=(1.0, 4.0),
                               levels=(-60.0, -20.0), kinds=BACKGROUND_KINDS + ("babble",))
    return [background_wave(r, pool, sample_rate) for r in recipes]


def clips_of_impacts(n: int, *, seed: int = 0, sample_rate: int = 16000) -> list[np.ndarray]:
    """``n`` clips of 1-4 s of impacts (:mod:`wordspot.audio.impacts`) at -50 to -20 dBFS
    over a faint room tone, from the training's background recipes
    (:func:`wordspot.training.backgrounds.plan_backgrounds`, kind "impacts") drawn from
    ``seed`` on a stream of their own."""
    from wordspot.training.backgrounds import background_wave, plan_backgrounds

    if n <= 0:
        return []
    recipes = plan_backgrounds(n, [], seed=_IMPACT_STREAM + seed, seconds=(1.0, 4.0), levels=(-50.0, -20.0),
                               kinds=("impacts",))
    return [background_wave(r, {}, sample_rate) for r in recipes]


def calibration_examples(model, utterances: Sequence, *, settings: DecoderSettings | None = None,
                         quiet: bool = True, speeds=(1.0,), backwards: bool = False, jumbled: int = 0,
                         seed: int = 0, noisy: int = 0, noise_snr_db=(5.0, 25.0), phrases: int = 0,
                         noise_clips: int = 0, impact_clips: int = 0, jobs: int = 1) -> CalibrationExamples:
    """Measures and right / wrong labels of the words :func:`held_out_recognitions` hears.

    Parameters
    ----------
    model : AcousticModel
        Trained without these recordings.
    utterances : sequence of Utterance
    settings : DecoderSettings, optional
        Default: the word loop (no confidence threshold in any case).
    speeds : tuple of float
        Speed factors at which every recording is recognised (see :class:`CalibrationConfig`).
    backwards : bool
        Add the words heard in the recordings played backwards, all wrong (counted with
        the own-words-removed stand-ins).
    jumbled : int
        Add the words heard in this many clips of jumbled speech, all wrong (counted with
        the own-words-removed stand-ins and marked in ``jumbled``).
    seed : int
        Seed of the jumbled clips, noisy copies, phrases, noise clips and impact clips.
    noisy, noise_snr_db, phrases, noise_clips, impact_clips
        Noisy copies per recording, their SNR range, joined phrases, background-only
        clips, clips of impacts (see :class:`CalibrationConfig`); each 0: none.
    jobs : int >= 1
        Threads recognising the held-out recordings (the same examples for any number).
    """
    from wordspot.audio.features import compute_features

    rows, right, removed, source, failed = [], [], [], [], []

    def add(segments, labels, where):
        rows.extend(s.measures for s in segments)
        right.extend(labels)
        removed.extend([where not in ("held-out", "noisy", "phrase")] * len(segments))
        source.extend([where] * len(segments))

    def all_wrong(recognitions, where="held-out, own words removed"):
        for got in recognitions:
            wrong = got.segments + got.dropped
            add(wrong, [False] * len(wrong), where)

    def both(whole, without_own, words, where):
        heard = whole.segments + whole.dropped
        add(heard, word_hits(words, [s.word for s in heard]), where)
        if without_own is not None:
            all_wrong([without_own], f"{where}, own words removed")

    for u, whole, without_own in held_out_recognitions(model, utterances, settings=settings, quiet=quiet,
                                                       speeds=speeds, jobs=jobs):
        if whole is None:
            if str(u.path) not in failed:
                failed.append(str(u.path))
            continue
        both(whole, without_own, u.words, "held-out")
    if backwards:
        all_wrong(backwards_recognitions(model, utterances, settings=settings), "backwards")
    if jumbled:
        all_wrong(jumbled_recognitions(model, utterances, jumbled, seed=seed, settings=settings), "jumbled")
    if noisy or phrases or noise_clips:
        readable = [(u, w) for u, w in ((u, _load_or_none(model, u.path)) for u in utterances) if w is not None]
        waves = [w for _, w in readable]
        speakers = [str(u.speaker) for u, _ in readable]
        rate = model.features.sample_rate
        two = _TwoWays(model, settings)

        def decode(wave, words, name):
            try:
                return two.decode(compute_features(wave, model.features), words, name)
            except WordspotError:
                return None, None

        for k, wave in noisy_copies(waves, speakers, noisy, snr_db=noise_snr_db, seed=seed, sample_rate=rate):
            u = readable[k][0]
            whole, without_own = decode(wave, u.words, f"{u.path} (noisy copy)")
            if whole is not None:
                both(whole, without_own, u.words, "noisy")
        for words, wave in joined_phrases(waves, [u.words for u, _ in readable], speakers, phrases,
                                          speeds=speeds, seed=seed, sample_rate=rate):
            whole, without_own = decode(wave, words, "joined held-out takes")
            if whole is not None:
                both(whole, without_own, words, "phrase")
        clips = noise_only_clips(waves, speakers, noise_clips, seed=seed, sample_rate=rate)
        all_wrong(_recognitions(model, (("noise-only clip", c) for c in clips), settings), "noise only")
    if impact_clips:
        clips = clips_of_impacts(impact_clips, seed=seed, sample_rate=model.features.sample_rate)
        all_wrong(_recognitions(model, (("clip of impacts", c) for c in clips), settings), "impacts")
    measures = np.array(rows, dtype=np.float64).reshape(len(rows), len(MEASURE_NAMES))
    source = np.array(source, dtype="<U32")
    return CalibrationExamples(measures, np.array(right, dtype=bool), np.array(removed, dtype=bool),
                               source == "jumbled", recordings=len(utterances) - len(failed),
                               failed=failed, source=source)


def _load_or_none(model, path) -> np.ndarray | None:
    try:
        return _quiet_load(model, path)
    except WordspotError:
        return None


def fit_calibration(examples: CalibrationExamples, *, config: CalibrationConfig = CalibrationConfig(),
                    names: Sequence[str] | None = None, quiet_skip: bool = False) -> Calibration | None:
    """The logistic regression of right / wrong on the measures, or None with one warning.

    ``names``: the measures to use (a subset of ``MEASURE_NAMES``, any order); default
    :func:`calibration_measures` of the examples. ``quiet_skip``: no warning when skipped
    (the caller says what it does instead). ``config.weight_signs`` bounds the weights'
    signs, ``config.cap_quantile`` caps the measures whose weight opposes their sign
    (:func:`contrary_caps`, at the right examples' quantile).
    """
    names = tuple(names) if names is not None else calibration_measures(examples.measures)
    x = examples.measures[:, [MEASURE_NAMES.index(n) for n in names]]
    n_right = int(examples.right.sum())
    n_wrong = int(examples.right.size - n_right)
    if examples.recordings < config.min_items or min(n_right, n_wrong) < config.min_per_class:
        if quiet_skip:
            return None
        warnings.warn(
            f"confidence calibration skipped: {examples.recordings} held-out recording(s) gave {n_right} right "
            f"and {n_wrong} wrong word(s); it needs {config.min_items} recordings and {config.min_per_class} "
            "words of each kind (record more takes, or raise the held-out share, --calibration-share); word "
            "confidences stay rough scores, not probabilities (the uncalibrated heuristic)",
            TrainingWarning,
            stacklevel=2,
        )
        return None
    try:
        signs = [MEASURE_SIGNS.get(n, 0) for n in names] if config.weight_signs else None
        cal = fit_logistic(x, examples.right.astype(int), names, penalty=config.penalty, signs=signs)
    except ValueError as exc:
        if not quiet_skip:
            warnings.warn(f"confidence calibration skipped: {exc}", TrainingWarning, stacklevel=2)
        return None
    if config.cap_quantile is None:
        return cal
    return contrary_caps(cal, x[examples.right.astype(bool)], config.cap_quantile)


def contrary_caps(cal: Calibration, right: np.ndarray, quantile: float) -> Calibration:
    """``cal`` with every measure whose weight opposes its sign in :data:`MEASURE_SIGNS`
    capped on its better side: from above at the ``quantile`` of the right words' values
    ``right`` (rows in the order of ``cal.names``) for a measure of sign +1, from below at
    the ``1 - quantile`` one for sign -1. Such a weight is right within the examples (the
    measure moves with others that carry the evidence) but, extended past them, would rate
    a word lower the better it fits; the cap stops that where the right words thin out.
    Limits ``cal`` already has are kept where tighter."""
    sign = np.array([MEASURE_SIGNS.get(n, 0) for n in cal.names])
    contrary = sign * cal.coefficients < 0
    right = np.asarray(right, dtype=np.float64).reshape(-1, len(cal.names))
    if not contrary.any() or right.shape[0] == 0:
        return cal
    upper = np.where(contrary & (sign > 0), np.quantile(right, quantile, axis=0), np.inf)
    lower = np.where(contrary & (sign < 0), np.quantile(right, 1.0 - quantile, axis=0), -np.inf)
    if cal.upper is not None:
        upper = np.minimum(upper, cal.upper)
    if cal.lower is not None:
        lower = np.maximum(lower, cal.lower)
    return replace(cal, lower=lower if np.isfinite(lower).any() else None,
                   upper=upper if np.isfinite(upper).any() else None)


def _fallback_usable(fallback, model) -> bool:
    """Whether ``model`` computes every measure the calibration ``fallback`` names."""
    from wordspot.decoding.confidence import POSTERIOR_MEASURE_NAMES

    if fallback is None or not set(fallback.names) <= set(MEASURE_NAMES):
        return False
    if set(fallback.names) & set(OWN_POSTERIOR_MEASURE_NAMES) and getattr(model, "own_scorer", None) is None:
        return False
    return getattr(model, "scorer", None) is not None or not set(fallback.names) & set(POSTERIOR_MEASURE_NAMES)


def _keep_fallback(model, fallback, why: str, say):
    """``model`` with the starting model's calibration ``fallback`` and the line saying so."""
    if not _fallback_usable(fallback, model):
        return model
    say(f"confidence calibration: {why}, so the model keeps the calibration it started with "
        "(fitted on many voices when that model was made); train again with more takes to fit your own")
    return replace(model, calibration=fallback, info={**model.info, "calibration": {
        "kept_from_start": True, "reason": why}})


#: Folds when even a split across the whole set holds out too few recordings: every
#: recording is held out once, from a model trained on the other folds.
CALIBRATION_FOLDS = 5


def held_out_parts(utterances: Sequence, config: CalibrationConfig) -> tuple[list[tuple[list, list]], str]:
    """The (training part, held-out part) pairs to calibrate on, and how they were made.

    In order of preference: ``config.held_out_share`` of each transcript's recordings
    (:func:`split_held_out`, "per transcript"); when that holds out fewer than
    ``config.min_items`` (transcripts that rarely repeat: sentences, one take per word),
    the same share of the whole set by recording, every speaker alike
    (:func:`wordspot.corpus.split_by_recording`, "across the set"); when that too is short,
    :data:`CALIBRATION_FOLDS` folds, so that every recording is held out once ("folds");
    with fewer than ``config.min_items`` recordings in all, none ("too few").
    """
    from wordspot.corpus import split_by_recording

    rest, held = split_held_out(utterances, config.held_out_share, config.seed)
    if len(held) >= config.min_items:
        return [(rest, held)], "per transcript"
    rest, held = split_by_recording(utterances, config.held_out_share, config.seed)
    if len(held) >= config.min_items:
        return [(rest, held)], "across the set"
    n = len(utterances)
    if n < max(config.min_items, CALIBRATION_FOLDS):
        return [], "too few"
    # every speaker's recordings dealt round the folds in a seeded order
    rng = np.random.default_rng([config.seed, 0x666F6C64])
    fold = np.empty(n, dtype=np.int64)
    k = 0
    for speaker in sorted({u.speaker for u in utterances}):
        members = [i for i, u in enumerate(utterances) if u.speaker == speaker]
        for i in rng.permutation(members):
            fold[i] = k % CALIBRATION_FOLDS
            k += 1
    return [([u for i, u in enumerate(utterances) if fold[i] != f], [u for i, u in enumerate(utterances) if fold[i] == f])
            for f in range(CALIBRATION_FOLDS)], "folds"


def recognised_share(held: Sequence, total: int, config: CalibrationConfig) -> list:
    """The held-out recordings to recognise for the calibration: all of ``held`` when they
    are at most ``config.held_out_share`` of ``total`` recordings (or ``config.min_items``),
    else about that many, the same share of every transcript (:func:`split_held_out`), so
    that holding out whole speakers costs no more decoding than holding out takes."""
    held = list(held)
    want = max(config.min_items, int(round(config.held_out_share * total)))
    if len(held) <= want:
        return held
    _, part = split_held_out(held, want / len(held), config.seed)
    return part if len(part) >= config.min_items else held


def _merged(parts: list[CalibrationExamples]) -> CalibrationExamples:
    """The examples of several held-out parts as one set."""
    if len(parts) == 1:
        return parts[0]
    return CalibrationExamples(
        np.concatenate([p.measures.reshape(-1, len(MEASURE_NAMES)) for p in parts]),
        np.concatenate([p.right for p in parts]), np.concatenate([p.own_words_removed for p in parts]),
        np.concatenate([p.jumbled for p in parts]), sum(p.recordings for p in parts),
        [f for p in parts for f in p.failed], np.concatenate([p.source for p in parts]))


def _trained(train: Callable, rest, held, again: bool = True):
    """``train(rest)``; a training function that can use them (adapting: to choose its
    strength) gets the held-out part too, and whether it will be called again on every
    recording (``again``)."""
    return train(rest, held_out=held, again=again) if getattr(train, "takes_held_out", False) else train(rest)


class _InThread:
    """``work()`` run in a thread while the calling thread does other work; :meth:`result`
    waits for it and raises what it raised."""

    def __init__(self, work: Callable, name: str):
        self.got = None
        self.error: BaseException | None = None
        self.thread = threading.Thread(target=self._run, args=(work,), daemon=True, name=name)
        self.thread.start()

    def _run(self, work):
        try:
            self.got = work()
        except BaseException as exc:  # handed to the thread that takes the result
            self.error = exc

    def result(self):
        self.thread.join()
        if self.error is not None:
            raise self.error
        return self.got


def train_calibrated(train: Callable, utterances: Sequence, *, config: CalibrationConfig = CalibrationConfig(),
                     quiet: bool = True, report: Callable[[str], None] | None = None, fallback=None,
                     jobs: int = 1):
    """Train with ``train(utterances) -> (model, summary)`` and store a fitted calibration.

    ``config.refit`` should be decided (:meth:`CalibrationConfig.decided`; None counts as
    False). Returns what the last
    call of ``train`` returned, its model carrying the calibration (or none, with a warning,
    when there was too little to fit on) and ``info["calibration"]`` describing the fit.
    The held-out recordings are ``train.speakers_apart(utterances)`` when ``train`` has
    that and it gives a split, else they come from :func:`held_out_parts`; with folds, ``train`` runs
    once per fold and the calibration is fitted on every fold's examples.

    ``jobs``: threads recognising the held-out recordings (the same calibration for any number).

    When ``train`` has ``runs_beside`` set, the training on every recording (``config.refit``)
    runs as soon as the held-out part's model is there, called as ``train(utterances,
    say=...)`` (its report lines kept and said afterwards, no progress bars), while the
    held-out recordings are recognised in a thread: the same result, less waiting where
    the recognition leaves a core idle.

    ``fallback``: the starting model's calibration (a starter's, fitted on many voices), kept
    instead when the held-out recordings are too few to fit one (said through ``report``,
    no warning), provided the trained model computes its measures.
    """
    say = report or (lambda line: None)
    utterances = list(utterances)
    apart = getattr(train, "speakers_apart", None)
    apart = apart(utterances) if apart is not None else None
    if apart is not None:
        parts, how = [apart], "whole speakers"
    else:
        parts, how = held_out_parts(utterances, config)
    if not parts:
        why = (f"{len(utterances)} recordings are fewer than the {config.min_items} needed to hold out "
               "enough to fit one for your voice")
        model, summary = train(utterances)
        if _fallback_usable(fallback, model):
            return _keep_fallback(model, fallback, why, say), summary
        warnings.warn(
            f"confidence calibration skipped: {why} (record more takes); word confidences stay rough "
            "scores, not probabilities (the uncalibrated heuristic)",
            TrainingWarning,
            stacklevel=2,
        )
        return model, summary
    examples = []
    final = None
    jumbled = config.jumbled if len(parts) == 1 else -(-config.jumbled // len(parts))
    phrases = config.phrases if len(parts) == 1 else -(-config.phrases // len(parts))
    noise_clips = config.noise_clips if len(parts) == 1 else -(-config.noise_clips // len(parts))
    impacts = config.impact_clips if len(parts) == 1 else -(-config.impact_clips // len(parts))
    for f, (rest, held) in enumerate(parts):
        if how == "folds":
            say(f"confidence calibration: fold {f + 1} of {len(parts)}: training on {len(rest)} recordings, "
                f"{len(held)} held out (too few recordings to hold out a share once)")
        elif how == "whole speakers":
            say(f"confidence calibration: training on {len(rest)} recordings, {len({u.speaker for u in held})} "
                f"speakers' {len(held)} recordings held out, as voices it has not heard")
        else:
            say(f"confidence calibration: training on {len(rest)} recordings, {len(held)} held out"
                + (" across the whole set (transcripts rarely repeat)" if how == "across the set" else ""))
        model, summary = _trained(train, rest, held, again=bool(config.refit))
        if how == "whole speakers":
            held = recognised_share(held, len(utterances), config)

        def recognise(model=model, held=held, f=f):
            return calibration_examples(model, held, settings=config.settings, quiet=quiet, speeds=config.speeds,
                                        backwards=config.backwards, jumbled=jumbled, seed=config.seed + f,
                                        noisy=config.noisy, noise_snr_db=config.noise_snr_db, phrases=phrases,
                                        noise_clips=noise_clips, impact_clips=impacts, jobs=jobs)

        if config.refit and f == len(parts) - 1 and getattr(train, "runs_beside", False):
            # the training on every recording needs nothing of the calibration's: the
            # held-out recordings are recognised in a thread meanwhile (threads only, so
            # worker processes are started by this thread alone); the same model as after
            recognising = _InThread(recognise, "wordspot-calibration")
            final_lines: list[str] = []
            final = train(utterances, say=final_lines.append)
            examples.append(recognising.result())
        else:
            examples.append(recognise())
    examples = _merged(examples)
    calibration = fit_calibration(examples, config=config, quiet_skip=_fallback_usable(fallback, model))
    n_right = int(examples.right.sum())
    n_jumbled = int(examples.jumbled.sum())
    n_noisy = int(np.char.startswith(examples.source, "noisy").sum())
    n_phrase = int(np.char.startswith(examples.source, "phrase").sum())
    n_clips = int((examples.source == "noise only").sum())
    n_impacts = int((examples.source == "impacts").sum())
    n_removed = int(examples.own_words_removed.sum()) - n_jumbled - n_clips - n_impacts
    conditions = "".join(f", {n} in {what}" for n, what, on in (
        (n_noisy, "noisy copies", config.noisy), (n_phrase, "joined phrases", config.phrases),
        (n_clips, "noise-only clips", config.noise_clips), (n_impacts, "clips of impacts", config.impact_clips))
        if on)
    say(f"confidence calibration: {examples.recordings} held-out recordings, {n_right} words right, "
        f"{examples.right.size - n_right} wrong ({n_removed} of them heard with the recording's own words "
        f"removed, {n_jumbled} in jumbled speech){conditions}" + ("" if calibration is not None else "; not fitted"))
    if config.refit:
        say(f"confidence calibration: training again on all {len(utterances)} recordings")
        if final is None:
            model, summary = train(utterances)
        else:
            for line in final_lines:
                say(line)
            model, summary = final
    if calibration is None:
        why = (f"the {examples.recordings} held-out recordings gave {n_right} right and "
               f"{examples.right.size - n_right} wrong words, too few to fit one for your voice")
        return _keep_fallback(model, fallback, why, say), summary
    model = replace(model, calibration=calibration,
                    info={**model.info, "calibration": {
                        "held_out_share": config.held_out_share, "seed": config.seed,
                        "held_out": how, "folds": len(parts),
                        **({"held_out_speakers": len({u.speaker for _, h in parts for u in h})}
                           if how == "whole speakers" else {}),
                        "held_out_recordings": examples.recordings, "right_words": n_right,
                        "wrong_words": int(examples.right.size - n_right),
                        "wrong_with_own_words_removed": n_removed,
                        "wrong_in_jumbled_speech": n_jumbled,
                        "jumbled_clips": jumbled * len(parts),
                        **({"noisy_copies": config.noisy, "noise_snr_db": list(config.noise_snr_db),
                            "words_in_noisy_copies": n_noisy} if config.noisy else {}),
                        **({"joined_phrases": phrases * len(parts), "words_in_phrases": n_phrase}
                           if config.phrases else {}),
                        **({"noise_clips": noise_clips * len(parts), "words_in_noise_clips": n_clips}
                           if config.noise_clips else {}),
                        **({"impact_clips": impacts * len(parts), "words_in_impact_clips": n_impacts}
                           if config.impact_clips else {}),
                        "measures": list(calibration.names),
                        **({"capped_measures": capped} if (capped := capped_measures(calibration)) else {}),
                        "refit_on_all": bool(config.refit)}})
    return model, summary


def capped_measures(cal: Calibration) -> list[str]:
    """The measures ``cal`` clips on either side."""
    lo = cal.lower if cal.lower is not None else np.full(len(cal.names), -np.inf)
    hi = cal.upper if cal.upper is not None else np.full(len(cal.names), np.inf)
    return [n for n, a, b in zip(cal.names, lo, hi) if np.isfinite(a) or np.isfinite(b)]


def calibration_note(model) -> str:
    """Which calibration ``model`` carries, in one plain sentence for the training summary."""
    info = model.info.get("calibration") or {}
    if model.calibration is None:
        return "word confidences: no calibration (rough scores, not probabilities)"
    if info.get("kept_from_start"):
        return ("word confidences: the starting model's calibration, fitted on many voices when it was made "
                f"({info.get('reason', 'too few takes for your own')})")
    if not info:
        return "word confidences: the calibration the model already carried"
    words = int(info.get("right_words", 0)) + int(info.get("wrong_words", 0))
    how = {"per transcript": "", "across the set": ", chosen across the whole set",
           "whole speakers": f", of {info.get('held_out_speakers')} speakers held out whole",
           "folds": f", each held out once in {info.get('folds')} folds"}.get(info.get("held_out", ""), "")
    return (f"word confidences: calibrated on your own recordings, {words} words heard in "
            f"{info.get('held_out_recordings')} held-out recordings{how}")
