"""Pronunciations learned from the user's own recordings.

People with an accent say some vowels differently from the lexicon's pronunciation. Their
training recordings show how they say each word, so training may add a pronunciation of
a word with one (or two) vowels moved to a neighbouring vowel when the recordings of that
word fit it clearly better than the listed one:

1. **Candidates** (:func:`candidates`): each listed pronunciation with one vowel, and
   optionally two, replaced by a neighbour from :data:`NEIGHBOUR_VOWELS`; never a
   pronunciation any word of the lexicon already has.
2. **Scores** (:func:`score_recording`): each recording of the word is aligned (Viterbi,
   the best path) under its transcript's chain twice: with the word's slot holding the
   listed pronunciations, and holding only the candidate. The gain is the difference of
   the two log-likelihoods of the best paths (other words keep their listed ones).
3. **Choice** (:func:`choose`): a candidate is added when its gain exceeds
   ``min_gain`` in at least ``min_share`` of one speaker's takes of the word (and there
   are at least ``min_takes`` of them), best first, at most ``per_word`` a word.

The alignments use the starting model's mixtures, before they are adapted to the
recordings: adapting on the listed pronunciation first would pull the listed vowel's
Gaussians towards the user's vowel and hide the difference.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from itertools import combinations

import numpy as np

from wordspot.acoustic import kernels
from wordspot.acoustic.gmm import Mixtures, scoring_matrix
from wordspot.acoustic.graph import compose
from wordspot.acoustic.hmm import graph_arrays
from wordspot.acoustic.units import UnitSet
from wordspot.errors import TrainingError
from wordspot.language.lexicon import Lexicon
from wordspot.training.data import chain_slots

__all__ = ["NEIGHBOUR_VOWELS", "LearningConfig", "candidates", "mixture_loglik", "score_recording",
           "choose", "learn", "with_learned", "regraphed", "learned_note"]

#: Each ARPAbet vowel's neighbours: the vowels accents commonly say in its place (our own
#: table of neighbours on the vowel chart and common accent moves, from memory).
NEIGHBOUR_VOWELS: dict[str, tuple[str, ...]] = {
    "IY": ("IH", "EY"), "IH": ("IY", "EH", "AH"), "EY": ("EH", "IY", "AY"), "EH": ("IH", "AE", "EY"),
    "AE": ("EH", "AA", "AH"), "AA": ("AO", "AE", "AH"), "AO": ("AA", "OW"), "OW": ("AO", "AW", "AH"),
    "UH": ("UW", "AH"), "UW": ("UH", "OW"), "AH": ("AA", "UH", "IH"), "ER": ("AH", "EH"),
    "AY": ("AA", "EY", "OY"), "AW": ("AA", "AE", "OW"), "OY": ("AO", "AY"),
}


@dataclass(frozen=True)
class LearningConfig:
    """Whether and how training learns pronunciations (configuration only).

    Parameters
    ----------
    enabled : bool
        Learn pronunciations at all.
    moves : int, 1 or 2
        Most vowels moved in one candidate.
    min_gain : float >= 0
        Log-likelihood (of a take's best path) by which a candidate must beat the listed
        pronunciations for that take to count for it.
    min_share : float in (0, 1]
        Share of one speaker's takes of a word the candidate must win.
    min_takes : int >= 1
        Fewest takes of a word by one speaker to learn from.
    per_word : int >= 1
        Most pronunciations added to one word.
    """

    enabled: bool = False
    moves: int = 2
    min_gain: float = 10.0
    min_share: float = 0.6
    min_takes: int = 2
    per_word: int = 1

    def __post_init__(self) -> None:
        if self.moves not in (1, 2):
            raise TrainingError(f"pronunciation learning: moves must be 1 or 2, got {self.moves!r}")
        if not (np.isfinite(self.min_gain) and self.min_gain >= 0):
            raise TrainingError(f"pronunciation learning: min_gain must be a number >= 0, got {self.min_gain!r}")
        if not 0.0 < self.min_share <= 1.0:
            raise TrainingError(f"pronunciation learning: min_share must be in (0, 1], got {self.min_share!r}")
        for name in ("min_takes", "per_word"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1:
                raise TrainingError(f"pronunciation learning: {name} must be a whole number >= 1, got {v!r}")


def candidates(word: str, lexicon: Lexicon, *, moves: int = 1) -> list[tuple[str, ...]]:
    """``word``'s listed pronunciations with one (up to ``moves``) vowels moved to a neighbour.

    In order: the listed pronunciations in turn, one move before two, vowels left to right,
    neighbours in table order; without repeats and without any pronunciation that some
    word of ``lexicon`` already has.
    """
    taken = {p for w in lexicon.words for p in lexicon.pronunciations(w)}
    out: list[tuple[str, ...]] = []
    for pron in lexicon.pronunciations(word):
        vowels = [k for k, p in enumerate(pron) if p in NEIGHBOUR_VOWELS]
        for n in range(1, moves + 1):
            for where in combinations(vowels, n):
                for pick in np.ndindex(*(len(NEIGHBOUR_VOWELS[pron[k]]) for k in where)):
                    new = list(pron)
                    for k, j in zip(where, pick):
                        new[k] = NEIGHBOUR_VOWELS[pron[k]][j]
                    new_t = tuple(new)
                    if new_t not in taken and new_t not in out:
                        out.append(new_t)
    return out


def mixture_loglik(frames: np.ndarray, mix: Mixtures, scoring=None) -> np.ndarray:
    """Log-likelihood of every frame under every mixture, shape (T, mixtures)."""
    w, c = scoring if scoring is not None else scoring_matrix(mix)
    w, c = np.ascontiguousarray(w), np.ascontiguousarray(c)
    x = np.ascontiguousarray(frames, dtype=np.float64)
    comp = kernels.score_components(x, w, c)
    ll, _ = kernels.mixture_posteriors(comp.reshape(x.shape[0], mix.weights.shape[0], mix.n_components))
    return ll


def _best_path(mixture_ll: np.ndarray, slots, units: UnitSet) -> float:
    graph = compose(slots, units)
    if mixture_ll.shape[0] < graph.min_frames():
        return float("-inf")
    score, _ = kernels.viterbi(np.ascontiguousarray(mixture_ll[:, graph.mixture]), *graph_arrays(graph))
    return float(score)


def score_recording(mixture_ll: np.ndarray, words, lexicon: Lexicon, units: UnitSet,
                    options: dict) -> dict:
    """Gains of candidate pronunciations on one recording.

    Parameters
    ----------
    mixture_ll : ndarray, shape (T, mixtures)
        :func:`mixture_loglik` of the recording.
    words : sequence of str
        Its transcript.
    options : dict of word -> list of pronunciations
        Candidates to try for the transcript's words (others are ignored).

    Returns
    -------
    dict of (word, pronunciation) -> float
        Best-path log-likelihood with the candidate in the word's slot minus that with
        the listed pronunciations (-inf where no path fits the candidate, the word's
        slots all changed together where it is said more than once; empty when no path
        fits the listed ones).
    """
    base_slots = chain_slots(words, lexicon, units)
    base = _best_path(mixture_ll, base_slots, units)
    out: dict = {}
    if not np.isfinite(base):
        return out
    for word in dict.fromkeys(words):
        places = [1 + 2 * k for k, w in enumerate(words) if w == word]
        for pron in options.get(word, ()):
            slots = list(base_slots)
            for s in places:
                slots[s] = [tuple(units.index(u) for u in pron)]
            out[(word, tuple(pron))] = _best_path(mixture_ll, slots, units) - base
    return out


def choose(gains, lexicon: Lexicon, config: LearningConfig) -> dict[str, list[tuple[str, ...]]]:
    """Pronunciations to add, from the gains of every take.

    Parameters
    ----------
    gains : iterable of (speaker, dict)
        Per recording: its speaker and :func:`score_recording`'s gains.

    Returns
    -------
    dict of word -> list of pronunciations
        Words in alphabetical order, at most ``config.per_word`` each, best first (by the
        share of takes won, then the median gain); none that another word has or is given.
    """
    takes: dict = {}   # (word, speaker) -> {pron: [gain, ...]}
    for speaker, g in gains:
        for (word, pron), v in g.items():
            takes.setdefault((word, speaker), {}).setdefault(pron, []).append(v)
    ranked: dict = {}  # word -> {pron: (share, median gain)}
    for (word, _speaker), by_pron in takes.items():
        for pron, values in by_pron.items():
            v = np.asarray(values)
            if v.size < config.min_takes:
                continue
            share = float(np.mean(v > config.min_gain))
            if share >= config.min_share:
                key = (share, float(np.median(v)))
                best = ranked.setdefault(word, {})
                best[pron] = max(best.get(pron, key), key)
    taken = {p: w for w in lexicon.words for p in lexicon.pronunciations(w)}
    out: dict = {}
    for word in sorted(ranked):
        for pron, _ in sorted(ranked[word].items(), key=lambda kv: (-kv[1][0], -kv[1][1], kv[0])):
            if len(out.get(word, [])) >= config.per_word:
                break
            if pron in taken:
                continue
            taken[pron] = word
            out.setdefault(word, []).append(pron)
    return out


def learn(items, speakers, lexicon: Lexicon, units: UnitSet, mix: Mixtures, config: LearningConfig,
          store: dict | None = None) -> dict[str, list[tuple[str, ...]]]:
    """Pronunciations to add from training ``items`` (recordings, with ``speakers`` beside
    them) aligned with ``mix``; background items are left out. ``store`` keeps each
    recording's gains between calls with the same lexicon and mixtures."""
    if not config.enabled:
        return {}
    options = {w: candidates(w, lexicon, moves=config.moves) for w in lexicon.words}
    store = {} if store is None else store
    scoring = None
    gains = []
    for it, speaker in zip(items, speakers):
        if it.background or not it.words:
            continue
        key = (it.path, it.words)
        if key not in store:
            if scoring is None:
                scoring = scoring_matrix(mix)
            ll = mixture_loglik(it.frames, mix, scoring)
            store[key] = score_recording(ll, it.words, lexicon, units, options)
        gains.append((speaker, store[key]))
    return choose(gains, lexicon, config)


def with_learned(lexicon: Lexicon, learned: dict) -> Lexicon:
    """``lexicon`` with the ``learned`` pronunciations after each word's listed ones."""
    if not learned:
        return lexicon
    entries = {w: list(lexicon.pronunciations(w)) + list(learned.get(w, ())) for w in lexicon.words}
    return Lexicon(entries, source=f"{lexicon.source} + learned pronunciations")


def regraphed(items, lexicon: Lexicon, units: UnitSet, again: bool = True) -> list:
    """``items`` with their chains composed again from ``lexicon`` (``again``; the features
    are shared, not copied), so that items prepared with another lexicon (kept between
    trainings of one run) follow this one; background items stay as they are."""
    if not again:
        return list(items)
    graphs: dict = {}
    out = []
    for it in items:
        if it.background:
            out.append(it)
            continue
        if it.words not in graphs:
            graphs[it.words] = compose(chain_slots(it.words, lexicon, units), units)
        out.append(replace(it, graph=graphs[it.words]))
    return out


def learned_note(learned: dict) -> str:
    """One plain sentence on the pronunciations learned ("" when none)."""
    if not learned:
        return ""
    cells = [f"'{w}' as you say it: {' '.join(p)}" for w, prons in sorted(learned.items()) for p in prons]
    return "pronunciations learned from your recordings: " + "; ".join(cells)
