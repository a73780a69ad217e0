"""Recognition: from a model and features (or audio files) to words, times and scores.

The search is token passing over a compiled network (:mod:`wordspot.decoding.network`) with beam
pruning (:mod:`wordspot.decoding.kernels`); the best path is traced back through the word
links at the end.

Per-word confidence (:mod:`wordspot.decoding.confidence`): every word gets its measures
(``WordSegment.measures``); the model's calibration, when it has one, turns them into
the probability that the word is right, otherwise a documented heuristic is used. Words
below the threshold (``DecoderSettings.min_confidence``) are dropped from the result and
kept in ``Recognition.dropped``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from wordspot.decoding import kernels as decode_kernels
from wordspot.decoding.context import COMMAND, FILLER, PAUSE, PathItem, keep_words
from wordspot.decoding.confidence import (CONFIDENCE_SCALE, DEFAULT_MIN_CONFIDENCE, NO_POSTERIORS, VOWEL_CLASSES,
                                          path_posterior_measures, usable_calibration,
                                          word_confidence, word_measures)
from wordspot.errors import DecodingError, WordspotError
from wordspot.audio.band import is_narrow_band
from wordspot.audio.features import compute_features
from wordspot.audio.voice_warp import choose_warp
from wordspot.acoustic.gmm import Mixtures, scoring_matrix
from wordspot.language.grammar import BigramPrior, GrammarSettings, prior_for_vocabulary
from wordspot.decoding.filler import FillerSettings, check_penalty
from wordspot.decoding.network import FIRST_WORD_ITEM, Network, compile_network
from wordspot.decoding.spans import Piece, piece_ends, piece_of, piece_path, piece_score, span_scores
from wordspot.audio.workspace import work_array

__all__ = [
    "DecoderSettings",
    "WordSegment",
    "Recognition",
    "Recognizer",
    "build_recognizer",
    "recognize_features",
    "recognize_file",
    "recognize_files",
    "CONFIDENCE_SCALE",
    "WORD_RULES",
]

#: How the confidence threshold judges the words of a phrase (``DecoderSettings.word_rule``).
WORD_RULES = ("word", "run", "inner")

REASON_TOO_SHORT = "too short"
REASON_SILENCE = "silence or noise only"
REASON_NO_PATH = "no complete path"
REASON_NO_COMMAND = "no command"
REASON_LOW_CONFIDENCE = "below the confidence threshold"
REASON_AMID_TALK = "amid other talk"


@dataclass(frozen=True)
class DecoderSettings:
    """How the search runs.

    Parameters
    ----------
    beam : float > 0
        Keep states within this many log units of the frame's best (``inf`` = no pruning).
    word_end_beam : float > 0
        Word ends further than this below the frame's best start no next word.
    state_limit : int > 0
        At most about this many states per frame (ties may keep a few more).
    grammar_weight : float >= 0
        Multiplies the log prior of every word-to-word link.
    insertion_penalty : float
        Added per word (negative: fewer, longer words).

        The defaults (3 and -60) were chosen on a dev split of the demo training voices
        (flite-awb, espeak-en-us-m1, espeak-en-gb-x-rp-m5 held out; model trained with
        the default speed and noise copies on the other ten voices, mixtures to 4).
        Word loop WER on the held-out voices: single words 2.2%, 90 synthesised dev
        phrases 2.5%, words in noise at 20 / 10 dB 30.5% / 46.2%. Stronger penalties
        (-100, -150) delete words in phrases (4.5%, 6.6%); weaker ones (-30) insert
        words in noise (n20 39%).
    single_word : bool
        Exactly one word per file (isolated commands).
    allow_empty : bool
        Allow the pause-only result (how silence comes out empty).
    filler : bool
        Let a free phone loop (talk that is no command) and pauses between words compete
        with the commands (:mod:`wordspot.decoding.filler`).
    filler_penalty : float <= 0
        Log units added for every phone the filler spells.
    pause_penalty : float <= 0
        Log units added when a pause between words begins.
    filler_frame_penalty : float <= 0
        Log units added for every frame the filler spells.
    min_confidence : float in [0, 1] or None
        Words with a lower confidence are dropped (kept in ``Recognition.dropped``). None:
        ``DEFAULT_MIN_CONFIDENCE`` when the model's confidence is calibrated, 0 (keep every
        word) when it is the heuristic.
    scorer_weight : float in [0, 1]
        Share of the model's state scorer (:mod:`wordspot.acoustic.scorer`) in the state
        scores: ``w * scorer_scale * (log posterior - log prior) + (1 - w) * mixture
        log-likelihood``. 0: the mixtures alone; 1: the network alone (the mixtures are
        then not computed). Ignored for a model without a scorer.
    scorer_scale : float > 0
        Multiplies the scorer's scaled log-likelihoods.
    talk_gap, talk_length : float >= 0
        Seconds: a kept word with at least ``talk_length`` of other talk (filler phones, or
        words below the threshold) closer than ``talk_gap`` before or after it (or after
        the commands said together with it) is dropped as said amid other talk
        (:mod:`wordspot.decoding.context`). ``talk_gap`` 0 turns this off; it applies only
        with a threshold above 0. Chosen on the demo's dev voices over three seeds
        (docs/experiments/2026-12-03-commands-amid-talk.md): other sentences with a
        command 23.9% -> 12.1% of files, real phrases WER 8.8% -> 9.7%.
    voice_warp : bool
        Warp each file's frequency axis by the factor under which its speech fits the
        model's voice mixture best (:mod:`wordspot.audio.voice_warp`), so that an unheard
        voice looks more like the training voices; no effect for a model without a voice
        mixture, for features handed in directly, or for scanned and live audio.
    word_rule : {"word", "run", "inner"}
        How the threshold judges the words of a phrase. "word" (default): each word by its
        own confidence. "run": the command words between pauses longer than ``run_pause``
        seconds form a run, judged whole by its words' mean confidence (kept or dropped
        together; a word alone is judged as with "word"). "inner": a run below the
        threshold by its mean is dropped whole; one above keeps its words above it and the
        weaker words between two of those ("timer [three] minutes"), not weak words at its
        ends. ``WordSegment.confidence`` stays the word's own
        (:func:`wordspot.decoding.context.keep_words`).
    run_pause : float >= 0
        See ``word_rule``.
    """

    beam: float = 250.0
    word_end_beam: float = 200.0
    state_limit: int = 2000
    grammar_weight: float = 3.0
    insertion_penalty: float = -60.0
    single_word: bool = False
    allow_empty: bool = True
    filler: bool = True
    filler_penalty: float = -100.0
    pause_penalty: float = -10.0
    filler_frame_penalty: float = 0.0
    min_confidence: float | None = None
    scorer_weight: float = 0.0
    scorer_scale: float = 1.0
    talk_gap: float = 0.2
    talk_length: float = 0.5
    voice_warp: bool = False
    word_rule: str = "word"
    run_pause: float = 0.5

    def __post_init__(self) -> None:
        m = self.min_confidence
        if m is not None and not (isinstance(m, (int, float)) and not isinstance(m, bool) and 0.0 <= m <= 1.0):
            raise DecodingError(f"min_confidence must be a number from 0 to 1 (or None for the default), got {m!r}")
        for name in ("beam", "word_end_beam"):
            value = getattr(self, name)
            if not (isinstance(value, (int, float)) and value > 0) or np.isnan(value):
                raise DecodingError(f"{name} must be a number > 0 (inf turns pruning off), got {value!r}")
        if not (isinstance(self.state_limit, (int, np.integer)) and self.state_limit > 0):
            raise DecodingError(f"state_limit must be a whole number > 0, got {self.state_limit!r}")
        w, sc = self.scorer_weight, self.scorer_scale
        if not (isinstance(w, (int, float)) and not isinstance(w, bool) and 0.0 <= w <= 1.0):
            raise DecodingError(f"scorer_weight (--scorer-weight) must be a number from 0 to 1, got {w!r}")
        if not (isinstance(sc, (int, float)) and not isinstance(sc, bool) and 0.0 < sc < np.inf):
            raise DecodingError(f"scorer_scale (--scorer-scale) must be a finite number > 0, got {sc!r}")
        if self.word_rule not in WORD_RULES:
            raise DecodingError(f"word_rule must be one of {', '.join(WORD_RULES)}, got {self.word_rule!r}")
        for name, option in (("talk_gap", " (--talk-gap)"), ("talk_length", " (--talk-length)"), ("run_pause", "")):
            g = getattr(self, name)
            if not (isinstance(g, (int, float)) and not isinstance(g, bool) and 0.0 <= g < np.inf):
                raise DecodingError(f"{name}{option} must be a number of seconds >= 0, got {g!r}")
        if not isinstance(self.voice_warp, (bool, np.bool_)):
            raise DecodingError(f"voice_warp must be true or false, got {self.voice_warp!r}")
        self.grammar  # validates weight and penalty
        for name, option in (("filler_penalty", " (--filler-penalty)"), ("pause_penalty", " (--pause-penalty)"),
                             ("filler_frame_penalty", "")):
            check_penalty(getattr(self, name), name + option)

    @property
    def grammar(self) -> GrammarSettings:
        """The grammar part of these settings."""
        from wordspot.errors import GrammarError

        try:
            return GrammarSettings(self.grammar_weight, self.insertion_penalty, self.single_word)
        except GrammarError as exc:
            raise DecodingError(str(exc)) from None

    @property
    def background(self) -> FillerSettings:
        """The filler part of these settings."""
        return FillerSettings(bool(self.filler), self.filler_penalty, self.pause_penalty, self.filler_frame_penalty)

    @classmethod
    def unpruned(cls, **changes) -> "DecoderSettings":
        """Settings with every kind of pruning switched off (exact Viterbi search)."""
        base = dict(beam=np.inf, word_end_beam=np.inf, state_limit=np.iinfo(np.int64).max)
        base.update(changes)
        return cls(**base)


@dataclass
class WordSegment:
    """One recognised word.

    Attributes
    ----------
    word : str
    pronunciation : tuple of str
    start, end : float
        Seconds; ``end`` excludes the optional pause after the word.
    first_frame, last_frame : int
        First and last frame of the word's phones, both inclusive (``end`` is the time just
        after ``last_frame``).
    acoustic : float
        Acoustic log score of the word (transitions included, trailing pause included).
    grammar : float
        Weighted log prior of the link into the word plus the insertion penalty.
    confidence : float in [0, 1]
        The probability that the word is right when the model is calibrated, else a
        heuristic (:mod:`wordspot.decoding.confidence`).
    measures : tuple of float
        The word's confidence measures, named by ``confidence.MEASURE_NAMES``.
    amid_talk : bool
        Dropped as said amid other talk (``DecoderSettings.talk_gap``), not for its confidence.
    """

    word: str
    pronunciation: tuple[str, ...]
    start: float
    end: float
    first_frame: int
    last_frame: int
    acoustic: float
    grammar: float
    confidence: float
    measures: tuple[float, ...] = ()
    amid_talk: bool = False


@dataclass
class Recognition:
    """The result for one file (or one feature matrix).

    Attributes
    ----------
    path : str or None
    segments : list of WordSegment
    score : float
        Total log score of the best path (-inf when there is none).
    reason : str
        Why the result is empty ("" when it is not).
    error : str
        Why the file could not be processed ("" when it could).
    duration : float
        Seconds of audio (frames times hop).
    narrow_band : bool
        The file carries (next to) nothing above 4 kHz although the model's rate could
        (see :mod:`wordspot.audio.band`): telephone-band audio given to a wideband model.
    dropped : list of WordSegment
        Words of the best path below the confidence threshold, or said amid other talk
        (``DecoderSettings.talk_gap``), left out of ``segments``.
    path_items : list of PathItem
        The best path's items in time order (:mod:`wordspot.decoding.context`): pauses,
        filler phones and words; a word's ``segment`` is its place among all the words
        heard, in time order (kept and dropped together).
    warp : float
        The frequency warp the file's features were computed with (1: none;
        ``DecoderSettings.voice_warp``).
    """

    path: str | None = None
    segments: list[WordSegment] = field(default_factory=list)
    score: float = float("-inf")
    reason: str = ""
    error: str = ""
    duration: float = 0.0
    narrow_band: bool = False
    dropped: list[WordSegment] = field(default_factory=list)
    path_items: list = field(default_factory=list)
    warp: float = 1.0

    @property
    def words(self) -> list[str]:
        return [s.word for s in self.segments]

    @property
    def text(self) -> str:
        return " ".join(self.words)

    @property
    def ok(self) -> bool:
        return not self.error


#: Precision of emission scoring during recognition (training scores in float64).
EMISSION_DTYPE = np.float32


@dataclass
class Recognizer:
    """A compiled network with the mixtures and timing it needs; decodes many inputs.

    Build with :func:`build_recognizer`; safe to reuse and to send to worker processes.
    """

    network: Network
    mixtures: Mixtures
    features: object
    settings: DecoderSettings
    hop: float
    calibration: object = None
    scorer: object = None  # the model's StateScorer when the settings give it a weight, else None
    posterior_scorer: object = None  # the model's StateScorer for the posterior measures (any weight)
    own_posterior_scorer: object = None  # the model's second network (own_scorer), for the own_ measures
    voice: object = None  # the model's VoiceMixture when the settings ask for a warp per file, else None
    _scoring: tuple | None = field(default=None, repr=False)
    _pieces: tuple | None = field(default=None, repr=False)
    _pron_pieces: dict = field(default_factory=dict, repr=False)
    _piece_prons: dict = field(default_factory=dict, repr=False)  # id of a piece in _pron_pieces -> pronunciation
    _filler_phones: tuple | None = field(default=None, repr=False)  # (unit -> number, number of each filler state)
    _vowel_tables: dict = field(default_factory=dict, repr=False)
    _units: dict | None = field(default=None, repr=False)

    def pieces(self) -> tuple[Piece | None, Piece, np.ndarray]:
        """The filler loop (phones and the pause; None without background words), all
        commands' pronunciations as one piece of the network (:mod:`wordspot.decoding.spans`),
        and the command (1..V) of each of that piece's states."""
        if self._pieces is None:
            net = self.network
            filler = None
            if net.background is not None:
                items = _background_items(net)
                filler = piece_of(net, items)
                # each filler state's unit (its item's single unit), numbered, for phone_margin
                names = [net.prons[int(i) - FIRST_WORD_ITEM][0] for i in net.item[np.isin(net.item, items)]]
                number = {n: k for k, n in enumerate(sorted(set(names)))}
                self._filler_phones = (number, np.array([number[n] for n in names], dtype=np.int64))
            items = net.word_pron[net.word_first[1]:net.word_first[net.n_words + 1]] + FIRST_WORD_ITEM
            commands = piece_of(net, items)
            state_word = net.pron_word[net.item[np.isin(net.item, items)] - FIRST_WORD_ITEM]
            self._pieces = (filler, commands, state_word)
        return self._pieces

    def margins(self, ll: np.ndarray, word: int, first: int, last: int, acoustic: float) -> tuple[float, float]:
        """Per-frame margins of a command's acoustic score over frames ``first..last``.

        Returns ``(filler, runner_up)``: over the best free sequence of phones and pauses
        (no penalties; NaN without background words), and over the best other command
        passing through those frames once (NaN with a one-word vocabulary).
        """
        filler, commands, state_word = self.pieces()
        span = last - first + 1
        f = np.nan if filler is None else (acoustic - piece_score(ll, first, last, filler, 0.0)) / span
        others = piece_ends(ll, first, last, commands)[state_word != word]
        r = (acoustic - others.max()) / span if others.size else np.nan
        return float(f), float(r)

    def word_path(self, ll: np.ndarray, pron: int, first: int, last: int
                  ) -> tuple[Piece, np.ndarray, np.ndarray, float]:
        """The best path of pronunciation ``pron`` through frames ``first..last``.

        Returns ``(piece, states, phones, score)``: the pronunciation's piece of the
        network, its local state and phone (0-based within the pronunciation) at each frame
        (:func:`~wordspot.decoding.spans.piece_path`), and the path's score (-inf where no
        path fits).
        """
        net = self.network
        item = pron + FIRST_WORD_ITEM
        got = self._pron_pieces.get(pron)
        if got is None:
            # recognition threads share this recogniser: setdefault keeps the first piece
            # made, so every thread gets the same object and its pronunciation is known
            got = self._pron_pieces.setdefault(pron, (piece_of(net, [item]), net.phone[net.item == item]))
            self._piece_prons[id(got[0])] = pron
        piece, phone_of = got
        states, score = piece_path(ll, first, last, piece)
        return piece, states, phone_of[states], score

    def phone_margin(self, ll: np.ndarray, pron: int, first: int, last: int, path=None) -> float:
        """Mean over a command's phones of each phone's per-frame margin over the filler.

        The pronunciation ``pron`` is aligned to frames ``first..last`` (its phones; the
        best path through its item, :meth:`word_path`, or ``path`` when given); over
        each phone's frames, that phone's own model (its filler item, passed once) is
        compared with the best free sequence of phones and pauses. Each phone counts the
        same however long it is, so one phone that fits badly shows even in a long word.
        NaN without background words.
        """
        filler = self.pieces()[0]
        if filler is None:
            return float("nan")
        net = self.network
        _, states, phones, score = path or self.word_path(ll, pron, first, last)
        if not np.isfinite(score):
            return float("nan")
        number, state_unit = self._filler_phones
        frames = np.flatnonzero(phones >= 0)
        k = phones[frames]
        present = np.unique(k)  # the phones the path passes through, in order
        if present.size == 0:
            return float("nan")
        a = np.full(len(net.prons[pron]), phones.size, dtype=np.int64)
        b = np.full(len(net.prons[pron]), -1, dtype=np.int64)
        np.minimum.at(a, k, frames)
        np.maximum.at(b, k, frames)
        a, b = first + a[present], first + b[present]
        units = np.array([number[net.prons[pron][j]] for j in present], dtype=np.int64)
        # each phone's own filler items (the filler's states of its unit; with no re-entry
        # the filler's items do not meet) against the free filler loop, over its frames
        own = span_scores(ll, a, b, filler, state_group=state_unit, groups=units)
        free = span_scores(ll, a, b, filler, 0.0)
        return float(np.mean((own - free) / (b - a + 1)))

    def posterior_measures(self, lp: np.ndarray, first: int, last: int, path) -> tuple[float, ...]:
        """The posterior measures of a command (``confidence.POSTERIOR_MEASURE_NAMES``).

        Parameters
        ----------
        lp : ndarray, shape (T, P)
            The state scorer's log posteriors in the network's mixture columns.
        first, last : int
            The word's phone frames (inclusive).
        path : tuple
            :meth:`word_path` of the word over those frames (on the emissions).

        Returns the measures of :func:`~wordspot.decoding.confidence.path_posterior_measures`
        (mean, mean of phone means, worst phone mean, ...) with the margin over the filler
        fourth, over the path's frames in a phone (a trailing pause state of the word left
        out); NaN where no path fits (and the margin NaN without background words).
        """
        piece, states, phones, score = path
        inside = phones >= 0  # frames in a phone (not in the word's trailing pause)
        if not np.isfinite(score) or not inside.any():
            return NO_POSTERIORS
        t = np.arange(first, last + 1)
        on_path = lp[t[inside], piece.mixture[states[inside]]]
        any_vowel, vowel_class = self._vowel_stand_ins(lp, t[inside], piece, states[inside], phones[inside])
        measures = path_posterior_measures(on_path, phones[inside], any_vowel, vowel_class)
        filler = self.pieces()[0]
        margin = float("nan")
        if filler is not None:
            own = piece_score(lp, first, last, piece)
            margin = (own - piece_score(lp, first, last, filler, 0.0)) / t.size
        return measures[:3] + (float(margin),) + measures[3:]

    def _vowel_stand_ins(self, lp: np.ndarray, t: np.ndarray, piece: Piece, states: np.ndarray,
                         phones: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Per frame ``t`` of the path (local ``states`` of ``piece``, a pronunciation's item):
        the log posterior of the best vowel and the log of the summed posteriors of the vowels
        of the listed vowel's class, in the state's position (the state's own elsewhere)."""
        best, group = self._vowel_columns(piece)
        own = lp[t, piece.mixture[states]]
        any_vowel = np.maximum(own, lp[t[:, None], best[states]].max(axis=1))
        cols = group[states]
        vowel_class = own.copy()
        rows = np.flatnonzero(cols[:, 0] >= 0)
        if rows.size:
            x = np.where(cols[rows] >= 0, lp[t[rows, None], np.maximum(cols[rows], 0)], -np.inf)
            top = x.max(axis=1)
            vowel_class[rows] = top + np.log(np.exp(x - top[:, None]).sum(axis=1))
        return any_vowel, vowel_class

    def _vowel_columns(self, piece: Piece) -> tuple[np.ndarray, np.ndarray]:
        """For each state of ``piece`` (one pronunciation, as :meth:`word_path` makes it): the
        network columns of every vowel in the same state position (the state's own column
        where it is no vowel), and those of the vowels of its class (-1 where none)."""
        pron = self._piece_prons[id(piece)]  # (no iterating over a dict other threads may grow)
        if pron not in self._vowel_tables:
            net = self.network
            units = self._unit_columns()
            item = pron + FIRST_WORD_ITEM
            names = net.prons[pron]
            phone_of = net.phone[net.item == item]
            class_of = {v: members for members in VOWEL_CLASSES.values() for v in members}
            vowels = [v for v in class_of if v in units]
            width = max(len(vowels), 1)
            best = np.repeat(piece.mixture[:, None], width, axis=1)
            group = np.full((piece.n_states, width), -1, dtype=np.int64)
            for s, k in enumerate(phone_of):
                if k < 0 or names[k] not in class_of:
                    continue
                position = s - int(np.flatnonzero(phone_of == k)[0])
                here = [units[v][position] for v in vowels if position < len(units[v])]
                best[s, :len(here)] = here
                mates = [units[v][position] for v in class_of[names[k]] if v in units and position < len(units[v])]
                group[s, :len(mates)] = mates
            self._vowel_tables[pron] = (best, group)
        return self._vowel_tables[pron]

    def _unit_columns(self) -> dict[str, np.ndarray]:
        """Each unit the network uses: the columns of its states, in order."""
        if self._units is None:
            net = self.network
            units: dict[str, np.ndarray] = {}
            for item in range(FIRST_WORD_ITEM, FIRST_WORD_ITEM + len(net.prons)):
                here = net.item == item
                phone_of, mixture = net.phone[here], net.mixture[here]
                for k, name in enumerate(net.prons[item - FIRST_WORD_ITEM]):
                    if name not in units:
                        units[name] = mixture[phone_of == k]
            self._units = units
        return self._units

    @property
    def min_confidence(self) -> float:
        """The threshold in force (see ``DecoderSettings.min_confidence``)."""
        if self.settings.min_confidence is not None:
            return float(self.settings.min_confidence)
        return DEFAULT_MIN_CONFIDENCE if self.calibration is not None else 0.0

    def emissions(self, frames: np.ndarray) -> np.ndarray:
        """Log-likelihood of every frame under every mixture the network uses, (T, P).

        The numbers of :func:`wordspot.acoustic.gmm.log_likelihoods` (one matrix product for all
        frames and components), computed in single precision: the product's weights are
        rounded to float32 once, and the sum over components is a compiled loop
        (:func:`wordspot.decoding.kernels.mixture_logsumexp_by_component`). Against the double-precision
        scores the difference is a few 1e-4 at most on the demo files, far below the
        score gaps the search decides on (same words on every demo test file, checked
        when this was introduced). Training keeps double precision.

        With a state scorer and ``settings.scorer_weight`` w > 0 the scores are
        ``w * scale * (log posterior - log prior) + (1 - w) * mixture log-likelihood`` for
        the same columns (:meth:`wordspot.acoustic.scorer.StateScorer.scaled_log_likelihoods`);
        with w = 1 the mixtures are not computed.
        """
        return self.emissions_and_posteriors(frames, posteriors=False)[0]

    def emissions_and_posteriors(self, frames: np.ndarray, *, posteriors: bool = True
                                 ) -> tuple[np.ndarray, np.ndarray | None]:
        """:meth:`emissions` and the state scorer's log posteriors, with one pass of the network.

        Returns ``(ll, lp)``: ``lp`` (T, P) float64 holds ``log P(state | window)`` in the
        network's mixture columns, or is None when the model has no state scorer (or
        ``posteriors`` is False); with a second network (the model's ``own_scorer``) it is
        the pair ``(lp, lp_own)``, the second computed the same way from that network.
        """
        s = self.settings
        w = float(s.scorer_weight) if self.scorer is not None else 0.0
        scorer = self.scorer if w > 0.0 else (self.posterior_scorer if posteriors else None)
        lp = net = None
        if scorer is not None:
            cols = self.network.used_mixtures
            # log_posteriors(frames)[:, cols] in float64, bit for bit (C order, so the
            # measures' compiled loops read it without a copy)
            z = scorer.column_log_posteriors(frames, cols, work=work_array)
            if posteriors and self.posterior_scorer is not None:
                lp = z
            if w > 0.0:
                # as StateScorer.scaled_log_likelihoods(frames, scale * w, columns=cols), in float32
                net = z.astype(np.float32)  # exactly the float32 numbers
                net -= scorer.log_prior[cols]
                if s.scorer_scale * w != 1.0:
                    net *= net.dtype.type(s.scorer_scale * w)
        if posteriors and self.own_posterior_scorer is not None:
            lp = (lp, self.own_posterior_scorer.column_log_posteriors(frames, self.network.used_mixtures,
                                                                      work=work_array))
        if w >= 1.0:
            return net.astype(np.float64), lp
        gmm = self._mixture_scores(frames)
        if w > 0.0:
            gmm *= 1.0 - w
            gmm += net
        return gmm, lp

    def _mixture_scores(self, frames: np.ndarray) -> np.ndarray:
        """The mixtures' log-likelihoods of :meth:`emissions`, (T, P) float64."""
        p, m = self.mixtures.n_mixtures, self.mixtures.n_components
        if self._scoring is None:
            w, c = scoring_matrix(self.mixtures)
            # columns component-major (component k of every mixture side by side), for
            # mixture_logsumexp_by_component: the same sums as mixture_logsumexp over (P, M)
            order = np.arange(p * m).reshape(p, m).T.ravel()
            self._scoring = (np.ascontiguousarray(w[:, order], dtype=EMISSION_DTYPE), c[order].astype(EMISSION_DTYPE))
        w, c = self._scoring
        x = np.asarray(frames, dtype=EMISSION_DTYPE)
        both = work_array("squares_and_frames", (x.shape[0], 2 * x.shape[1]), EMISSION_DTYPE)
        np.multiply(x, x, out=both[:, :x.shape[1]])
        both[:, x.shape[1]:] = x
        comp = work_array("component_scores", (x.shape[0], w.shape[1]), EMISSION_DTYPE)
        np.matmul(both, w, out=comp)
        comp += c
        return decode_kernels.mixture_logsumexp_by_component(comp.reshape(x.shape[0], m, p))

    def decode(self, frames: np.ndarray, *, path: str | None = None, kernel=None) -> Recognition:
        """Recognise one utterance given its features, shape (T, D)."""
        frames = _check_frames(frames, self.mixtures.dim)
        n = frames.shape[0]
        result = Recognition(path=path, duration=n * self.hop)
        net = self.network
        if n < net.min_frames:
            result.reason = _too_short(n, self.hop, net.min_frames)
            return result
        ll, lp = self.emissions_and_posteriors(frames)
        return self.search(ll, path=path, kernel=kernel, posteriors=lp)

    def shares_scores_with(self, other: "Recognizer") -> bool:
        """Whether ``other`` computes the same state scores from the same frames (same
        mixtures, columns, scorers and settings: e.g. the same model with fewer words)."""
        mine, theirs = self.mixtures, other.mixtures
        return (self.settings == other.settings and self.scorer is other.scorer
                and self.posterior_scorer is other.posterior_scorer
                and self.own_posterior_scorer is other.own_posterior_scorer
                and np.array_equal(self.network.used_mixtures, other.network.used_mixtures)
                and all(np.array_equal(a, b) for a, b in ((mine.weights, theirs.weights), (mine.means, theirs.means),
                                                          (mine.variances, theirs.variances))))

    def decode_with(self, frames: np.ndarray, others, *, path: str | None = None) -> list[Recognition]:
        """``[self.decode(frames)] + [o.decode(frames) for o in others]``, the state scores
        computed once when every one of ``others`` :meth:`shares_scores_with` this one
        (the same recognitions: the search gets the same numbers)."""
        others = list(others)
        if not all(self.shares_scores_with(o) for o in others):
            return [self.decode(frames, path=path)] + [o.decode(frames, path=path) for o in others]
        frames = _check_frames(frames, self.mixtures.dim)
        if frames.shape[0] < min([self.network.min_frames] + [o.network.min_frames for o in others]):
            return [self.decode(frames, path=path)] + [o.decode(frames, path=path) for o in others]
        ll, lp = self.emissions_and_posteriors(frames)
        return [r.search(ll, path=path, posteriors=lp) for r in [self] + others]

    def kernel_arguments(self, ll: np.ndarray) -> tuple:
        """The arguments of :func:`wordspot.decoding.kernels.decode` for emissions ``ll``."""
        net, s = self.network, self.settings
        return (
            np.ascontiguousarray(ll, dtype=np.float64),
            net.mixture, net.self_logp, net.arc_first, net.arc_dst, net.arc_logp, net.end_logp,
            net.tail, net.item, net.start_first, net.start_state, net.start_logp,
            net.pron_word, net.word_first, net.word_pron, net.unigram, net.backoff,
            net.pair_first, net.pair_next, net.pair_logp, net.single_word, net.allow_empty,
            float(s.beam), float(s.word_end_beam), int(min(s.state_limit, np.iinfo(np.int64).max)),
        )

    def search(self, ll: np.ndarray, *, path: str | None = None, kernel=None,
               posteriors: np.ndarray | None = None) -> Recognition:
        """Token passing given emission log-likelihoods.

        Parameters
        ----------
        ll : ndarray, shape (T, P)
            Column ``j`` scores mixture ``network.used_mixtures[j]`` of the model.
        kernel : callable, optional
            :func:`wordspot.decoding.kernels.decode` (default) or its reference version.
        posteriors : ndarray, shape (T, P), or pair of them, optional
            The state scorer's log posteriors in the same columns (see
            :meth:`emissions_and_posteriors`), for the posterior measures; None: those are NaN.
            A pair ``(lp, lp_own)`` adds the second network's for the ``own_`` measures.
        """
        posteriors, own_posteriors = posteriors if isinstance(posteriors, tuple) else (posteriors, None)
        net = self.network
        kernel = kernel or decode_kernels.decode
        ll = np.asarray(ll, dtype=np.float64)
        if ll.ndim != 2 or ll.shape[1] != net.used_mixtures.shape[0]:
            raise DecodingError(f"emissions must have shape (frames, {net.used_mixtures.shape[0]}), got {ll.shape}")
        result = Recognition(path=path, duration=ll.shape[0] * self.hop)
        if ll.shape[0] < net.min_frames:
            result.reason = _too_short(ll.shape[0], self.hop, net.min_frames)
            return result
        status, final, final_link, links, link_scores, _ = kernel(*self.kernel_arguments(ll))
        if status != decode_kernels.OK:
            result.reason = (
                f"{REASON_NO_PATH}: the recogniser lost track of the recording before its end (unclear "
                "sound or loud noise); record it again nearer the microphone, or let the search keep "
                "more guesses with a larger --beam"
            )
            return result
        result.score = float(final)
        chain = []
        k = int(final_link)
        while k >= 0:
            chain.append(k)
            k = int(links[k, 5])
        chain.reverse()  # chain[0] is the entry pause
        best_free = np.concatenate([[0.0], np.cumsum(ll.max(axis=1))])
        bg = net.background
        is_filler = [bg is not None and int(links[k, 0]) in bg.fillers for k in chain] + [False]
        _, _, s0, p0, e0 = (int(x) for x in links[chain[0], :5])
        items = [PathItem(FILLER if is_filler[0] else PAUSE, s0, p0, e0)]
        for i, (prev, k) in enumerate(zip(chain[:-1], chain[1:]), start=1):
            word, pron, start, phone_end, end = (int(x) for x in links[k, :5])
            if not net.is_command(word):
                items.append(PathItem(FILLER if is_filler[i] else PAUSE, start, phone_end, end))
                continue  # filler or pause between commands
            items.append(PathItem(COMMAND, start, phone_end, end, len(result.segments)))
            grammar = float(net.link_row(int(links[prev, 0]))[word])
            acoustic = float(link_scores[k] - link_scores[prev] - grammar)
            filler_margin, runner_up = self.margins(ll, word, start, end, acoustic)
            route = self.word_path(ll, pron, start, phone_end)
            measures = word_measures(acoustic=acoustic, best_free=best_free, start=start, phone_end=phone_end,
                                     end=end, n_phones=len(net.prons[pron]), filler_margin=filler_margin,
                                     runner_up_margin=runner_up,
                                     next_to_filler=int(is_filler[i - 1]) + int(is_filler[i + 1]),
                                     phone_filler_margin=self.phone_margin(ll, pron, start, phone_end, route),
                                     posterior=NO_POSTERIORS if posteriors is None else
                                     self.posterior_measures(posteriors, start, phone_end, route),
                                     own_posterior=NO_POSTERIORS if own_posteriors is None else
                                     self.posterior_measures(own_posteriors, start, phone_end, route))
            result.segments.append(
                WordSegment(
                    word=net.words[word - 1],
                    pronunciation=net.prons[pron],
                    start=start * self.hop,
                    end=(phone_end + 1) * self.hop,
                    first_frame=start,
                    last_frame=phone_end,
                    acoustic=acoustic,
                    grammar=grammar,
                    confidence=word_confidence(measures, self.calibration),
                    measures=measures,
                )
            )
        # confidence threshold (wordspot.decoding.confidence), then words said amid other talk
        # (wordspot.decoding.context)
        result.path_items = items
        words, threshold, st = result.segments, self.min_confidence, self.settings
        kept, inside = keep_words(items, [s.confidence for s in words], threshold,
                                  int(round(st.talk_gap / self.hop)), int(round(st.talk_length / self.hop)),
                                  None if st.word_rule == "word" else int(round(st.run_pause / self.hop)),
                                  inner=st.word_rule == "inner")
        for k in np.flatnonzero(inside):
            words[k].amid_talk = True
        result.segments = [s for k, s in enumerate(words) if kept[k]]
        result.dropped = [s for k, s in enumerate(words) if not kept[k]]
        if len(chain) <= 1:
            result.reason = f"{REASON_SILENCE}: the recording sounds more like a pause than like any word"
        elif result.dropped and not result.segments and inside.any():
            result.reason = (f"{REASON_AMID_TALK}: every word heard ({' '.join(s.word for s in result.dropped)}) "
                             f"has a confidence below {threshold:g} or was said amid other talk")
        elif result.dropped and not result.segments:
            result.reason = (f"{REASON_LOW_CONFIDENCE}: every word heard ({' '.join(s.word for s in result.dropped)}) "
                             f"has a confidence below {threshold:g}")
        elif not result.segments:
            result.reason = (f"{REASON_NO_COMMAND}: the recording sounds more like other talk or "
                             "background sound than like any of the command words (filler and pause models)")
        return result

    def file_frames(self, wave) -> tuple[np.ndarray, float]:
        """A file's features and the warp they were computed with: the factor chosen by the
        voice mixture (``DecoderSettings.voice_warp``), else 1 (unwarped)."""
        if self.voice is None:
            return compute_features(wave, self.features), 1.0
        warp, frames = choose_warp(wave, self.features, self.voice)
        return frames, warp

    def decode_file(self, path) -> Recognition:
        """Load, extract features and recognise; errors are recorded, never raised."""
        from wordspot.audio.reading import MIN_DURATION, audio_duration, load_audio

        name = os.fspath(path)
        try:
            wave = load_audio(path, sample_rate=self.features.sample_rate)
            frames, warp = self.file_frames(wave)
        except WordspotError as exc:
            # A readable file that is merely too short is a result, not a failure.
            try:
                seconds = audio_duration(path)
            except (WordspotError, OSError, ValueError, RuntimeError):
                seconds = 0.0
            if 0.0 < seconds < max(MIN_DURATION, self.network.min_frames * self.hop):
                return Recognition(
                    path=name, duration=seconds,
                    reason=f"{REASON_TOO_SHORT}: {seconds:.3f} s of sound, shorter than the shortest "
                    f"word with a pause before and after it "
                    f"({self.network.min_frames * self.hop:.2f} s); record a longer take",
                )
            return Recognition(path=name, error=str(exc))
        except (OSError, ValueError, RuntimeError) as exc:  # anything the readers let through
            return Recognition(path=name, error=f"{name}: cannot read the audio ({exc})")
        result = self.decode(frames, path=name)
        result.warp = warp
        result.narrow_band = is_narrow_band(wave, self.features.sample_rate)
        return result


def _background_items(net: Network) -> list[int]:
    """Items of the first copy of the filler (one per phone) and of the pause word."""
    bg = net.background
    return [int(p) + FIRST_WORD_ITEM for w in (bg.fillers[0], bg.pauses[0])
            for p in net.word_pron[net.word_first[w]:net.word_first[w + 1]]]


def _too_short(n: int, hop: float, need: int) -> str:
    return (
        f"{REASON_TOO_SHORT}: {n * hop:.2f} s of sound, shorter than the shortest word with a pause "
        f"before and after it ({need * hop:.2f} s, {need} frames); record a longer take"
    )


def _check_frames(frames, dim: int) -> np.ndarray:
    x = np.asarray(frames)
    if x.ndim != 2 or x.shape[1] != dim:
        raise DecodingError(f"features must have shape (frames, {dim}) for this model, got {x.shape}")
    if not np.all(np.isfinite(x)):
        raise DecodingError("features hold NaN or infinite values; check the audio")
    return x


def build_recognizer(model, *, settings: DecoderSettings | None = None, lexicon=None,
                     prior=None) -> Recognizer:
    """Compile the network for ``model`` once.

    Parameters
    ----------
    model : AcousticModel
    settings : DecoderSettings, optional
    lexicon : Lexicon, optional
        Replaces the model's vocabulary (any word whose units the model has); the prior
        then becomes uniform over the new words unless ``prior`` is given or the words
        are the same as the model's.
    prior : BigramPrior or path, optional
        A prior to use instead of the one estimated from the model's word-pair counts;
        a path is read as a prior file (see :mod:`wordspot.language.grammar`).

    Raises
    ------
    LexiconError, GrammarError, DecodingError
    """
    settings = settings or DecoderSettings()
    lex = lexicon if lexicon is not None else model.lexicon
    if isinstance(prior, BigramPrior):
        if tuple(prior.words) != tuple(lex.words):
            raise DecodingError("the prior covers other words than the lexicon")
        bigram = prior
    else:
        bigram = prior_for_vocabulary(lex.words, getattr(model, "bigrams", None), prior)
    net = compile_network(
        model.units, model.mixtures.n_mixtures, lex, bigram, settings.grammar, allow_empty=settings.allow_empty,
        filler=settings.background,
    )
    mix = model.mixtures
    sub = Mixtures(mix.weights[net.used_mixtures], mix.means[net.used_mixtures], mix.variances[net.used_mixtures])
    feats = model.features
    hop = feats.hop_length / feats.sample_rate
    calibration = usable_calibration(getattr(model, "calibration", None))
    scorer = getattr(model, "scorer", None) if settings.scorer_weight > 0 else None
    if scorer is not None and (scorer.n_classes != mix.n_mixtures or scorer.frame_dim != mix.dim):
        raise DecodingError(f"the model's state scorer has {scorer.n_classes} classes over frames of "
                            f"{scorer.frame_dim} values, but the model has {mix.n_mixtures} mixtures and frames "
                            f"of {mix.dim}")
    own = getattr(model, "scorer", None)
    if own is not None and own.inputs != "cepstra":
        # the decoder hands the scorer the model's features; other inputs are measured on
        # dev frames only so far (docs/experiments/2026-12-03-scorer-inputs.md)
        raise DecodingError(f"the model's state scorer reads {own.inputs} frames, which recognition does not "
                            "compute yet (only the cepstra the model's features are); use a model whose scorer "
                            "reads cepstra, such as the shipped starters")
    fits = own is not None and own.n_classes == mix.n_mixtures and own.frame_dim == mix.dim
    second = getattr(model, "own_scorer", None)
    if second is not None and not (second.inputs == "cepstra" and second.n_classes == mix.n_mixtures
                                   and second.frame_dim == mix.dim):
        raise DecodingError(f"the model's second state scorer has {second.n_classes} classes over {second.inputs} "
                            f"frames of {second.frame_dim} values, but the model has {mix.n_mixtures} mixtures and "
                            f"cepstra of {mix.dim}; train the model again")
    voice = getattr(model, "voice", None) if settings.voice_warp else None
    if voice is not None and voice.dim != mix.dim:
        raise DecodingError(f"the model's voice mixture has frames of {voice.dim} values, its mixtures {mix.dim}")
    return Recognizer(network=net, mixtures=sub, features=feats, settings=settings, hop=hop,
                      calibration=calibration, scorer=scorer, posterior_scorer=own if fits else None,
                      own_posterior_scorer=second, voice=voice)


def recognize_features(model, frames, *, settings: DecoderSettings | None = None, lexicon=None,
                       prior=None) -> Recognition:
    """Recognise one utterance from its features (T, D); see :func:`build_recognizer`."""
    return build_recognizer(model, settings=settings, lexicon=lexicon, prior=prior).decode(frames)


def recognize_file(model, path, *, settings: DecoderSettings | None = None, lexicon=None,
                   prior=None) -> Recognition:
    """Recognise one audio file; a file that fails to load gives ``error`` set."""
    return build_recognizer(model, settings=settings, lexicon=lexicon, prior=prior).decode_file(path)


def _decode_one(recognizer: Recognizer, path) -> Recognition:
    return recognizer.decode_file(path)


def recognize_files(model, paths, *, settings: DecoderSettings | None = None, lexicon=None,
                    prior=None, jobs: int = 1) -> list[Recognition]:
    """Recognise many files with one compiled network, in order.

    Files that fail to load get ``error`` set and the batch continues. With ``jobs > 1``
    the files are shared among that many threads (joblib): the search kernel releases
    the interpreter lock, and the network is shared rather than copied.
    """
    if not (isinstance(jobs, (int, np.integer)) and (jobs >= 1 or jobs == -1)):
        raise DecodingError(f"jobs must be a whole number >= 1 (or -1 for every core), got {jobs!r}")
    rec = build_recognizer(model, settings=settings, lexicon=lexicon, prior=prior)
    paths = [Path(p) for p in paths]
    if jobs == 1 or len(paths) <= 1:
        return [rec.decode_file(p) for p in paths]
    from joblib import Parallel, delayed

    return Parallel(n_jobs=jobs, prefer="threads")(delayed(_decode_one)(rec, p) for p in paths)
